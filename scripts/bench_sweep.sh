#!/usr/bin/env bash
# Wall time of a 5-point demo sweep against one demo plan, in alternating runs of one session
# (this machine is noisy: compare the ratio, not the seconds). Prints a Markdown table.
#   scripts/bench_sweep.sh [RUNS] [EXTRA SWEEP ARGS...]     (default 5 runs)
set -euo pipefail
cd "$(dirname "$0")/.."
runs=${1:-5}
shift || true
cargo build --release --quiet
bin=target/release/broodcast
out=$(mktemp -d)
trap 'rm -rf "$out"' EXIT
wall() { /usr/bin/time -f %e "$@" >/dev/null 2>"$out/time" || { cat "$out/time"; exit 1; }; tail -1 "$out/time"; }
plans=() sweeps=()
for _ in $(seq "$runs"); do
  plans+=("$(wall "$bin" plan --out "$out/plan")")
  sweeps+=("$(wall "$bin" sweep --supply 0.25,0.5,1,2,4 "$@" --out "$out/sweep")")
done
median() { printf '%s\n' "$@" | sort -g | awk '{a[NR]=$1} END{print (NR%2)?a[(NR+1)/2]:(a[NR/2]+a[NR/2+1])/2}'; }
mp=$(median "${plans[@]}") ms=$(median "${sweeps[@]}")
echo "| command | wall s ($runs runs) | median |"
echo "|---|---|---|"
echo "| \`broodcast plan\` (demo) | ${plans[*]} | $mp |"
echo "| \`broodcast sweep --supply 0.25,0.5,1,2,4 $*\` (demo) | ${sweeps[*]} | $ms |"
awk -v s="$ms" -v p="$mp" 'BEGIN{printf "\nratio sweep / plan (medians): %.2f×\n", s/p}'
