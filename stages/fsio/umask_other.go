//go:build !unix

package fsio

import "os"

func fileMode() os.FileMode { return 0o644 }
