#!/usr/bin/env bash
# End-to-end benchmark of trackswing on generated cases (not committed; regenerated on demand).
#
#   scripts/bench.sh [b1|b2|all] [--shards N] [--threads N]
#
# With --shards N the case runs as N shards (`run --shard K/N`, one after another here, as N jobs
# would run side by side on N machines), then `merge`; each shard's and the merge's wall time and
# peak memory are printed.
#
# B1 regional:    400×300 cells, 48 hourly steps, 6 levels, 41 cross × 3 along = 123 scenarios.
# B2 continental: 1800×1060 cells, 24 three-hourly steps, 6 levels, 41 scenarios.
# Each case is generated once into target/bench/ by the demo storm generator, then run end to end
# (reading the steps from disk, writing every layer): B1 as GeoTIFF steps, B2 as GRIB2 files (one
# per valid time, running-total precipitation), the format a continental model run arrives in. Prints wall time, cell·step·scenario
# evaluations per second, peak resident memory (GNU time -v) and the engine's own time split.
set -euo pipefail
cd "$(dirname "$0")/.."
which_case=${1:-all}
shift || true
shards=0
if [ "${1:-}" = "--shards" ]; then
  shards=$2
  shift 2
fi
threads_args=("$@")

cargo build --release --quiet
bin=${TRACKSWING_BIN:-target/release/trackswing}
root=target/bench
mkdir -p "$root"

# timed LABEL LOG COMMAND...: runs COMMAND under GNU time, prints wall time, peak memory and the
# command's second output line (its time split).
timed() {
  local label=$1 log=$2
  shift 2
  /usr/bin/time -v "$@" > "$log.stdout" 2> "$log"
  local wall rss
  wall=$(grep "Elapsed (wall clock)" "$log" | awk '{print $NF}')
  rss=$(grep "Maximum resident set size" "$log" | awk '{print $NF}')
  echo "== $label: wall $wall, peak RSS $((rss / 1024)) MiB"
  echo "   $(sed -n 2p "$log.stdout")"
}

run_case() {
  local name=$1 nx=$2 ny=$3 steps=$4 hours=$5 cross=$6 along=$7 format=${8:-}
  local dir=$root/$name
  if [ ! -f "$dir/case.toml" ] || [ "$(cat "$dir/.spec" 2>/dev/null)" != "$nx $ny $steps $hours $format" ]; then
    rm -rf "$dir"
    echo "== generating $name ($nx×$ny, $steps steps of $hours h, 6 levels${format:+, $format})"
    "$bin" make-demo --out "$dir" --nx "$nx" --ny "$ny" --steps "$steps" --step-hours "$hours" --levels 6 $format
    echo "$nx $ny $steps $hours $format" > "$dir/.spec"
  fi
  local out=$root/$name-out log=$root/$name.log
  rm -rf "$out" "$out.shards"
  if [ "$shards" -gt 0 ]; then
    local k
    for k in $(seq 1 "$shards"); do
      timed "$name shard $k/$shards" "$log" "$bin" run "$dir/case.toml" --out "$out" \
        --cross="$cross" --along="$along" --shard "$k/$shards" ${threads_args[@]+"${threads_args[@]}"}
    done
    timed "$name merge of $shards shards" "$log" "$bin" merge "$dir/case.toml" --out "$out" \
      --cross="$cross" --along="$along" ${threads_args[@]+"${threads_args[@]}"}
    du -sh "$out.shards" "$out" | sed 's/^/   /'
    return
  fi
  /usr/bin/time -v "$bin" run "$dir/case.toml" --out "$out" --cross="$cross" --along="$along" \
    ${threads_args[@]+"${threads_args[@]}"} > "$log.stdout" 2> "$log"
  local wall rss line
  wall=$(grep "Elapsed (wall clock)" "$log" | awk '{print $NF}')
  rss=$(grep "Maximum resident set size" "$log" | awk '{print $NF}')
  line=$(sed -n 2p "$log.stdout")
  echo "== $name: wall $wall, peak RSS $((rss / 1024)) MiB"
  echo "   $line"
  du -sh "$dir" "$out" | sed 's/^/   /'
}

case $which_case in
  b1) run_case b1 400 300 48 1 -100:100:5 -60:60:60 ;;
  b2) run_case b2 1800 1060 24 3 -100:100:5 0 --grib2 ;;
  all)
    run_case b1 400 300 48 1 -100:100:5 -60:60:60
    run_case b2 1800 1060 24 3 -100:100:5 0 --grib2
    ;;
  *) echo "usage: scripts/bench.sh [b1|b2|all] [--shards N] [--threads N]" >&2; exit 2 ;;
esac
