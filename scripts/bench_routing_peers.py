#!/usr/bin/env python3
"""Side-by-side routing benchmark: broodcast, VROOM (pyvroom) and PyVRP on the same instances.

Usage (the first command writes the instances and broodcast's routes):

    cargo run --release --example bench_routing_peers -- --out target/peers.jsonl
    python3 -m pip install pyvrp pyvroom
    python3 scripts/bench_routing_peers.py target/peers.jsonl [--solomon-seconds 10]
        [--depot-seconds 1] [--write docs/performance-routing.md]

Every instance holds integer times (minutes x 100, rounded by the example), so all three
solvers see the same numbers. Each peer gets a wall-clock budget per instance and one thread
(VROOM: exploration level 5). Every solution, broodcast's included, is re-checked here by one
independent simulation (depart no earlier than the vehicle's start, wait for windows, start
service by the window's end, back by the vehicle's own end, load within its capacity). A
benchmark, not a test: nothing here runs in CI.
"""

import argparse
import json
import re
import statistics
import sys
import time
from datetime import timedelta


def check(inst, routes):
    """Independent check. routes: list of (vehicle index, [customer nodes 1..n]).
    Returns (drive, vehicles, served, problems)."""
    m = inst["matrix"]
    cs = inst["customers"]
    vs = inst["vehicles"]
    seen, used, drive, problems = set(), set(), 0, []
    for v, nodes in routes:
        if not nodes:
            continue
        if v in used:
            problems.append(f"vehicle {v} twice")
        used.add(v)
        veh = vs[v]
        t, prev, load = veh["start"], 0, 0
        for c in nodes:
            if c in seen:
                problems.append(f"customer {c} twice")
            seen.add(c)
            cu = cs[c - 1]
            drive += m[prev][c]
            t = max(t + m[prev][c], cu["earliest"])
            if t > cu["latest"]:
                problems.append(f"customer {c} late by {t - cu['latest']}")
            t += cu["service"]
            load += cu["demand"]
            prev = c
        drive += m[prev][0]
        t += m[prev][0]
        if t > veh["end"]:
            problems.append(f"vehicle {v} back {(t - veh['end']) / 100:.1f} min after its shift")
        if load > veh["capacity"]:
            problems.append(f"vehicle {v} over capacity")
    return drive, len(used), len(seen), problems


def solve_pyvrp(inst, seconds, seed):
    import pyvrp
    from pyvrp.stop import MaxRuntime

    m = pyvrp.Model()
    locs = [m.add_location(x=0, y=0) for _ in inst["matrix"]]
    depot = m.add_depot(locs[0])
    for v in inst["vehicles"]:
        m.add_vehicle_type(
            num_available=1,
            capacity=[v["capacity"]],
            start_depot=depot,
            end_depot=depot,
            tw_early=int(v["start"]),
            tw_late=int(v["end"]),
        )
    # Optional clients with a prize far above any drive: serve as many as possible first.
    prize = 10**9
    for i, c in enumerate(inst["customers"]):
        m.add_client(
            locs[i + 1],
            delivery=[c["demand"]],
            service_duration=int(c["service"]),
            tw_early=int(c["earliest"]),
            tw_late=int(c["latest"]),
            prize=prize,
            required=False,
        )
    for i, row in enumerate(inst["matrix"]):
        for j, d in enumerate(row):
            d = 0 if i == j else int(d)
            m.add_edge(locs[i], locs[j], distance=d, duration=d)
    t0 = time.perf_counter()
    res = m.solve(stop=MaxRuntime(seconds), seed=seed, display=False)
    secs = time.perf_counter() - t0
    routes = []
    for r in res.best.routes():
        # Scheduled activities: client indices count clients from 0, customer nodes from 1.
        routes.append((r.vehicle_type(), [a.idx + 1 for a in r if a.is_client()]))
    return routes, secs


