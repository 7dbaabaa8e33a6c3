"""Time HiGHS (highspy from PyPI) on an exported allocation model.

Usage: python3 scripts/highspy_time.py FILE.mps

Writes FILE.mps with `broodcast export-model DIR --out FILE.mps` first. Reads the free MPS,
solves it with HiGHS's default options (output off), and prints one line:

    read <s> solve <s> wall <s> status <status> objective <value>

`wall` runs from before the import of highspy to the end of the solve, so it is what a
Python caller pays for the LP alone; `broodcast plan` end to end also builds the model,
rounds to whole vials, routes and writes every output.
"""

import sys
import time

T0 = time.perf_counter()

import highspy  # noqa: E402  (timed on purpose)


def main() -> int:
    if len(sys.argv) != 2:
        print(__doc__.strip().splitlines()[2], file=sys.stderr)
        return 2
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    t = time.perf_counter()
    if h.readModel(sys.argv[1]) != highspy.HighsStatus.kOk:
        print(f"cannot read {sys.argv[1]} as MPS", file=sys.stderr)
        return 2
    read = time.perf_counter() - t
    t = time.perf_counter()
    h.run()
    solve = time.perf_counter() - t
    wall = time.perf_counter() - T0
    status = h.modelStatusToString(h.getModelStatus())
    objective = h.getInfo().objective_function_value
    print(
        f"read {read:.3f} solve {solve:.3f} wall {wall:.3f} "
        f"status {status} objective {objective:.6f}"
    )
    return 0 if h.getModelStatus() == highspy.HighsModelStatus.kOptimal else 1


if __name__ == "__main__":
    sys.exit(main())
