#!/usr/bin/env bash
# Runs every fuzz target for SECONDS (default 150) one after another, then minimises each
# corpus. Needs nightly and cargo-fuzz (`cargo install cargo-fuzz`). Logs go to LOGDIR.
# No sanitizer: the library forbids unsafe code, and without ASan the loader runs ~3x faster.
set -euo pipefail
cd "$(dirname "$0")"
SECONDS_PER_TARGET=${1:-150}
LOGDIR=${LOGDIR:-/tmp/broodcast-fuzz}
TARGETS=${TARGETS:-"scenario_json facilities_csv supply_csv blocks_geojson requests_csv scouting_csv fleet_csv overrides_csv travel_matrix"}
mkdir -p "$LOGDIR"
for t in $TARGETS; do
  case $t in
    scenario_json|blocks_geojson) dict=dict/json.dict; len=8192 ;;
    *) dict=dict/csv.dict; len=4096 ;;
  esac
  cargo +nightly fuzz run --sanitizer none -O "$t" "corpus/$t" -- \
    -max_total_time="$SECONDS_PER_TARGET" -timeout=5 -max_len="$len" -dict="$dict" \
    -print_final_stats=1 >"$LOGDIR/$t.log" 2>&1 || echo "$t: finding, see $LOGDIR/$t.log"
done
