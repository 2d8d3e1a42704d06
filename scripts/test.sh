#!/usr/bin/env bash
# The project's test command (README "Set up"): installs the few system
# tools the tests use when they are missing, then vets and tests everything.
#   zstd, gzip  - compress test fixtures independently of winnow's own code
#                 (the zstd package also brings pzstd, which writes skippable frames)
#   chromium    - opens the HTML audit report headless in the audit tests
#   slurmctld, slurmd, slurm-client, munge
#               - a private single-node Slurm (scripts/slurm-local.sh) that
#                 runs configs/cluster/ in the configs/cluster tests
set -euo pipefail
cd "$(dirname "$0")/.."

need=()
command -v zstd >/dev/null 2>&1 && command -v pzstd >/dev/null 2>&1 || need+=(zstd)
command -v gzip >/dev/null 2>&1 || need+=(gzip)
command -v chromium >/dev/null 2>&1 || need+=(chromium)
command -v munged >/dev/null 2>&1 || [ -x /usr/sbin/munged ] || need+=(munge)
command -v slurmctld >/dev/null 2>&1 || [ -x /usr/sbin/slurmctld ] || need+=(slurmctld)
command -v slurmd >/dev/null 2>&1 || [ -x /usr/sbin/slurmd ] || need+=(slurmd)
command -v sbatch >/dev/null 2>&1 || need+=(slurm-client)
if [ ${#need[@]} -gt 0 ]; then
  echo "installing: ${need[*]}" >&2
  if [ "$(id -u)" = 0 ]; then SUDO=; else SUDO=sudo; fi
  $SUDO apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq --no-install-recommends "${need[@]}" >/dev/null
fi

unformatted=$(gofmt -l . | grep -v '^testdata/' || true)
if [ -n "$unformatted" ]; then
  echo "gofmt needed on:" >&2
  echo "$unformatted" >&2
  exit 1
fi
go vet ./...
go test ./... "$@"
# Every package but configs/cluster (its private Slurm runs the same code
# as cmd/winnow's split tests) once more under the race detector: the
# workers, collector, compressors, shared models and lists (it needs cgo:
# gcc is on the machine). cmd/winnow takes about 12 minutes instrumented,
# past go test's default 10-minute timeout.
go test -race ./filters/... ./dedup ./shard ./stages/... "$@"
go test -race -timeout 45m ./cmd/winnow "$@"
