package graphidx

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// sliceReader is a ContextReader over a slice (copies Obs like a real
// reader would reuse them).
type sliceReader struct {
	cs []Context
	i  int
}

func (s *sliceReader) Next() (Context, error) {
	if s.i >= len(s.cs) {
		return Context{}, io.EOF
	}
	s.i++
	return s.cs[s.i-1], nil
}

// dumpSrc renders a Source canonically for comparisons.
func dumpSrc(t testing.TB, src Source) string {
	t.Helper()
	var b strings.Builder
	fmt.Fprintf(&b, "contexts %d\n", src.Contexts())
	ents := src.Entities()
	for i, e := range ents {
		fmt.Fprintf(&b, "e%d %s %v %v\n", i, e.Name, e.Values, e.Marginal)
	}
	err := src.Pairs(func(p PairRecord) error {
		fmt.Fprintf(&b, "p %s-%s %v\n", ents[p.A].Name, ents[p.B].Name, p.Counts)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return b.String()
}

// handCorpus is a small greenhouse corpus whose counts are worked out by
// hand in TestCompileHandChecked.
func handCorpus() []Context {
	return []Context{
		{ID: "c1", Obs: []Observation{{"vent3", "open"}, {"zone2.humidity", "high"}, {"pump1", "on"}}},
		{ID: "c2", Obs: []Observation{{"vent3", "closed"}, {"zone2.humidity", "high"}}},
		{ID: "c3", Obs: []Observation{{"zone2.humidity", "low"}, {"vent3", "open"}}},
		{ID: "c4", Obs: []Observation{{"pump1", "off"}, {"bed4", "present"}}},
		{ID: "c5", Obs: []Observation{{"bed4", "present"}}},
	}
}

func TestCompileHandChecked(t *testing.T) {
	t.Parallel()
	c, sum, err := Compile(context.Background(), &sliceReader{cs: handCorpus()}, WithWorkers(2))
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	// Worked by hand: ids by name bed4 < pump1 < vent3 < zone2.humidity;
	// values ascending; c1 gives pump1/vent3, pump1/zone, vent3/zone; c2 and
	// c3 give vent3/zone; c4 gives bed4/pump1.
	want := `contexts 5
e0 bed4 [present] [2]
e1 pump1 [off on] [1 1]
e2 vent3 [closed open] [1 2]
e3 zone2.humidity [high low] [2 1]
p bed4-pump1 [1 0]
p pump1-vent3 [0 0 0 1]
p pump1-zone2.humidity [0 0 1 0]
p vent3-zone2.humidity [1 0 1 1]
`
	if got := dumpSrc(t, c); got != want {
		t.Errorf("got\n%s\nwant\n%s", got, want)
	}
	if sum.Contexts != 5 || sum.Observations != 10 || sum.Entities != 4 || sum.Pairs.Before != 4 || sum.Pairs.After != 4 {
		t.Errorf("summary %+v", sum)
	}
}

// genCorpus makes n seeded contexts of about size entities each, drawn near
// a random centre of a ring of ents entities (locality), with k values each.
func genCorpus(seed uint64, n, ents, size, k int) []Context {
	rng := rand.New(rand.NewPCG(seed, 7))
	out := make([]Context, n)
	for i := range out {
		centre := rng.IntN(ents)
		seen := map[int]bool{}
		var obs []Observation
		m := 1 + rng.IntN(2*size)
		for len(obs) < m {
			e := (centre + rng.IntN(4*size)) % ents
			if seen[e] {
				continue
			}
			seen[e] = true
			obs = append(obs, Observation{fmt.Sprintf("sensor%04d", e), fmt.Sprintf("s%d", rng.IntN(k))})
		}
		out[i] = Context{ID: fmt.Sprintf("c%d", i), Obs: obs}
	}
	return out
}

// TestSpillEqualsInMemory forces spilling with the smallest budget and a
// fan-in of 2 (many intermediate merges) and compares with an in-memory
// build, as Sources and as index files.
func TestSpillEqualsInMemory(t *testing.T) {
	t.Parallel()
	n := 20000
	if testing.Short() {
		n = 6000
	}
	cs := genCorpus(2, n, 2000, 6, 2)
	dir := t.TempDir()
	mem, memSum, err := Compile(context.Background(), &sliceReader{cs: cs})
	if err != nil {
		t.Fatal(err)
	}
	defer mem.Close()
	if memSum.SpillRuns != 0 {
		t.Fatalf("default budget spilled %d runs", memSum.SpillRuns)
	}
	for _, fan := range []int{256, 3} {
		sp, spSum, err := Compile(context.Background(), &sliceReader{cs: cs}, WithMemBudget(MinMemBudget), WithTempDir(dir), withFanIn(fan), WithWorkers(2))
		if err != nil {
			t.Fatal(err)
		}
		if spSum.SpillRuns < 3 {
			t.Fatalf("fan-in %d: only %d runs spilled; the test does not exercise spilling", fan, spSum.SpillRuns)
		}
		if fan == 3 && spSum.MergePasses == 0 {
			t.Fatalf("fan-in 3: no intermediate merge")
		}
		if a, b := dumpSrc(t, mem), dumpSrc(t, sp); a != b {
			t.Fatalf("fan-in %d: spilled build differs from in-memory build", fan)
		}
		if testing.Verbose() {
			t.Logf("fan-in %d: %d runs, %d merge passes", fan, spSum.SpillRuns, spSum.MergePasses)
		}
		if err := sp.Close(); err != nil {
			t.Fatal(err)
		}
	}
	// Nothing left behind in the temp dir.
	if left, _ := os.ReadDir(dir); len(left) != 0 {
		t.Errorf("temp dir not cleaned: %v", left)
	}

	// Files: byte-identical.
	a, b := filepath.Join(dir, "mem.idx"), filepath.Join(dir, "spill.idx")
	if _, err := Build(context.Background(), &sliceReader{cs: cs}, a); err != nil {
		t.Fatal(err)
	}
	s, err := Build(context.Background(), &sliceReader{cs: cs}, b, WithMemBudget(MinMemBudget), WithTempDir(dir))
	if err != nil {
		t.Fatal(err)
	}
	if s.SpillRuns == 0 || s.BytesWritten == 0 {
		t.Fatalf("summary %+v", s)
	}
	ab, _ := os.ReadFile(a)
	bb, _ := os.ReadFile(b)
	if !bytes.Equal(ab, bb) || len(ab) == 0 {
		t.Fatalf("index files differ: %d vs %d bytes", len(ab), len(bb))
	}
}

func TestPruneHandChecked(t *testing.T) {
	t.Parallel()
	// Star around hub with supports hub-a:3, hub-b:2, hub-c:1, plus a-b:1.
	var cs []Context
	add := func(n int, ents ...string) {
		for range n {
			var obs []Observation
			for _, e := range ents {
				obs = append(obs, Observation{e, PresentValue})
			}
			cs = append(cs, Context{ID: fmt.Sprint(len(cs)), Obs: obs})
		}
	}
	add(3, "hub", "a")
	add(2, "hub", "b")
	add(1, "hub", "c")
	add(1, "a", "b")
	pairs := func(opts ...BuildOption) (string, PruneStats) {
		c, sum, err := Compile(context.Background(), &sliceReader{cs: cs}, opts...)
		if err != nil {
			t.Fatal(err)
		}
		defer c.Close()
		var got []string
		ents := c.Entities()
		c.Pairs(func(p PairRecord) error {
			got = append(got, ents[p.A].Name+"-"+ents[p.B].Name)
			return nil
		})
		return strings.Join(got, " "), sum.Pairs
	}
	// Min support 2 drops hub-c and a-b.
	if got, st := pairs(WithMinSupport(2)); got != "a-hub b-hub" || st.ByMinSupport != 2 || st.After != 2 {
		t.Errorf("min support: %q %+v", got, st)
	}
	// Top-1: hub keeps a; a keeps hub; b keeps hub (2 > 1); c keeps hub.
	// a-b is in neither top-1, so it alone is dropped: "either endpoint" rule.
	if got, st := pairs(WithMaxNeighbors(1)); got != "a-hub b-hub c-hub" || st.ByMaxNeighbors != 1 || st.Before != 4 {
		t.Errorf("max neighbours: %q %+v", got, st)
	}
	// Ties: with support 1 everywhere a-b vs a-hub... top-1 of c is hub only.
	if got, _ := pairs(WithMaxNeighbors(1), WithMinSupport(3)); got != "a-hub" {
		t.Errorf("combined: %q", got)
	}
}

func TestBuildErrors(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	var many []Context
	for i := range 65 {
		many = append(many, Context{ID: fmt.Sprint(i), Obs: []Observation{{"dial", fmt.Sprint(i)}}})
	}
	_, _, err := Compile(ctx, &sliceReader{cs: many})
	if !errors.Is(err, ErrTooManyValues) || !strings.Contains(err.Error(), `"dial"`) {
		t.Errorf("65 values: %v", err)
	}
	dup := []Context{{ID: "x", Obs: []Observation{{"a", "1"}, {"b", "1"}, {"a", "2"}}}}
	if _, _, err := Compile(ctx, &sliceReader{cs: dup}); !errors.Is(err, ErrDuplicateEntity) || !strings.Contains(err.Error(), `"a"`) {
		t.Errorf("duplicate: %v", err)
	}
	empty := []Context{{ID: "x", Obs: []Observation{{"a", ""}}}}
	if _, _, err := Compile(ctx, &sliceReader{cs: empty}); !errors.Is(err, ErrEmptyName) {
		t.Errorf("empty: %v", err)
	}
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, _, err := Compile(cctx, &sliceReader{cs: genCorpus(3, 5000, 100, 4, 2)}); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: %v", err)
	}
}

// cancelReader cancels the build's context after n contexts.
type cancelReader struct {
	sliceReader
	n      int
	cancel context.CancelFunc
}

func (c *cancelReader) Next() (Context, error) {
	if c.i == c.n {
		c.cancel()
	}
	return c.sliceReader.Next()
}

// TestBuildCancelMidway cancels while spilling and checks the error and that
// no temporary file or output is left behind.
func TestBuildCancelMidway(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	out := filepath.Join(dir, "out.idx")
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	r := &cancelReader{sliceReader: sliceReader{cs: genCorpus(5, 6000, 2000, 6, 2)}, n: 4000, cancel: cancel}
	tmp := filepath.Join(dir, "tmp")
	if err := os.Mkdir(tmp, 0o755); err != nil {
		t.Fatal(err)
	}
	_, err := Build(ctx, r, out, WithMemBudget(MinMemBudget), WithTempDir(tmp))
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("got %v, want context.Canceled", err)
	}
	if left, _ := os.ReadDir(tmp); len(left) != 0 {
		t.Errorf("temp files left: %v", left)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Errorf("output exists after cancel: %v", err)
	}
}

