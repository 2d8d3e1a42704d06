#!/usr/bin/env bash
# Runs every Go fuzz target of the module for a chosen time each. The
# targets are found with grep (every `func FuzzXxx(` in a _test.go file),
# so a new target is picked up without editing this script. Their seed
# corpora (testdata/fuzz/FuzzXxx/ and f.Add) already run in `go test`;
# this explores further. A failing input is written by `go test` to the
# package's testdata/fuzz/FuzzXxx/: give it a telling name and commit it.
#
#   scripts/fuzz.sh                 every target, 30s each
#   scripts/fuzz.sh 2m              every target, 2 minutes each
#   scripts/fuzz.sh 20s Redact      targets whose name contains "Redact"
#   scripts/fuzz.sh -l              list the targets and stop
set -euo pipefail
cd "$(dirname "$0")/.."

if [ "${1:-}" = "-l" ]; then list_only=1; shift; else list_only=0; fi
time=${1:-30s}
filter=${2:-}

targets=$(grep -rE --include='*_test.go' -o '^func Fuzz[A-Za-z0-9_]+\(' . |
  sed -E 's#^\./(.*)/[^/]+_test\.go:func (Fuzz[A-Za-z0-9_]+)\($#\1 \2#' | sort -u)
if [ -n "$filter" ]; then
  targets=$(echo "$targets" | grep -- "$filter" || true)
fi
if [ -z "$targets" ]; then
  echo "no fuzz target matches '$filter'" >&2
  exit 1
fi
if [ "$list_only" = 1 ]; then
  echo "$targets"
  exit 0
fi

failed=()
while read -r dir name; do
  echo "== $name in ./$dir for $time"
  if ! go test -run='^$' -fuzz="^${name}\$" -fuzztime="$time" "./$dir"; then
    failed+=("$dir $name")
  fi
done <<< "$targets"

if [ ${#failed[@]} -gt 0 ]; then
  echo "failed: ${#failed[@]} target(s):" >&2
  printf '  %s\n' "${failed[@]}" >&2
  exit 1
fi
echo "all $(echo "$targets" | wc -l) fuzz targets passed ($time each)"
