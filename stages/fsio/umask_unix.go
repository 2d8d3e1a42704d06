//go:build unix

package fsio

import (
	"os"
	"strconv"
	"strings"
	"sync"
	"syscall"
)

var umaskOnce = sync.OnceValue(func() os.FileMode {
	// Linux reports the mask without changing it; elsewhere it is read by
	// setting and restoring it, once, before any file is written.
	if b, err := os.ReadFile("/proc/self/status"); err == nil {
		for _, l := range strings.Split(string(b), "\n") {
			if v, ok := strings.CutPrefix(l, "Umask:"); ok {
				if m, err := strconv.ParseUint(strings.TrimSpace(v), 8, 32); err == nil {
					return os.FileMode(m)
				}
			}
		}
	}
	m := syscall.Umask(0o22)
	syscall.Umask(m)
	return os.FileMode(m)
})

// fileMode is the mode of files a run writes: readable by everyone the
// process's umask allows (0644 under the usual umask 022), as
// os.Create would give, since users share run directories.
func fileMode() os.FileMode { return 0o666 &^ umaskOnce() }
