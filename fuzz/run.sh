#!/usr/bin/env bash
# Fuzzes every target for SECONDS (default 120) one after another, then minimises each corpus
# into fuzz/corpus/<target>. Needs nightly and cargo-fuzz (`cargo install cargo-fuzz`).
# No sanitizer (the library forbids unsafe code) and no compare tracing (the dictionaries give
# the magic words): the loader builds a csv DFA per file, which tracing slowed eightfold.
# The binaries are built once and then run directly, so editing the source meanwhile does not
# change what is being fuzzed. Logs go to LOGDIR.
set -euo pipefail
cd "$(dirname "$0")"
SECONDS_PER_TARGET=${1:-120}
LOGDIR=${LOGDIR:-/tmp/broodcast-fuzz}
TARGETS=${TARGETS:-"scenario_json facilities_csv supply_csv blocks_geojson requests_csv scouting_csv fleet_csv overrides_csv travel_matrix"}
BIN=target/x86_64-unknown-linux-gnu/release
mkdir -p "$LOGDIR"
cargo +nightly fuzz build --sanitizer none -O --no-trace-compares
for t in $TARGETS; do
  case $t in
    scenario_json|blocks_geojson) dict=dict/json.dict; len=8192 ;;
    *) dict=dict/csv.dict; len=4096 ;;
  esac
  mkdir -p "artifacts/$t" "$LOGDIR/work/$t"
  cp -n "corpus/$t"/* "$LOGDIR/work/$t/" 2>/dev/null || true
  "$BIN/$t" -artifact_prefix="artifacts/$t/" -max_total_time="$SECONDS_PER_TARGET" -timeout=5 \
    -max_len="$len" -dict="$dict" -print_final_stats=1 "$LOGDIR/work/$t" \
    >"$LOGDIR/$t.log" 2>&1 || echo "$t: finding, see $LOGDIR/$t.log"
  # Minimise: a greedy set cover of the features, into the committed corpus folder.
  rm -rf "$LOGDIR/min/$t" && mkdir -p "$LOGDIR/min/$t"
  "$BIN/$t" -set_cover_merge=1 -timeout=5 -max_len="$len" "$LOGDIR/min/$t" "$LOGDIR/work/$t" \
    >"$LOGDIR/$t.cmin.log" 2>&1
  rm -rf "corpus/$t" && cp -r "$LOGDIR/min/$t" "corpus/$t"
  echo "$t: $(ls "corpus/$t" | wc -l) files, $(du -sk "corpus/$t" | cut -f1) KiB"
done