def solve_vroom(inst, seconds):
    import vroom

    p = vroom.Input()
    p.set_durations_matrix(profile="car", matrix_input=[[int(x) for x in r] for r in inst["matrix"]])
    for k, v in enumerate(inst["vehicles"]):
        p.add_vehicle(
            vroom.Vehicle(
                id=k,
                start=0,
                end=0,
                capacity=[v["capacity"]],
                time_window=vroom.TimeWindow(int(v["start"]), int(v["end"])),
            )
        )
    for i, c in enumerate(inst["customers"]):
        p.add_job(
            vroom.Job(
                id=i + 1,
                location=i + 1,
                default_service=int(c["service"]),
                delivery=[c["demand"]],
                time_windows=[vroom.TimeWindow(int(c["earliest"]), int(c["latest"]))],
            )
        )
    t0 = time.perf_counter()
    sol = p.solve(exploration_level=5, nb_threads=1, timeout=timedelta(seconds=seconds))
    secs = time.perf_counter() - t0
    df = sol.routes
    routes = []
    for v, g in df.groupby("vehicle_id", sort=True):
        jobs = [int(x) for x, t in zip(g["id"], g["type"]) if t == "job"]
        routes.append((int(v), jobs))
    return routes, secs


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("jsonl")
    ap.add_argument("--solomon-seconds", type=float, default=10.0)
    ap.add_argument("--depot-seconds", type=float, default=1.0)
    ap.add_argument("--write", default=None, help="markdown file to update between markers")
    args = ap.parse_args()

    rows = []
    for line in open(args.jsonl):
        inst = json.loads(line)
        budget = args.solomon_seconds if inst["kind"] == "solomon" else args.depot_seconds
        row = {"name": inst["name"], "kind": inst["kind"], "n": len(inst["customers"])}
        for run in inst["broodcast"]:
            seed = run["seed"]
            b = check(inst, [(r["vehicle"], r["customers"]) for r in run["routes"]])
            pr, ps = solve_pyvrp(inst, budget, seed)
            p = check(inst, pr)
            row.setdefault("runs", []).append(
                {"seed": seed, "b": b, "bs": run["seconds"], "p": p, "ps": ps}
            )
        vr, vs = solve_vroom(inst, budget)
        row["v"], row["vs"] = check(inst, vr), vs
        rows.append(row)
        r0 = row["runs"][0]
        print(
            f"{inst['name']:>32}: broodcast {r0['b'][0] / 100:9.1f} ({r0['b'][1]} veh, "
            f"{r0['b'][2]} served, {len(r0['b'][3])} problems, {r0['bs']:.2f} s)  "
            f"vroom {row['v'][0] / 100:9.1f} ({row['v'][1]}, {row['v'][2]}, {len(row['v'][3])})  "
            f"pyvrp {r0['p'][0] / 100:9.1f} ({r0['p'][1]}, {r0['p'][2]}, {len(r0['p'][3])})",
            file=sys.stderr,
        )
    md = table(rows, args)
    print(md)
    if args.write:
        text = open(args.write).read()
        begin, end = "<!-- peers:begin -->", "<!-- peers:end -->"
        block = f"{begin}\n{md}\n{end}"
        if begin in text:
            text = re.sub(re.escape(begin) + ".*?" + re.escape(end), lambda _: block, text, flags=re.S)
        else:
            text = text.rstrip() + "\n\n" + block + "\n"
        open(args.write, "w").write(text)


