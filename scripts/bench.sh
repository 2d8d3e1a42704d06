#!/usr/bin/env bash
# Reader/runner benchmark: generates synthetic corpora with `winnow gen`,
# runs `winnow run` with only the normalize stage, and reports MB/s of
# uncompressed text per core next to `zstd -dc` on the same files, plus the
# peak RSS at two corpus sizes (it must not grow with input size).
#
#   scripts/bench.sh [SIZES...]     default: 100MB 500MB
#   WORKERS=2 BENCH_DIR=/tmp/winnow-bench scripts/bench.sh
set -euo pipefail
cd "$(dirname "$0")/.."

[ $# -eq 0 ] && SIZES=(100MB 500MB)
WORKERS=${WORKERS:-1}
DIR=${BENCH_DIR:-$(mktemp -d /tmp/winnow-bench.XXXX)}
mkdir -p "$DIR"
go build -o "$DIR/winnow" ./cmd/winnow
command -v zstd >/dev/null || { echo "zstd is needed (apt-get install zstd)"; exit 1; }

printf '%-8s %-8s %12s %12s %12s %12s\n' size workers "MB(text)" "run MB/s/core" "zstd -dc MB/s" "peak RSS MB"
for size in "${SIZES[@]}"; do
  corpus="$DIR/corpus-$size"
  if [ ! -d "$corpus" ]; then
    "$DIR/winnow" gen --out "$corpus" --bytes "$size" --files 4 --seed 1 >/dev/null
  fi
  cat > "$DIR/spec-$size.yaml" <<SPEC
name: bench
inputs:
  - source: all
    paths: ["corpus-$size/manuals/", "corpus-$size/forum/", "corpus-$size/dealer/", "corpus-$size/web/"]
stages:
  - kind: normalize
output:
  dir: out-$size
SPEC
  text_bytes=$(find "$corpus" -name '*.zst' -exec zstd -dc {} + | wc -c)
  t0=$(date +%s.%N)
  find "$corpus" -name '*.zst' -exec zstd -dc {} + > /dev/null
  t1=$(date +%s.%N)
  /usr/bin/time -f '%M %e %U %S' -o "$DIR/time-$size" "$DIR/winnow" run "$DIR/spec-$size.yaml" --workers "$WORKERS" --force -q > /dev/null
  read -r rss_kb wall user sys < "$DIR/time-$size"
  mb=$(echo "$text_bytes/1000000" | bc -l)
  cpu=$(echo "$user+$sys" | bc -l)
  printf '%-8s %-8s %12.1f %12.1f %12.1f %12.1f\n' "$size" "$WORKERS" "$mb" \
    "$(echo "$mb/$cpu" | bc -l)" "$(echo "$mb/($t1-$t0)" | bc -l)" "$(echo "$rss_kb/1024" | bc -l)"
done
echo "(run MB/s/core = uncompressed text MB / CPU seconds of the whole run: read, decode, parse, normalize, write shards, ledger, manifest)"
