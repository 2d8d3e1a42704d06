//go:build !unix

package run

import "os"

// killSelf ends the process at once, as a crash would.
func killSelf() { os.Exit(137) }
