#!/usr/bin/env bash
# Writes one Kubernetes Indexed Job per phase of a spec to stdout, from
# phase-job.yaml, in phase order, as one multi-document YAML stream.
#
#   render.sh SPEC TASKS [IMAGE] > jobs.yaml
#
# SPEC is read here only to list its phases (`winnow check SPEC --phases`);
# the pods read the copy at /data/spec.yaml. TASKS is the number of tasks
# per phase (any number >= 1; output does not depend on it). IMAGE defaults
# to winnow:latest. WINNOW_BIN names the winnow binary (default: winnow).
set -euo pipefail
if [ $# -lt 2 ] || [ $# -gt 3 ]; then echo "usage: render.sh SPEC TASKS [IMAGE]" >&2; exit 2; fi
spec=$1 tasks=$2 image=${3:-winnow:latest}
[[ $tasks =~ ^[1-9][0-9]*$ ]] || { echo "render.sh: TASKS must be a whole number >= 1, got $tasks" >&2; exit 2; }
here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
phases=$("${WINNOW_BIN:-winnow}" check "$spec" --phases)
first=1
while IFS= read -r phase; do
  [ -n "$phase" ] || continue
  # Kubernetes names: lower case letters, digits and '-'.
  name=$(printf '%s' "$phase" | tr '[:upper:]_.' '[:lower:]--')
  [ "$first" -eq 1 ] || echo '---'
  first=0
  sed -e "s|__NAME__|$name|g" -e "s|__PHASE__|$phase|g" -e "s|__TASKS__|$tasks|g" \
    -e "s|__IMAGE__|$image|g" "$here/phase-job.yaml"
done <<<"$phases"
