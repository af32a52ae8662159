#!/usr/bin/env bash
# Rendering many designs: N copies of the demo (each with its own id) in one call of
# `tauweave render FOLDER`, against N separate calls, one after another. Prints both wall
# times. Usage: benches/batch.sh [N=100] [FORMAT=html] [RUNS=design's own]
# (cargo build --release first; FORMAT `all` includes the PDF through typst).
set -euo pipefail
cd "$(dirname "$0")/.."
n="${1:-100}"
format="${2:-html}"
runs=()
if [ -n "${3:-}" ]; then runs=(--runs "$3"); fi
bin="$PWD/target/release/tauweave"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
mkdir -p "$work/designs"
for i in $(seq -w 1 "$n"); do
  sed "s/^  id: rx-preamp-ce$/  id: rx-preamp-ce-$i/" designs/rx-preamp-ce.yaml > "$work/designs/copy-$i.yaml"
done
cd "$work"
start=$(date +%s.%N)
"$bin" render designs --format "$format" "${runs[@]}" --out batch > /dev/null
mid=$(date +%s.%N)
for f in designs/*.yaml; do
  "$bin" render "$f" --format "$format" "${runs[@]}" --out "single/$(basename "$f" .yaml)" 2> /dev/null
done
end=$(date +%s.%N)
echo "machine: $(nproc) cores; $n copies of the demo, --format $format ${runs[*]}"
awk -v a="$start" -v b="$mid" -v c="$end" -v n="$n" 'BEGIN {
  printf "one call:         %.2f s (%.1f ms a design)\n", b - a, 1000 * (b - a) / n;
  printf "separate calls:   %.2f s (%.1f ms a design)\n", c - b, 1000 * (c - b) / n;
  printf "ratio:            %.2f\n", (c - b) / (b - a) }'
