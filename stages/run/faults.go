package run

import (
	"fmt"
	"os"
	"strconv"
	"strings"
)

// FaultEnv names the environment variable that makes a split run fail on
// purpose, for tests of crash safety: "PHASE/UNIT/POINT[/fail]" kills the
// process with SIGKILL (or, with /fail, fails the unit with an error) when
// unit UNIT ("*": any) of PHASE reaches POINT: "start" (before any work),
// "written" (all files written, before the marker), "renamed" (the unit
// is in place, before the task goes on). With FaultOnceEnv set to a path,
// the fault fires only while that file does not exist (it is created just
// before), so a task started again succeeds.
const (
	FaultEnv     = "WINNOW_FAULT"
	FaultOnceEnv = "WINNOW_FAULT_ONCE"
)

// fault fires the fault FaultEnv asks for at this point, if any.
func fault(phase string, u int, point string) error {
	spec := os.Getenv(FaultEnv)
	if spec == "" {
		return nil
	}
	parts := strings.Split(spec, "/")
	if len(parts) < 3 || parts[0] != phase || parts[2] != point || (parts[1] != "*" && parts[1] != strconv.Itoa(u)) {
		return nil
	}
	if once := os.Getenv(FaultOnceEnv); once != "" {
		f, err := os.OpenFile(once, os.O_CREATE|os.O_EXCL|os.O_WRONLY, 0o644)
		if err != nil {
			return nil // fired already
		}
		f.Close()
	}
	if len(parts) > 3 && parts[3] == "fail" {
		return fmt.Errorf("fault injected by %s=%s", FaultEnv, spec)
	}
	killSelf()
	return nil
}