def table(rows, args):
    out = []
    n_seeds = max(len(r["runs"]) for r in rows)
    out.append(
        f"Peers: VROOM (pyvroom, exploration 5, 1 thread) and PyVRP (MaxRuntime), "
        f"{args.solomon_seconds:g} s per Solomon instance and {args.depot_seconds:g} s per "
        f"depot-day; broodcast with its default work limits (no time limit). Drive in minutes "
        f"(Solomon: distance) after scaling by 100 and rounding; PyVRP and broodcast figures "
        f"are means over {n_seeds} seed(s). `ok` = routes that pass the independent check / "
        f"all routes. Ratio = broodcast ÷ best peer. Spread = largest minus smallest drive over "
        f"the seeds (broodcast / PyVRP).\n"
    )
    out.append("| instance | stops | broodcast drive (veh., s) | VROOM drive (veh., s) | PyVRP drive (veh., s) | ratio | spread b / P | served b/V/P | ok b/V/P |")
    out.append("|---|---:|---:|---:|---:|---:|---:|---:|---:|")
    kinds = ["depot-day", "busy-day"]
    tot = {k: {"b": 0, "v": 0, "p": 0, "best": 0, "bv": 0, "vv": 0, "pv": 0, "bs": 0.0, "vs": 0.0,
               "ps": 0.0, "days": 0, "worse": 0, "more_veh": 0} for k in kinds}
    bad = {"b": 0, "v": 0, "p": 0}
    for r in rows:
        runs = r["runs"]
        b = statistics.mean(x["b"][0] for x in runs) / 100
        p = statistics.mean(x["p"][0] for x in runs) / 100
        bveh = statistics.mean(x["b"][1] for x in runs)
        pveh = statistics.mean(x["p"][1] for x in runs)
        bs = statistics.mean(x["bs"] for x in runs)
        ps = statistics.mean(x["ps"] for x in runs)
        v, vveh, vs = r["v"][0] / 100, r["v"][1], r["vs"]
        served = (runs[0]["b"][2], r["v"][2], runs[0]["p"][2])
        okb = sum(1 for x in runs if not x["b"][3])
        okp = sum(1 for x in runs if not x["p"][3])
        okv = int(not r["v"][3])
        bad["b"] += len(runs) - okb
        bad["p"] += len(runs) - okp
        bad["v"] += 1 - okv
        peers = []
        if not r["v"][3] and served[1] >= served[0]:
            peers.append(v)
        if okp == len(runs) and served[2] >= served[0]:
            peers.append(p)
        ratio = f"{b / min(peers):.4f}" if peers and min(peers) > 0 else "–"
        spread = lambda key: max(x[key][0] for x in runs) / 100 - min(x[key][0] for x in runs) / 100
        out.append(
            f"| {r['name']} | {r['n']} | {b:.1f} ({bveh:g}, {bs:.2f}) | {v:.1f} ({vveh}, {vs:.2f}) | "
            f"{p:.1f} ({pveh:g}, {ps:.2f}) | {ratio} | {spread('b'):.1f} / {spread('p'):.1f} | "
            f"{served[0]}/{served[1]}/{served[2]} | {okb}/{len(runs)} {okv}/1 {okp}/{len(runs)} |"
        )
        if (
            r["kind"] in tot
            and okb == len(runs)
            and okv
            and okp == len(runs)
            and served[0] == served[1] == served[2]
        ):
            t = tot[r["kind"]]
            t["days"] += 1
            t["b"] += b
            t["v"] += v
            t["p"] += p
            t["best"] += min(v, p)
            t["bv"] += bveh
            t["vv"] += vveh
            t["pv"] += pveh
            t["bs"] += bs
            t["vs"] += vs
            t["ps"] += ps
            t["worse"] += int(b > 1.002 * min(v, p) + 1e-9)
            t["more_veh"] += int(bveh > min(vveh, pveh) + 1e-9)
    out.append("")
    for k in kinds:
        t = tot[k]
        if not t["days"]:
            continue
        best = min(t["v"], t["p"])
        out.append(
            f"{'Busy depot-days' if k == 'busy-day' else 'Depot-days'} where every solver's "
            f"routes pass the check and serve the same stops "
            f"({t['days']} of {sum(1 for r in rows if r['kind'] == k)}): broodcast "
            f"{t['b']:.1f} min with {t['bv']:g} vehicles in {t['bs']:.1f} s; VROOM "
            f"{t['v']:.1f} min, {t['vv']:g} vehicles, {t['vs']:.1f} s; PyVRP {t['p']:.1f} "
            f"min, {t['pv']:g} vehicles, {t['ps']:.1f} s. broodcast ÷ better peer's total: "
            f"{t['b'] / best:.4f}; ÷ sum of each day's better peer: {t['b'] / t['best']:.4f}. "
            f"Days more than 0.2 % over the day's better peer: {t['worse']}; days with more "
            f"vehicles (seed mean) than the fewer of the peers: {t['more_veh']}.\n"
        )
    sol = [r for r in rows if r["kind"] == "solomon"]
    if sol:
        rb = statistics.mean(
            statistics.mean(x["b"][0] for x in r["runs"]) / statistics.mean(x["p"][0] for x in r["runs"])
            for r in sol
        )
        tb = sum(statistics.mean(x["bs"] for x in r["runs"]) for r in sol)
        tp = sum(statistics.mean(x["ps"] for x in r["runs"]) for r in sol)
        out.append(
            f"Solomon: broodcast ÷ PyVRP distance, mean over instances of the per-instance "
            f"seed means: {rb:.4f}; time {tb:.1f} s against {tp:.1f} s ({tb / tp:.2f} ×)."
        )
    out.append(
        f"\nRoutes failing the independent check: broodcast {bad['b']}, VROOM {bad['v']}, "
        f"PyVRP {bad['p']} (solutions, not routes)."
    )
    return "\n".join(out)


if __name__ == "__main__":
    main()
