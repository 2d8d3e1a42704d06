//go:build !unix

package record

import "os"

// flockNB is not available here: the lock file's content is all there is.
func flockNB(f *os.File) error { return nil }

// flockWait is not available here.
func flockWait(f *os.File) error { return nil }

// flockBusy: flockNB never fails here.
func flockBusy(err error) bool { return false }
