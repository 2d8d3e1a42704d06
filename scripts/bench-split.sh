#!/usr/bin/env bash
# Split-run benchmark: the default spec over a generated corpus, run phase
# by phase as 1 task and as 2 tasks (separate processes, one worker each,
# as array tasks on two cores would be), compared byte for byte. Prints
# wall seconds, CPU seconds (user + system, all tasks) and peak RSS per
# phase, the speed-up, and the bytes each
# document phase writes per input document.
#
#   scripts/bench-split.sh [SIZE]          default 1GB (uncompressed text)
#   BENCH_DIR=/tmp/winnow-split CHUNK=4MiB REPEAT=3 scripts/bench-split.sh 200MB
#
# Units default to 2 MiB chunks (about 60 units for 1 GB): a task that
# finishes early takes unfinished units of the other, so finer units
# balance better.
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
CHUNK=${CHUNK:-2MiB}
REPEAT=${REPEAT:-1}
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

steal() { awk '/^cpu /{print $9}' /proc/stat; } # hypervisor steal time, in ticks

run_phase() { # OUT TASKS PHASE: prints seconds, peak RSS, bytes per document
  local out=$1 n=$2 p=$3 rss=0 t0 t1
  t0=$(date +%s.%N)
  for ((i = 0; i < n; i++)); do
    pin=()
    [ "$PIN" = 1 ] && pin=(taskset -c "$((i % $(nproc)))")
    "${pin[@]}" /usr/bin/time -f '%M %U %S' -o "$out.$p.$i.time" "$W" run "$DIR/spec.yaml" --out "$out" --phase "$p" \
      --task "$i" --tasks "$n" --workers 1 -q >/dev/null 2>"$out.$p.$i.err" &
  done
  wait
  t1=$(date +%s.%N)
  local cpu=0
  for ((i = 0; i < n; i++)); do
    read -r r u s < <(tail -1 "$out.$p.$i.time")
    [ "$r" -gt "$rss" ] && rss=$r
    cpu=$(echo "$cpu + $u + $s" | bc -l)
  done
  per="-"
  if [ -d "$out/.units/$p" ] && [ "$docs" -gt 0 ]; then
    per=$(echo "$(du -sb "$out/.units/$p" | cut -f1) / $docs" | bc)
  fi
  echo "$(echo "$t1 - $t0" | bc -l) $((rss / 1024)) $per $cpu"
}

echo "corpus: $SIZE uncompressed, $docs documents, units of $CHUNK; default spec; one worker per task; pinned to a core each: $PIN"
# The 1-task and the 2-task run go phase by phase side by side (each phase
# as 1 task, then as 2), so that a slow spell of a shared machine hits both.
for ((rep = 1; rep <= REPEAT; rep++)); do
  rm -rf "$DIR/one" "$DIR/two"
  t1=0 t2=0 st0=$(steal)
  printf '%-20s %9s %9s %8s %15s %12s %12s\n' phase "1 task" "2 tasks" speedup "CPU s (1 / 2)" "peak RSS" "written/doc"
  for p in $phases; do
    read -r a r1 w1 c1 < <(run_phase "$DIR/one" 1 "$p")
    read -r b r2 w2 c2 < <(run_phase "$DIR/two" 2 "$p")
    printf '%-20s %8.1fs %8.1fs %7.2fx %6.1f /%6.1f %5d/%4d MB %10s B\n' "$p" "$a" "$b" "$(echo "$a / $b" | bc -l)" "$c1" "$c2" "$r1" "$r2" "$w1"
    t1=$(echo "$t1 + $a" | bc -l)
    t2=$(echo "$t2 + $b" | bc -l)
  done
  digest() { (cd "$1" && find . -type f ! -name manifest.json | sort | xargs sha256sum); }
  if [ "$(digest "$DIR/one")" = "$(digest "$DIR/two")" ]; then same="byte-identical"; else same="DIFFERENT"; fi
  st=$(( ($(steal) - st0) / $(getconf CLK_TCK) ))
  printf 'run %d: 1 task %.1f s, 2 tasks %.1f s: %.2fx; outputs %s; hypervisor steal %d s\n' "$rep" "$t1" "$t2" "$(echo "$t1 / $t2" | bc -l)" "$same" "$st"
done
