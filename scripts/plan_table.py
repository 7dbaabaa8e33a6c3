"""`broodcast plan` end to end, two binaries side by side, one Markdown row per week.

For each week (a scenario folder, or `demo` for the built-in demo) runs BEFORE and then AFTER
under `/usr/bin/time -f "%e %M"`, one right after the other so that both times come from the
same minute of the same machine, and reads `summary.json` of each plan: objective, LP bound,
whole-vial bound, gap, and the LP note (working set and pricing rounds).

Usage: python3 scripts/plan_table.py BEFORE AFTER WEEK...
Prints a Markdown table; times are wall-clock seconds of one run each.
"""
import json
import re
import subprocess
import sys
import tempfile


def run(binary: str, week: str) -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        out = tmp + "/out"
        args = [binary, "plan"] + ([] if week == "demo" else [week]) + ["--out", out, "-q"]
        p = subprocess.run(["/usr/bin/time", "-f", "%e %M"] + args,
                           capture_output=True, text=True, check=True)
        seconds, kb = p.stderr.strip().splitlines()[-1].split()
        with open(out + "/summary.json") as f:
            s = json.load(f)
    lp = [n for n in s["notes"] if n.startswith("LP solved")]
    rounds = re.search(r"in (\d+) round", lp[0]).group(1) if lp else "whole"
    return {
        "s": float(seconds),
        "mb": int(kb) / 1024,
        "objective": s["objective"],
        "lp_bound": s["lp_bound"],
        "bound": s["bound"],
        "gap": s["gap"],
        "rounds": rounds,
    }


def main() -> None:
    before, after, weeks = sys.argv[1], sys.argv[2], sys.argv[3:]
    print("| week | `plan` s before | after | after / before | peak MB after | LP rounds "
          "(last solve) before → after | objective before | after | objective / LP bound "
          "after | gap after | LP bound equal |")
    print("|---|---:|---:|---:|---:|---|---:|---:|---:|---:|---|")
    for week in weeks:
        b = run(before, week)
        a = run(after, week)
        same = abs(a["lp_bound"] - b["lp_bound"]) <= 1e-6 * abs(b["lp_bound"])
        print(f"| {week} | {b['s']:.2f} | {a['s']:.2f} | {a['s'] / b['s']:.2f} | {a['mb']:.0f} "
              f"| {b['rounds']} → {a['rounds']} | {b['objective']:,.1f} | {a['objective']:,.1f} "
              f"| {a['objective'] / a['lp_bound'] if a['lp_bound'] else 0:.4f} | {100 * a['gap']:.2f} % "
              f"| {'yes' if same else 'NO'} |", flush=True)


if __name__ == "__main__":
    main()
