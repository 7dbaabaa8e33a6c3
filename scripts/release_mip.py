"""Whole-vial MIP in release form, built from an exported allocation model, solved by HiGHS.

A second independent reference beside `whole_vial_mip.py`: where that script adds integer
vials and release flags to the arc columns of the model `broodcast export-model` writes, this
one enumerates every whole release instead, one binary column per (site, arc, vials), with
the rules of docs/model.md:

- a block's release holds min..max live wasps at arrival (`min_release_wasps`,
  `max_release_wasps`: the `maxrelease_<site>` row's right-hand side); a request's is its
  standard vial count;
- its value is the site's benefit of those live wasps (the `u1_`/`u2_` columns' prices and
  upper bounds) less the arc's travel cost per vial (the arc column's objective);
- one release per site (policy.releases_per_site_week = 1), and every shared row of the
  export (pack-day supply, depot-day vehicles, parcel days, the dooryard share floor) with
  each release counting its vials.

Block releases worth nothing are left out (they only take vials and lower the share); every
request release is kept, since the share floor may need it. Forced sites are not modelled
(the generated weeks have none).

Usage: python3 release_mip.py MODEL.mps MIN_WASPS PER_REQUEST [SECONDS] [--plan]
Prints: `columns <n> sites <n>` and `mip <objective> bound <dual bound> status <name> nodes
<n> seconds <s>` (highspy from PyPI, one thread, the time limit is HiGHS's own); with
`--plan`, then one line per release of the best plan: `release <arc column> <vials> <value>`.
"""
import sys
import time
from collections import defaultdict

import highspy
import numpy as np

SHARED = ("supply", "vehicles", "parcel", "dooryard")


def read_mps(path: str):
    """Row senses, right-hand sides, column entries and upper bounds of a free MPS file."""
    senses, rhs, cols, upper = {}, defaultdict(float), defaultdict(dict), {}
    section = None
    with open(path) as f:
        for line in f:
            if line.startswith("*"):
                continue
            if not line.startswith(" "):
                section = line.split()[0]
                continue
            t = line.split()
            if section == "ROWS":
                senses[t[1]] = t[0]
            elif section == "COLUMNS":
                cols[t[0]][t[1]] = float(t[2])
            elif section == "RHS":
                rhs[t[1]] = float(t[2])
            elif section == "BOUNDS" and t[0] == "UP":
                upper[t[2]] = float(t[3])
    return senses, rhs, cols, upper


def main() -> None:
    path, min_wasps, per_request = sys.argv[1], float(sys.argv[2]), int(sys.argv[3])
    args = [a for a in sys.argv[4:] if a != "--plan"]
    seconds = float(args[0]) if args else 120.0
    senses, rhs, cols, upper = read_mps(path)
    shared = [r for r in senses if r.split("_")[0] in SHARED]

    def benefit(site: str, wasps: float) -> float:
        p1, p2 = cols["u1_" + site].get("obj", 0.0), cols["u2_" + site].get("obj", 0.0)
        u1, u2 = upper["u1_" + site], upper["u2_" + site]
        return p1 * min(wasps, u1) + p2 * min(max(wasps - u1, 0.0), u2)

    releases = []  # (site, value, vials, {shared row: coefficient per vial})
    for name, entries in cols.items():
        if not name.startswith("x_"):
            continue
        site = name.split("_")[4]
        alive = -entries["benefit_" + site]
        if alive <= 0:
            continue
        rows = {r: v for r, v in entries.items() if r in senses and r.split("_")[0] in SHARED}
        if "request_" + site in entries:
            sizes = [per_request]
        else:
            most = rhs["maxrelease_" + site]
            sizes = [k for k in range(1, int(most / alive) + 2)
                     if min_wasps - 1e-9 <= k * alive <= most + 1e-9]
        for k in sizes:
            value = benefit(site, k * alive) + k * entries.get("obj", 0.0)
            if value > 0 or "request_" + site in entries:
                releases.append((site, value, k, rows, name))
    n = len(releases)
    print(f"columns {n} sites {len({r[0] for r in releases})}")
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.setOptionValue("time_limit", seconds)
    h.setOptionValue("mip_rel_gap", 1e-6)
    h.setOptionValue("threads", 1)
    idx = np.arange(n, dtype=np.int32)
    h.addVars(n, np.zeros(n), np.ones(n))
    h.changeColsCost(n, idx, np.array([r[1] for r in releases]))
    h.changeObjectiveSense(highspy.ObjSense.kMaximize)
    h.changeColsIntegrality(n, idx, np.array([highspy.HighsVarType.kInteger] * n))
    inf = highspy.kHighsInf
    by_site = defaultdict(list)
    terms = defaultdict(list)
    for j, (site, _, k, rows, _) in enumerate(releases):
        by_site[site].append(j)
        for r, c in rows.items():
            terms[r].append((j, c * k))
    for js in by_site.values():
        h.addRow(-inf, 1.0, len(js), np.array(js, dtype=np.int32), np.ones(len(js)))
    for r in shared:
        t = terms[r]
        if t:
            lo, hi = (-inf, rhs[r]) if senses[r] == "L" else (rhs[r], inf)
            h.addRow(lo, hi, len(t), np.array([j for j, _ in t], dtype=np.int32),
                     np.array([c for _, c in t]))
    start = time.time()
    h.run()
    info = h.getInfo()
    print(f"mip {info.objective_function_value!r} bound {info.mip_dual_bound!r} "
          f"status {h.modelStatusToString(h.getModelStatus())} nodes {info.mip_node_count} "
          f"seconds {time.time() - start:.1f}")
    if "--plan" in sys.argv[4:]:
        for j, z in enumerate(h.getSolution().col_value):
            if z > 0.5:
                print(f"release {releases[j][4]} {releases[j][2]} {releases[j][1]:.1f}")


if __name__ == "__main__":
    main()
