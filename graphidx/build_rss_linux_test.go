package graphidx

import (
	"context"
	"os"
	"path/filepath"
	"runtime/debug"
	"strconv"
	"strings"
	"testing"
)

// procStatus returns a field of /proc/self/status, e.g. "VmHWM:" (peak RSS).
func procStatus(field string) string {
	b, _ := os.ReadFile("/proc/self/status")
	for _, l := range strings.Split(string(b), "\n") {
		if strings.HasPrefix(l, field) {
			return strings.TrimSpace(l[len(field):])
		}
	}
	return "?"
}

// TestBuildPeakRSS logs the resident set after each build phase of a large
// corpus, to check that spilling keeps the counting and the streaming write
// within the budget (the target is the budget + 25%). It runs only when
// -rss-corpus names a corpus (see TestWriteBenchCorpus); -rss-budget sets
// the budget in MiB (default 256). Like the CLI, it sets a soft memory
// limit equal to the budget, and it gives WriteFile a quarter of the budget
// as Build does. With -rss-max-ratio set (for example 1.25) it fails when
// the peak RSS exceeds that multiple of the budget.
func TestBuildPeakRSS(t *testing.T) {
	path := *rssCorpusFlag
	if path == "" {
		t.Skip("give -rss-corpus FILE to measure")
	}
	mib := *rssBudgetFlag
	if mib < 1 {
		t.Fatalf("-rss-budget %d MiB: want ≥ 1", mib)
	}
	budget := mib << 20
	defer debug.SetMemoryLimit(debug.SetMemoryLimit(budget))
	r, cl, err := OpenCorpusForTest(path)
	if err != nil {
		t.Fatal(err)
	}
	defer cl.Close()
	last := ""
	c, sum, err := Compile(context.Background(), r, WithMemBudget(budget), WithTempDir(t.TempDir()),
		WithProgress(func(ev ProgressEvent) {
			if ev.Phase != last {
				t.Logf("start of %-5s RSS %s, peak %s", ev.Phase, procStatus("VmRSS:"), procStatus("VmHWM:"))
				last = ev.Phase
			}
		}))
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	t.Logf("compiled: budget %d MiB, peak RSS %s, %d spill runs, %d pairs", mib, procStatus("VmHWM:"), sum.SpillRuns, sum.Pairs.After)
	compiled := procStatus("VmHWM:")
	if err := WriteFile(filepath.Join(t.TempDir(), "rss.idx"), c, WithWriteMemory(budget/4)); err != nil {
		t.Fatal(err)
	}
	peak := procStatus("VmHWM:")
	kb, err := strconv.ParseInt(strings.TrimSuffix(peak, " kB"), 10, 64)
	if err != nil {
		t.Fatalf("VmHWM %q: %v", peak, err)
	}
	ratio := float64(kb<<10) / float64(budget)
	t.Logf("written: peak RSS %s (%.2f× the budget; %s before WriteFile)", peak, ratio, compiled)
	if limit := *rssMaxRatioFlag; limit > 0 && ratio > limit {
		t.Errorf("peak RSS %.2f× the budget, above -rss-max-ratio %.2f", ratio, limit)
	}
}