// TestCountOverflow: cell sums are carried in uint64 through the merge
// (counts.TestPartialCountOverflow checks the rejection above MaxUint32 when
// a Partial is compiled).
func TestCountOverflow(t *testing.T) {
	t.Parallel()
	k := cellKey(0, 1, 0, 0)
	m, err := newCellMerger([]cellSource{&memRun{cells: []cell{{k, math.MaxUint32}}}, &memRun{cells: []cell{{k, 2}}}})
	if err != nil {
		t.Fatal(err)
	}
	var got uint64
	m.each(func(key, n uint64) error { got = n; return nil })
	if got != math.MaxUint32+2 {
		t.Errorf("merged sum %d", got)
	}
}

// TestBuildEdgeCases: an empty corpus compiles (Compile, WriteFile) to a
// valid empty index but Build refuses it (ErrNoContexts, see
// TestBuildNeverReplacesWithEmpty); a corpus without any pair gives a valid
// index file.
func TestBuildEdgeCases(t *testing.T) {
	t.Parallel()
	for i, cs := range [][]Context{nil, {{ID: "a", Obs: []Observation{{"pump1", "on"}}}, {ID: "b", Obs: []Observation{{"pump1", "off"}}}}} {
		out := filepath.Join(t.TempDir(), "e.idx")
		s, err := Build(context.Background(), &sliceReader{cs: cs}, out)
		if len(cs) == 0 {
			if !errors.Is(err, ErrNoContexts) {
				t.Fatalf("case %d: empty corpus built: %v", i, err)
			}
			var c *Compiled
			if c, s, err = Compile(context.Background(), &sliceReader{cs: cs}); err != nil {
				t.Fatalf("case %d: compile: %v", i, err)
			}
			err = WriteFile(out, c)
			c.Close()
		}
		if err != nil {
			t.Fatalf("case %d: %v", i, err)
		}
		x, err := Open(out)
		if err != nil {
			t.Fatalf("case %d: open: %v", i, err)
		}
		if x.NumContexts() != uint64(len(cs)) || x.NumPairs() != 0 || s.Pairs.Before != 0 || s.Entities != min(len(cs), 1) {
			t.Errorf("case %d: contexts %d pairs %d summary %+v", i, x.NumContexts(), x.NumPairs(), s)
		}
		x.Close()
	}
}

// TestBuildProgress: phases arrive in order and the last read event counts
// every context.
func TestBuildProgress(t *testing.T) {
	t.Parallel()
	cs := genCorpus(6, 3000, 200, 4, 2)
	var phases []string
	var lastRead ProgressEvent
	_, err := Build(context.Background(), &sliceReader{cs: cs}, filepath.Join(t.TempDir(), "p.idx"),
		WithProgress(func(ev ProgressEvent) {
			if len(phases) == 0 || phases[len(phases)-1] != ev.Phase {
				phases = append(phases, ev.Phase)
			}
			if ev.Phase == PhaseRead {
				lastRead = ev
			}
		}))
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(phases, ","); got != "read,merge,prune,write,done" {
		t.Errorf("phases %s", got)
	}
	if lastRead.Contexts != 3000 || lastRead.BytesRead != -1 || lastRead.Entities == 0 {
		t.Errorf("last read event %+v", lastRead)
	}
}
