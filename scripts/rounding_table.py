"""Whole-vial rounding table: plan objective, bounds and HiGHS's whole-vial MIP per week.

For each scenario folder: runs `examples/bench_rounding` built from the code under test
(AFTER, with ONLY_DIRS) and, when given, one built from an earlier commit (BEFORE, which also
runs its demo rows and generated week of `size` sites; only the folder's row is read), one
after the other so that both times come from the same minute of the same machine. HiGHS
results come from `scripts/whole_vial_mip.py` (highspy, PyPI), either run here
(--highs-seconds, with --broodcast to export each model) or read from a log of lines
`<folder name> ...` each followed by the script's `mip <objective> bound <dual bound> ...`.

Usage:
  python3 scripts/rounding_table.py --after BENCH [--before BENCH] \
      [--highs-log LOG | --highs-seconds S --broodcast BIN] DIR...
Prints a Markdown table. Times are wall-clock seconds of one `allocate` each.
"""
import argparse
import json
import os
import re
import subprocess
import sys


def bench_row(binary: str, folder: str, only: bool) -> list:
    env = dict(os.environ, BENCH_DIRS=folder)
    args = [binary]
    if only:
        env["ONLY_DIRS"] = "1"
    else:
        args.append("10")  # the smallest generated week the old benchmark insists on
    out = subprocess.run(args, env=env, capture_output=True, text=True, check=True).stdout
    for line in out.splitlines():
        cells = [c.strip() for c in line.strip("|").split("|")]
        if cells and cells[0] == folder:
            return cells
    sys.exit(f"no row for {folder} in the output of {binary}")


def highs(folder: str, seconds: float, binary: str) -> tuple:
    mps = folder.rstrip("/") + ".mps"
    subprocess.run([binary, "export-model", folder, "--out", mps], check=True,
                   capture_output=True)
    sc = json.load(open(os.path.join(folder, "scenario.json")))
    here = os.path.dirname(os.path.abspath(__file__))
    out = subprocess.run(
        [sys.executable, os.path.join(here, "whole_vial_mip.py"), mps,
         str(sc["agent"]["min_release_wasps"]),
         str(sc["policy"].get("dooryard_vials_per_request", 2)), str(seconds)],
        capture_output=True, text=True, check=True).stdout
    m = re.search(r"mip (\S+) bound (\S+)", out)
    return float(m.group(1)), float(m.group(2))


def main() -> None:
    p = argparse.ArgumentParser()
    p.add_argument("--after", required=True)
    p.add_argument("--before")
    p.add_argument("--highs-log")
    p.add_argument("--highs-seconds", type=float, default=0.0)
    p.add_argument("--broodcast")
    p.add_argument("dirs", nargs="+")
    a = p.parse_args()
    logged = {}
    if a.highs_log:
        name = None  # the folder name opens its entry; the mip line may follow later
        for line in open(a.highs_log):
            if re.match(r"g\S+ ", line):
                name = line.split()[0]
            m = re.search(r"mip (\S+) bound (\S+)", line)
            if m and name:
                logged[name] = (float(m.group(1)), float(m.group(2)))
    print("| week | objective | whole-vial bound | gap | LP bound | objective / LP bound "
          "| HiGHS MIP | HiGHS dual bound | objective / HiGHS MIP | objective before "
          "| time after / before |")
    print("|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    for d in a.dirs:
        name = os.path.basename(d.rstrip("/"))
        before = bench_row(a.before, d, False) if a.before else None
        after = bench_row(a.after, d, True)
        obj, lp, bound, t = float(after[4]), float(after[5]), float(after[6]), float(after[3])
        if a.highs_seconds > 0:
            mip, dual = highs(d, a.highs_seconds, a.broodcast)
        else:
            mip, dual = logged.get(name, (float("nan"), float("nan")))
        gap = 1 - obj / bound if bound > 0 else 0.0
        ratio_lp = obj / lp if lp > 0 else float("nan")
        ratio_mip = obj / mip if mip > 0 else float("nan")
        obj_before = f"{float(before[4]):.1f}" if before else ""
        tr = f"{t / float(before[3]):.2f}" if before and float(before[3]) > 0 else ""
        print(f"| {name} | {obj:.1f} | {bound:.1f} | {100 * gap:.2f} % | {lp:.1f} "
              f"| {ratio_lp:.4f} | {mip:.1f} | {dual:.1f} | {ratio_mip:.4f} | {obj_before} "
              f"| {tr} |", flush=True)


if __name__ == "__main__":
    main()
