// Package configs holds the example pipeline specs shipped with winnow;
// they are embedded so that `winnow demo` works from a bare binary.
package configs

import "embed"

// FS holds every spec in this directory.
//
//go:embed *.yaml
var FS embed.FS
