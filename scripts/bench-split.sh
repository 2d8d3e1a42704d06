#!/usr/bin/env bash
# Split-run benchmark: the default spec over a generated corpus, run phase
# by phase as 1 task and as 2 tasks (separate processes, one worker each,
# as array tasks on two cores would be), compared byte for byte. Prints
# wall seconds and peak RSS per phase, the speed-up, and the bytes each
# document phase writes per input document.
#
#   scripts/bench-split.sh [SIZE]          default 1GB (uncompressed text)
#   BENCH_DIR=/tmp/winnow-split CHUNK=16MiB scripts/bench-split.sh 200MB
#
# With PIN=1 (the default) task i is pinned to core i with taskset, as a
# Slurm array task given one CPU (--cpus-per-task=1, cgroup-bound) is; the
# one-task run is pinned to core 0. PIN=0 lets every process use every
# core (a task then uses more than one: its reader, collector and
# compressors are goroutines of their own).
set -euo pipefail
cd "$(dirname "$0")/.."

SIZE=${1:-1GB}
PIN=${PIN:-1}
CHUNK=${CHUNK:-16MiB}
DIR=${BENCH_DIR:-$(mktemp -d /tmp/winnow-split.XXXX)}
mkdir -p "$DIR"
go build -o "$DIR/winnow" ./cmd/winnow
W="$DIR/winnow"
if [ ! -d "$DIR/corpus" ]; then
  "$W" gen --out "$DIR/corpus" --bytes "$SIZE" --files 16 --seed 1 >/dev/null
fi
# The default spec, reading the generated corpus, cut into CHUNK units.
sed -e 's#"raw/#"corpus/#' -e 's#"evals/#"corpus/evals/#' -e "s#^memory:.*#&\nchunk_bytes: $CHUNK#" \
  configs/default.yaml > "$DIR/spec.yaml"
phases=$("$W" check "$DIR/spec.yaml" --phases)
docs=$(python3 -c "import json;print(json.load(open('$DIR/corpus/gen.json'))['docs'])" 2>/dev/null || echo 0)

run_tasks() { # OUT TASKS
  local out=$1 n=$2 total=0
  rm -rf "$out"
  for p in $phases; do
    local t0 t1 rss=0
    t0=$(date +%s.%N)
    for ((i = 0; i < n; i++)); do
      pin=()
      [ "$PIN" = 1 ] && pin=(taskset -c "$((i % $(nproc)))")
      "${pin[@]}" /usr/bin/time -f '%M' -o "$out.$p.$i.time" "$W" run "$DIR/spec.yaml" --out "$out" --phase "$p" \
        --task "$i" --tasks "$n" --workers 1 -q >/dev/null 2>"$out.$p.$i.err" &
    done
    wait
    t1=$(date +%s.%N)
    for ((i = 0; i < n; i++)); do
      r=$(tail -1 "$out.$p.$i.time")
      [ "$r" -gt "$rss" ] && rss=$r
    done
    if [ -d "$out/.units/$p" ]; then
      b=$(du -sb "$out/.units/$p" | cut -f1)
      per=$([ "$docs" -gt 0 ] && echo "$b / $docs" | bc || echo "?")
    else
      per="-"
    fi
    printf '  %-14s %8.1f s   peak RSS %6d MB   written %s B/doc\n' "$p" "$(echo "$t1 - $t0" | bc -l)" $((rss / 1024)) "$per"
    total=$(echo "$total + $t1 - $t0" | bc -l)
  done
  echo "$total" > "$out.total"
}

echo "corpus: $SIZE uncompressed, $docs documents, units of $CHUNK; default spec; one worker per task; pinned to a core each: $PIN"
echo "1 task:"
run_tasks "$DIR/one" 1
echo "2 tasks:"
run_tasks "$DIR/two" 2
digest() { (cd "$1" && find . -type f ! -name manifest.json | sort | xargs sha256sum); }
if [ "$(digest "$DIR/one")" = "$(digest "$DIR/two")" ]; then same="byte-identical"; else same="DIFFERENT"; fi
t1=$(cat "$DIR/one.total"); t2=$(cat "$DIR/two.total")
printf 'total: 1 task %.1f s, 2 tasks %.1f s: %.2fx; outputs %s\n' "$t1" "$t2" "$(echo "$t1 / $t2" | bc -l)" "$same"
