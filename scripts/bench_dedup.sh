#!/usr/bin/env bash
# bench_dedup.sh: how exact and near dedup scale with the number of
# documents. For each size it runs scripts/benchdedup (package dedup driven
# directly, documents regenerated on the fly so the corpus never sits in
# memory) under /usr/bin/time -v and reports wall time, CPU time (user +
# system: the steadier number on a shared machine), peak RSS and peak RSS
# per document.
#
#   scripts/bench_dedup.sh                 # 1M and 2M documents
#   SIZES="1000000 2000000 4000000" scripts/bench_dedup.sh
#   MEMORY=$((64<<20)) STAGES=near WORKERS=2 scripts/bench_dedup.sh
set -euo pipefail
cd "$(dirname "$0")/.."

SIZES=${SIZES:-"1000000 2000000"}
STAGES=${STAGES:-"none exact near"}   # none = generating the documents only (baseline)
MEMORY=${MEMORY:-$((128 << 20))}
WORKERS=${WORKERS:-$(nproc)}
TMPDIR=${TMPDIR:-/tmp}
work=$(mktemp -d "$TMPDIR/bench-dedup-XXXXXX")
trap 'rm -rf "$work"' EXIT

go build -o "$work/benchdedup" ./scripts/benchdedup
[ -x /usr/bin/time ] || { echo "bench_dedup.sh: needs /usr/bin/time (apt-get install time)" >&2; exit 1; }

printf '%-6s %9s %9s %9s %12s %14s\n' stage docs wall_s cpu_s peak_rss_mb rss_bytes/doc
for stage in $STAGES; do
  for n in $SIZES; do
    out="$work/$stage-$n.out"
    /usr/bin/time -v "$work/benchdedup" -stage "$stage" -docs "$n" -memory "$MEMORY" \
      -workers "$WORKERS" -tmp "$work" >"$out" 2>"$out.time"
    rss_kb=$(awk -F: '/Maximum resident set size/ {gsub(/ /,"",$2); print $2}' "$out.time")
    wall=$(awk '/Elapsed \(wall clock\)/ {print $NF}' "$out.time")
    secs=$(echo "$wall" | awk -F: '{ if (NF==3) print $1*3600+$2*60+$3; else print $1*60+$2 }')
    cpu=$(awk -F: '/User time|System time/ {s += $2} END {print s}' "$out.time")
    printf '%-6s %9d %9.1f %9.1f %12.0f %14.1f\n' "$stage" "$n" "$secs" "$cpu" "$((rss_kb / 1024))" \
      "$(awk -v k="$rss_kb" -v n="$n" 'BEGIN {printf "%.1f", k*1024/n}')"
    sed 's/^/         /' "$out"
  done
done
