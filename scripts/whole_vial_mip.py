"""Whole-vial MIP of an exported allocation model, solved by HiGHS (highspy, PyPI).

An independent reference for `plan`'s whole-vial objective and bound: it reads the LP that
`broodcast export-model` writes (every feasible arc) and adds, from the rules in
docs/model.md, what whole releases need:

- every arc column x_a is integer (whole vials) with a binary z_a (the arc carries a release);
- one release per site: sum of z_a over the site's arcs <= 1 (policy.releases_per_site_week = 1);
- a block's release holds at least `min_release_wasps` live wasps: alive_a x_a >= min z_a, and
  x_a <= floor(max / alive_a) z_a;
- a request gets exactly its standard vials: x_a = per_request z_a.

Usage: python3 whole_vial_mip.py MODEL.mps MIN_WASPS PER_REQUEST [SECONDS]
Prints: `mip <objective> bound <dual bound> status <name> seconds <s>`.
Forced sites are not modelled (the generated weeks have none).
"""
import sys
import time

import highspy
import numpy as np


def main() -> None:
    path, min_wasps, per_request = sys.argv[1], float(sys.argv[2]), int(sys.argv[3])
    seconds = float(sys.argv[4]) if len(sys.argv) > 4 else 120.0
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.setOptionValue("time_limit", seconds)
    h.setOptionValue("mip_rel_gap", 1e-4)
    h.setOptionValue("threads", 1)
    if h.readModel(path) != highspy.HighsStatus.kOk:
        sys.exit("cannot read " + path)
    lp = h.getLp()
    ncol = lp.num_col_
    names = [h.getColName(j)[1] for j in range(ncol)]
    rows = [h.getRowName(i)[1] for i in range(lp.num_row_)]
    row_upper = lp.row_upper_
    a = lp.a_matrix_  # column-wise
    start, index, value = list(a.start_), list(a.index_), list(a.value_)
    arcs_of = {}
    info = {}
    for j, name in enumerate(names):
        if not name.startswith("x_"):
            continue
        site = name.split("_")[4]
        alive, cap, request = 0.0, None, False
        for k in range(start[j], start[j + 1]):
            r = rows[index[k]]
            if r.startswith("benefit_"):
                alive = -value[k]
            elif r.startswith("maxrelease_"):
                cap = row_upper[index[k]]
            elif r.startswith("request_"):
                request = True
        info[j] = (alive, cap, request)
        arcs_of.setdefault(site, []).append(j)
    # Integer vials.
    cols = sorted(info)
    h.changeColsIntegrality(len(cols), np.array(cols, dtype=np.int32),
                            np.array([highspy.HighsVarType.kInteger] * len(cols)))
    # Binary release indicators, one per arc column.
    z0 = h.getNumCol()
    n = len(cols)
    h.addVars(n, np.zeros(n), np.ones(n))
    h.changeColsIntegrality(n, np.arange(z0, z0 + n, dtype=np.int32),
                            np.array([highspy.HighsVarType.kInteger] * n))
    z_of = {j: z0 + i for i, j in enumerate(cols)}
    inf = highspy.kHighsInf
    for j in cols:
        alive, cap, request = info[j]
        z = z_of[j]
        if request:
            # x = per_request z
            h.addRow(0.0, 0.0, 2, np.array([j, z], dtype=np.int32),
                     np.array([1.0, -float(per_request)]))
        else:
            most = np.floor((cap + 1e-9) / alive) if alive > 0 else 1e6
            h.addRow(-inf, 0.0, 2, np.array([j, z], dtype=np.int32), np.array([1.0, -most]))
            h.addRow(0.0, inf, 2, np.array([j, z], dtype=np.int32),
                     np.array([alive, -min_wasps]))
    for site, js in arcs_of.items():
        idx = np.array([z_of[j] for j in js], dtype=np.int32)
        h.addRow(-inf, 1.0, len(idx), idx, np.ones(len(idx)))
    t = time.time()
    h.run()
    info_ = h.getInfo()
    print(f"mip {info_.objective_function_value!r} bound {info_.mip_dual_bound!r} "
          f"status {h.modelStatusToString(h.getModelStatus())} seconds {time.time() - t:.1f}")


if __name__ == "__main__":
    main()
