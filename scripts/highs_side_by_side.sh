#!/usr/bin/env bash
# The "HiGHS side by side" measurements of docs/performance.md: one binary built with the
# `highs` feature, both solvers back to back per scenario, then highspy (PyPI) on the MPS of
# the 35,000-site week. One run; prints what the table needs.
#
#   cargo build --release --features highs --bin broodcast --example stage_times
#   pip install highspy
#   bash scripts/highs_side_by_side.sh WORKDIR      # WORKDIR is created if missing
set -u
cd "$(dirname "$0")/.."
W=${1:?usage: highs_side_by_side.sh WORKDIR}
B=$PWD/target/release/broodcast
S=$PWD/target/release/examples/stage_times
mkdir -p "$W"
for n in 1000 5000 35000; do
  [ -d "$W/g$n" ] || "$B" generate --sites $n --seed 1 --out "$W/g$n" >/dev/null
done
[ -f "$W/g35000.mps" ] || "$B" export-model "$W/g35000" --out "$W/g35000.mps" >/dev/null
echo "start $(date -u +%FT%TZ) load: $(cut -d' ' -f1-3 /proc/loadavg)"
for sc in demo g1000 g5000 g35000; do
  dir=()
  [ $sc = demo ] || dir=("$W/$sc")
  for solver in clarabel highs; do
    rm -rf "$W/out-$sc-$solver"
    echo "== plan $sc $solver (load $(cut -d' ' -f1 /proc/loadavg))"
    /usr/bin/time -f "TIME %e s %M KB" "$B" plan "${dir[@]}" --solver $solver \
      --out "$W/out-$sc-$solver" 2>&1 | grep -E "TIME|objective|LP solver|LP solved"
    echo "== stage_times $sc $solver"
    "$S" "${dir[@]}" --solver $solver 2>&1 | grep -E "solver|allocate|sites"
  done
done
echo "== highspy g35000 (load $(cut -d' ' -f1 /proc/loadavg))"
/usr/bin/time -f "TIME %e s %M KB" python3 scripts/highspy_time.py "$W/g35000.mps" 2>&1 |
  grep -v -E "^(Running|Includes)"
echo "end $(date -u +%FT%TZ) load: $(cut -d' ' -f1-3 /proc/loadavg)"
