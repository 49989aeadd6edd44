package graphidx

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// TestStaleSpillDirsRemoved: spill directories left by a dead process (a
// killed build) are removed when the next Build or CSV reader creates its
// own; those of live processes, of this process and of unknown form stay,
// and the new directory carries this process's pid.
func TestStaleSpillDirsRemoved(t *testing.T) {
	t.Parallel()
	if runtime.GOOS == "windows" || runtime.GOOS == "js" || runtime.GOOS == "wasip1" {
		t.Skip("no process liveness check on this platform")
	}
	dead := deadPid(t)
	for _, prefix := range []string{fileio.BuildDirPrefix, fileio.CSVDirPrefix} {
		dir := t.TempDir()
		mk := func(name string) string {
			p := filepath.Join(dir, name)
			if err := os.MkdirAll(p, 0o755); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(filepath.Join(p, "run-0"), []byte("runs"), 0o644); err != nil {
				t.Fatal(err)
			}
			return p
		}
		stale := mk(fmt.Sprintf("%s%d-123", prefix, dead))
		keep := []string{
			mk(fmt.Sprintf("%s%d-123", prefix, os.Getppid())),
			mk(fmt.Sprintf("%s%d-123", prefix, os.Getpid())),
			mk(prefix + "987654"), // older name without a pid
			mk(fmt.Sprintf("other-%d-1", dead)),
		}
		d, err := fileio.MakeSpillDir(dir, prefix)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := os.Stat(stale); !os.IsNotExist(err) {
			t.Errorf("%s: stale dir of dead pid %d kept (%v)", prefix, dead, err)
		}
		for _, p := range keep {
			if _, err := os.Stat(p); err != nil {
				t.Errorf("%s: %s removed: %v", prefix, filepath.Base(p), err)
			}
		}
		if want := fmt.Sprintf("%s%d-", prefix, os.Getpid()); !strings.HasPrefix(filepath.Base(d), want) {
			t.Errorf("new dir %s does not start with %s", filepath.Base(d), want)
		}
	}

	// Through Build: a spilling build over a temp dir with a stale
	// directory removes it and leaves nothing of its own.
	dir := t.TempDir()
	stale := filepath.Join(dir, fmt.Sprintf("%s%d-55", fileio.BuildDirPrefix, dead))
	if err := os.MkdirAll(stale, 0o755); err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	for i := range 40000 {
		fmt.Fprintf(&b, `{"id":"c%d","obs":{"e%d":"v%d","e%d":"v%d","e%d":"v%d","e%d":"v%d"}}`+"\n",
			i, i%997, i%3, (i*7+1)%997+1000, i%2, (i*13+5)%997+2000, i%4, (i*31+7)%991+3000, i%5)
	}
	sum, err := Build(context.Background(), jsonlReader(strings.NewReader(b.String()), "c.jsonl"),
		filepath.Join(t.TempDir(), "x.hwx"), WithTempDir(dir), WithMemBudget(MinMemBudget), WithWorkers(2))
	if err != nil {
		t.Fatal(err)
	}
	if sum.SpillRuns == 0 {
		t.Fatalf("the build did not spill: %+v", sum)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("temp dir after a build that spilled %d runs: %v left (want nothing)", sum.SpillRuns, ents)
	}
}
