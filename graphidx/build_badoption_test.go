package graphidx

import (
	"context"
	"errors"
	"math"
	"path/filepath"
	"strings"
	"testing"
)

// TestBadBuildOptions: a worker count < 1, a negative neighbour limit, a
// memory budget that is negative or below MinMemBudget, a negative context
// width limit and a valid share outside [0, 1] (or NaN) are errors naming
// the option (they used to be raised, clamped or kept at the default
// silently), for
// Build, Compile and CheckBuildOptions alike (counts.Partial.Compile has its
// own test); 0 budget keeps the default.
func TestBadBuildOptions(t *testing.T) {
	t.Parallel()
	const corpus = `{"id":"a","obs":{"vent":"open","pump":"on"}}` + "\n"
	for _, tc := range []struct {
		opt  BuildOption
		name string
	}{
		{WithWorkers(0), "WithWorkers(0)"},
		{WithWorkers(-2), "WithWorkers(-2)"},
		// Every counting goroutine reads every context and holds a table
		// of at least 64 KiB: 100 000 of them took a 100 000-context
		// build from 0.7 s to over ten minutes and 3.8 GB of RSS.
		{WithWorkers(100_000), "WithWorkers(100000)"},
		{WithWorkers(MaxWorkers + 1), "WithWorkers(257)"},
		{multiOption{WithWorkers(MaxWorkers), WithMemBudget(MinMemBudget)}, "WithWorkers(256) with a memory budget of 1048576 bytes"},
		{WithMaxNeighbors(-1), "WithMaxNeighbors(-1)"},
		{WithMemBudget(-1), "WithMemBudget(-1)"},
		{WithMemBudget(MinMemBudget - 1), "WithMemBudget(1048575)"},
		{WithMaxContextEntities(-1), "WithMaxContextEntities(-1)"},
		{WithMinValidShare(1.5), "WithMinValidShare(1.5)"},
		{WithMinValidShare(-0.1), "WithMinValidShare(-0.1)"},
		{WithMinValidShare(math.NaN()), "WithMinValidShare(NaN)"},
	} {
		out := filepath.Join(t.TempDir(), "x.hwx")
		_, err := Build(context.Background(), jsonlReader(strings.NewReader(corpus), "c.jsonl"), out, tc.opt)
		if !errors.Is(err, ErrBadBuildOption) || !strings.Contains(err.Error(), tc.name) {
			t.Errorf("Build with %s: error %v, want ErrBadBuildOption naming it", tc.name, err)
		}
		if _, _, err := Compile(context.Background(), jsonlReader(strings.NewReader(corpus), "c.jsonl"), tc.opt); !errors.Is(err, ErrBadBuildOption) {
			t.Errorf("Compile with %s: error %v, want ErrBadBuildOption", tc.name, err)
		}
	}
	if err := CheckBuildOptions([]BuildOption{WithMaxNeighbors(-3)}); !errors.Is(err, ErrBadBuildOption) {
		t.Errorf("CheckBuildOptions with WithMaxNeighbors(-3): error %v, want ErrBadBuildOption", err)
	}
	out := filepath.Join(t.TempDir(), "ok.hwx")
	if _, err := Build(context.Background(), jsonlReader(strings.NewReader(corpus), "c.jsonl"), out,
		WithMemBudget(0), WithMemBudget(MinMemBudget), WithWorkers(1), WithMaxNeighbors(0),
		WithMaxContextEntities(0), WithMinValidShare(0), WithMinValidShare(1)); err != nil {
		t.Errorf("in-domain options: %v", err)
	}
	if _, err := Build(context.Background(), jsonlReader(strings.NewReader(corpus), "c.jsonl"), out,
		WithWorkers(MaxWorkers)); err != nil {
		t.Errorf("in-domain options: %v", err)
	}
}

// multiOption applies several build options as one.
type multiOption []BuildOption

func (m multiOption) applyBuild(c *buildConfig) {
	for _, o := range m {
		o.applyBuild(c)
	}
}
