package graphidx

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"testing"
)

// deadPid returns the pid of a process that has exited (a finished child).
func deadPid(t *testing.T) int {
	t.Helper()
	exe, err := os.Executable()
	if err != nil {
		t.Skip(err)
	}
	cmd := exec.Command(exe, "-test.run=^$")
	if err := cmd.Run(); err != nil {
		t.Skip(err)
	}
	return cmd.Process.Pid
}

// TestWriteFileRemovesStaleTemps: a temporary file left by a crashed
// writer (its pid is dead) is removed by the next WriteFile of the same
// path; temporaries of live processes and of this process, other indexes'
// temporaries and unrelated files are kept.
func TestWriteFileRemovesStaleTemps(t *testing.T) {
	t.Parallel()
	if runtime.GOOS == "windows" || runtime.GOOS == "js" || runtime.GOOS == "wasip1" {
		t.Skip("no process liveness check on this platform")
	}
	dir := t.TempDir()
	out := filepath.Join(dir, "g.hwx")
	dead := deadPid(t)
	mk := func(name string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte("partial"), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	stale := mk(fmt.Sprintf("%s%d-0011aabbccdd", TempPrefix(out), dead))
	liveOther := mk(fmt.Sprintf("%s%d-0011aabbccdd", TempPrefix(out), os.Getppid()))
	mine := mk(fmt.Sprintf("%s%d-0011aabbccdd", TempPrefix(out), os.Getpid()))
	otherIndex := mk(fmt.Sprintf("%s%d-0011aabbccdd", TempPrefix(filepath.Join(dir, "h.hwx")), dead))
	oddName := mk(TempPrefix(out) + "notapid-x")
	noSuffix := mk(fmt.Sprintf("%s%d", TempPrefix(out), dead))

	if err := WriteFile(out, ixSourceFromContexts(ixGreenhouse())); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(stale); !os.IsNotExist(err) {
		t.Errorf("stale temp of dead pid %d was not removed (stat: %v)", dead, err)
	}
	for _, p := range []string{liveOther, mine, otherIndex, oddName, noSuffix} {
		if _, err := os.Stat(p); err != nil {
			t.Errorf("%s was removed but must be kept: %v", filepath.Base(p), err)
		}
	}
	if _, err := Open(out); err != nil {
		t.Fatal(err)
	}
	// Direct call: nothing more to remove, and the result lists paths.
	if got := removeStaleTemps(out); len(got) != 0 {
		t.Errorf("second pass removed %v", got)
	}
	again := mk(fmt.Sprintf("%s%d-ff", TempPrefix(out), dead))
	if got := removeStaleTemps(out); !slices.Equal(got, []string{again}) {
		t.Errorf("removeStaleTemps = %v, want [%s]", got, again)
	}
}
