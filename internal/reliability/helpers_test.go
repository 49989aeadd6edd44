package reliability

import (
	"bytes"
	"context"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/cli"
	"github.com/hopwise/hopwise/internal/cpuclock"
	stresstest "github.com/hopwise/hopwise/internal/stress"
)

// stress reports whether the heavy cases were asked for (HOPWISE_STRESS=1).
func stress() bool { return stresstest.On() }

// writeIndex writes src to dir/name and returns the path.
func writeIndex(t testing.TB, dir, name string, src graphidx.Source) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := graphidx.WriteFile(p, src); err != nil {
		t.Fatalf("WriteFile %s: %v", name, err)
	}
	return p
}

// runCLI runs the hopwise command line in process and returns its exit
// status, standard output and standard error. It mirrors cli.Main (which
// writes errors to os.Stderr) but captures everything.
func runCLI(t testing.TB, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	root := cli.NewRoot()
	var out, errb bytes.Buffer
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs(args)
	err := root.ExecuteContext(context.Background())
	if err == nil {
		return 0, out.String(), errb.String()
	}
	errb.WriteString("hopwise: " + err.Error() + "\n")
	var ee *cli.ExitError
	if errors.As(err, &ee) {
		return ee.Code, out.String(), errb.String()
	}
	return 1, out.String(), errb.String()
}

var (
	binOnce sync.Once
	binPath string
	binErr  error
	binDir  string
)

// hopwiseBinary builds cmd/hopwise once per test process into a temporary
// directory and returns its path.
func hopwiseBinary(t testing.TB) string {
	t.Helper()
	binOnce.Do(func() {
		binDir, binErr = os.MkdirTemp("", "hopwise-reliability-bin-")
		if binErr != nil {
			return
		}
		binPath = filepath.Join(binDir, "hopwise")
		if runtime.GOOS == "windows" {
			binPath += ".exe"
		}
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
		defer cancel()
		cmd := exec.CommandContext(ctx, "go", "build", "-o", binPath, "github.com/hopwise/hopwise/cmd/hopwise")
		var out bytes.Buffer
		cmd.Stdout, cmd.Stderr = &out, &out
		if err := cmd.Run(); err != nil {
			binErr = err
			binPath = strings.TrimSpace(out.String())
		}
	})
	if binErr != nil {
		t.Fatalf("go build cmd/hopwise: %v\n%s", binErr, binPath)
	}
	return binPath
}

// TestMain removes the binary directory after the run.
func TestMain(m *testing.M) {
	code := m.Run()
	if binDir != "" {
		_ = os.RemoveAll(binDir)
	}
	for _, d := range cleanupDirs {
		_ = os.RemoveAll(d)
	}
	os.Exit(code)
}

// runBinary runs the built hopwise binary with a timeout and returns the
// exit status and combined output.
func runBinary(t testing.TB, timeout time.Duration, args ...string) (int, string) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), timeout)
	defer cancel()
	cmd := exec.CommandContext(ctx, hopwiseBinary(t), args...)
	out, err := cmd.CombinedOutput()
	if ctx.Err() != nil {
		t.Fatalf("hopwise %v: timed out after %v\n%s", args, timeout, out)
	}
	if err != nil {
		if ee, ok := err.(*exec.ExitError); ok {
			return ee.ExitCode(), string(out)
		}
		t.Fatalf("hopwise %v: %v", args, err)
	}
	return 0, string(out)
}

// assertNoPanic fails when out looks like a Go panic or runtime crash.
func assertNoPanic(t testing.TB, what, out string) {
	t.Helper()
	for _, s := range []string{"panic:", "goroutine ", "runtime error", "SIGSEGV"} {
		if strings.Contains(out, s) {
			t.Fatalf("%s: output looks like a crash (%q):\n%s", what, s, out)
		}
	}
}

// percentile returns the q-quantile (0..1) of ds by the nearest-rank
// method (common practice); it sorts ds.
func percentile(ds []time.Duration, q float64) time.Duration {
	if len(ds) == 0 {
		return 0
	}
	sort.Slice(ds, func(i, j int) bool { return ds[i] < ds[j] })
	i := int(q*float64(len(ds))+0.999999) - 1
	return ds[min(max(i, 0), len(ds)-1)]
}

// cleanupDirs are removed by TestMain after the run.
var cleanupDirs []string

func osMkdirTemp(pattern string) (string, error) { return os.MkdirTemp("", pattern) }

// measured is the cost of one call: wall time and, where the thread clock
// works, the CPU time of the calling thread.
type measured struct {
	wall, cpu time.Duration
	cpuOK     bool
}

// work is the figure a bound on work is checked against: the thread's CPU
// time when known, else wall time. A search that ignores its budget or its
// deadline burns CPU; a goroutine that merely waited for a core on a loaded
// CI machine (CI once saw a 5 ms query take 4.7 s of wall time under -race
// next to other test binaries) does not.
func (m measured) work() time.Duration {
	if m.cpuOK {
		return m.cpu
	}
	return m.wall
}

// measure runs f on a locked OS thread and reports its wall and thread CPU
// time.
func measure(f func()) measured {
	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	c0, ok0 := cpuclock.Thread()
	start := time.Now()
	f()
	wall := time.Since(start)
	c1, ok1 := cpuclock.Thread()
	return measured{wall: wall, cpu: c1 - c0, cpuOK: ok0 && ok1}
}
