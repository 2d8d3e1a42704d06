#!/usr/bin/env bash
# Writes one Kubernetes Indexed Job per phase of a spec to stdout, from
# phase-job.yaml, in phase order, as one multi-document YAML stream.
#
#   render.sh SPEC TASKS [IMAGE [PHASE]] > jobs.yaml
#
# SPEC is read here only to list its phases (`winnow check SPEC --phases`);
# the pods read the copy at /data/spec.yaml. TASKS is the number of tasks
# per phase (any number >= 1; output does not depend on it). IMAGE defaults
# to winnow:latest. With PHASE, only that phase's Job is written (it must be
# one of the spec's phases). WINNOW_BIN names the winnow binary (default: winnow).
set -euo pipefail
if [ $# -lt 2 ] || [ $# -gt 4 ]; then echo "usage: render.sh SPEC TASKS [IMAGE [PHASE]]" >&2; exit 2; fi
spec=$1 tasks=$2 image=${3:-winnow:latest} only=${4:-}
[[ $tasks =~ ^[1-9][0-9]*$ ]] || { echo "render.sh: TASKS must be a whole number >= 1, got $tasks" >&2; exit 2; }
here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
phases=$("${WINNOW_BIN:-winnow}" check "$spec" --phases)
if [ -n "$only" ]; then
  grep -qxF -- "$only" <<<"$phases" || { echo "render.sh: $spec has no phase $only (phases: $(tr '\n' ' ' <<<"$phases"))" >&2; exit 2; }
  phases=$only
fi
first=1
while IFS= read -r phase; do
  [ -n "$phase" ] || continue
  # Kubernetes names: lower case letters, digits and '-'.
  name=$(printf '%s' "$phase" | tr '[:upper:]_.' '[:lower:]--')
  [ "$first" -eq 1 ] || echo '---'
  first=0
  echo "# phase $phase of $(basename "$spec"), $tasks tasks; written by configs/cluster/k8s/render.sh"
  sed -e '/^apiVersion:/,$!d' -e "s|__NAME__|$name|g" -e "s|__PHASE__|$phase|g" -e "s|__TASKS__|$tasks|g" \
    -e "s|__IMAGE__|$image|g" "$here/phase-job.yaml"
done <<<"$phases"
