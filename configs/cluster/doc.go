// Package cluster holds the tests of the cluster examples in this directory:
// the Slurm batch and submit scripts run on a private single-node Slurm
// (scripts/slurm-local.sh), and the container command of the Kubernetes
// Indexed Job manifests runs with the index set by hand. The examples
// themselves are shell scripts and YAML; this package has no code of its own.
package cluster
