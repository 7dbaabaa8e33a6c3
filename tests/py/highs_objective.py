"""Solve free-MPS files with HiGHS (highspy from PyPI) and print one objective per line.

Usage: python3 highs_objective.py FILE.mps [FILE.mps ...]
Prints `<objective>` for an optimal model, or `status <name>` otherwise.
"""
import sys

import highspy


def main() -> None:
    for path in sys.argv[1:]:
        h = highspy.Highs()
        h.setOptionValue("output_flag", False)
        h.setOptionValue("primal_feasibility_tolerance", 1e-9)
        h.setOptionValue("dual_feasibility_tolerance", 1e-9)
        status = h.readModel(path)
        if status != highspy.HighsStatus.kOk:
            print(f"status read-error")
            continue
        h.run()
        ms = h.getModelStatus()
        if ms == highspy.HighsModelStatus.kModelEmpty:
            # No column at all (no arc can carry a whole release): the optimum is 0.
            print(f"{0.0!r} {h.getLp().sense_}")
            continue
        if ms != highspy.HighsModelStatus.kOptimal:
            print(f"status {h.modelStatusToString(ms)}")
            continue
        sense = h.getLp().sense_
        print(f"{h.getInfo().objective_function_value!r} {sense}")


if __name__ == "__main__":
    main()
