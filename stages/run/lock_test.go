package run

import (
	"bufio"
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"winnow/stages/record"
)

// TestHelperHoldLock is not a test: run as a child process (WINNOW_HOLD_LOCK
// set) it takes the lock of that directory, says so, and waits to be killed.
func TestHelperHoldLock(t *testing.T) {
	dir := os.Getenv("WINNOW_HOLD_LOCK")
	if dir == "" {
		return
	}
	if _, err := record.LockRunDir(dir, nil); err != nil {
		fmt.Println("error:", err)
		os.Exit(1)
	}
	fmt.Println("locked")
	select {}
}

// Two runs on the same --out: while another process holds the directory,
// a run refuses naming the holder's host and pid; once that process is
// killed (no chance to clean up), the next run takes the lock over.
func TestRunDirLock(t *testing.T) {
	dir := writeCorpus(t, 20)
	s := writeSpec(t, dir, basicSpec)
	out := filepath.Join(dir, "out")
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: out}); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(filepath.Join(out, record.LockFile)); !os.IsNotExist(err) {
		t.Errorf("a finished run leaves its lock: %v", err)
	}
	before := runDirDigest(t, out)

	child := exec.Command(os.Args[0], "-test.run=^TestHelperHoldLock$")
	child.Env = append(os.Environ(), "WINNOW_HOLD_LOCK="+out)
	stdout, _ := child.StdoutPipe()
	if err := child.Start(); err != nil {
		t.Fatal(err)
	}
	defer child.Process.Kill()
	line, _ := bufio.NewReader(stdout).ReadString('\n')
	if strings.TrimSpace(line) != "locked" {
		t.Fatalf("child: %q", line)
	}
	host, _ := os.Hostname()
	_, err := RunSpec(context.Background(), s, RunOptions{Out: out, Force: true})
	want := fmt.Sprintf("is in use by another winnow run (host %s, pid %d, since ", host, child.Process.Pid)
	if err == nil || !strings.Contains(err.Error(), want) {
		t.Fatalf("second run: %v\nwant %s", err, want)
	}
	// The refused run touched nothing.
	after := runDirDigest(t, out)
	delete(after, record.LockFile)
	if len(after) != len(before) {
		t.Errorf("refused run changed the directory: %d files, was %d", len(after), len(before))
	}
	for k, v := range before {
		if after[k] != v {
			t.Errorf("refused run changed %s", k)
		}
	}
	// The holder dies without cleaning up: its lock file stays, stale.
	child.Process.Kill()
	child.Wait()
	if b, err := os.ReadFile(filepath.Join(out, record.LockFile)); err != nil || !strings.Contains(string(b), fmt.Sprint(child.Process.Pid)) {
		t.Fatalf("stale lock file: %q %v", b, err)
	}
	logf, lines := logLines()
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: out, Force: true, Log: logf}); err != nil {
		t.Fatalf("run after the holder died: %v", err)
	}
	if logged := lines(); !strings.Contains(strings.Join(logged, "\n"), fmt.Sprintf("taking over the lock of winnow pid %d", child.Process.Pid)) {
		t.Errorf("log %q", logged)
	}
	// A lock written on another host is not guessed stale.
	os.WriteFile(filepath.Join(out, record.LockFile), []byte("harbour-build-7 4242 2026-01-01T00:00:00Z\n"), 0o644)
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: out, Force: true}); err == nil || !strings.Contains(err.Error(), "locked by a winnow run on host harbour-build-7 (pid 4242") {
		t.Errorf("foreign lock: %v", err)
	}
	// In one process, a second run on a directory in use is refused too.
	os.Remove(filepath.Join(out, record.LockFile))
	release, err := record.LockRunDir(out, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer release()
	if _, err := RunSpec(context.Background(), s, RunOptions{Out: out, Force: true}); err == nil || !strings.Contains(err.Error(), fmt.Sprintf("pid %d", os.Getpid())) {
		t.Errorf("second run in one process: %v", err)
	}
}
