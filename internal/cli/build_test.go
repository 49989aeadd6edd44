package cli

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
	"github.com/hopwise/hopwise/graphidx/counts"
)

// A hand-checked greenhouse corpus with one bad line of each of two kinds.
const buildCorpus = `{"id":"c1","obs":{"vent3":"open","zone2.humidity":"high","pump1":"on"}}
{"id":"c2","obs":{"vent3":"closed","zone2.humidity":"high"}}
{"id":"c3","obs":{"zone2.humidity":"low","vent3":"open"}}
{"id":"c4","obs":{"pump1":"off","bed4":"present"}}
{"id":"c5","ents":["bed4"]}
{"id":"c6","obs":{"a":"1","a":"2"}}
not json
`

func TestBuildCommand(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	corpus := filepath.Join(dir, "gh.jsonl")
	if err := os.WriteFile(corpus, []byte(buildCorpus), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "gh.idx")
	got, err := runCLI(t, "build", "--corpus", corpus, "--out", out, "--quiet", "--mem-budget", "8MiB")
	if err != nil {
		t.Fatalf("%v\n%s", err, got)
	}
	for _, want := range []string{"contexts      5 (10 observations)", "entities      4", "pairs         4 kept of 4",
		"records       7 read, 5 ok, 2 skipped", "skipped bad-json           1", "skipped duplicate-entity   1", "gh.jsonl:6: obs.a: duplicate-entity"} {
		if !strings.Contains(got, want) {
			t.Errorf("summary lacks %q:\n%s", want, got)
		}
	}
	// The index holds the hand-checked counts: vent3/zone2.humidity has
	// closed&high=1, open&high=1, open&low=1 (contexts c1, c2, c3).
	x, err := graphidx.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	v, _ := x.Lookup("vent3")
	z, _ := x.Lookup("zone2.humidity")
	p, ok := x.Pair(v, z)
	if !ok || p.Count(0, 0) != 1 || p.Count(0, 1) != 0 || p.Count(1, 0) != 1 || p.Count(1, 1) != 1 || x.NumContexts() != 5 || x.NumPairs() != 4 {
		t.Errorf("pair %+v ok=%v contexts=%d pairs=%d", p, ok, x.NumContexts(), x.NumPairs())
	}

	// --strict stops at line 6 with exit status 2.
	_, err = runCLI(t, "build", "--corpus", corpus, "--out", filepath.Join(dir, "s.idx"), "--strict", "--quiet")
	var ee *ExitError
	if !errors.As(err, &ee) || ee.Code != 2 || !strings.Contains(err.Error(), "gh.jsonl:6: obs.a: duplicate-entity") {
		t.Errorf("strict: %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "s.idx")); !os.IsNotExist(err) {
		t.Errorf("strict failure left an index: %v", err)
	}
	// --counts-out then --from-counts gives the same index bytes.
	counts := filepath.Join(dir, "counts")
	direct := filepath.Join(dir, "direct.idx")
	if got, err := runCLI(t, "build", "--corpus", corpus, "--out", direct, "--quiet", "--counts-out", counts, "--shards", "3"); err != nil {
		t.Fatalf("%v\n%s", err, got)
	}
	viaCounts := filepath.Join(dir, "counts.idx")
	if got, err := runCLI(t, "build", "--from-counts", counts, "--out", viaCounts); err != nil {
		t.Fatalf("%v\n%s", err, got)
	}
	a, _ := os.ReadFile(direct)
	b, _ := os.ReadFile(viaCounts)
	if len(a) == 0 || !bytes.Equal(a, b) {
		t.Errorf("index from counts differs: %d vs %d bytes", len(a), len(b))
	}
	if _, err := runCLI(t, "build", "--out", viaCounts); err == nil {
		t.Error("build without --corpus or --from-counts succeeded")
	}

	// Pruning flags reach the builder.
	got, err = runCLI(t, "build", "--corpus", corpus, "--out", out, "--quiet", "--min-support", "2")
	if err != nil || !strings.Contains(got, "pairs         1 kept of 4; 3 below min support 2") {
		t.Errorf("min support: %v\n%s", err, got)
	}
}

func TestParseByteSize(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		in   string
		want int64
	}{{"512MiB", 512 << 20}, {"2GiB", 2 << 30}, {"500MB", 500e6}, {"65536", 65536}, {"1.5k", 1536}, {" 64 mib ", 64 << 20}} {
		if got, err := parseByteSize(c.in); err != nil || got != c.want {
			t.Errorf("%q: %d %v", c.in, got, err)
		}
	}
	for _, bad := range []string{"", "MiB", "12 parsecs", "-1", "0"} {
		if _, err := parseByteSize(bad); err == nil {
			t.Errorf("%q accepted", bad)
		}
	}
}

// TestCountsOutInPasses: --counts-out counted in several passes over the
// corpus (one group of shards each) writes the same shard files as one
// pass, and countsPasses sizes the passes from the index's cells and the
// budget.
func TestCountsOutInPasses(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	path := filepath.Join(dir, "beds.jsonl")
	var b strings.Builder
	rng := rand.New(rand.NewPCG(3, 4))
	for i := range 400 {
		fmt.Fprintf(&b, `{"id":"c%d","obs":{`, i)
		for j := range 5 {
			if j > 0 {
				b.WriteString(",")
			}
			fmt.Fprintf(&b, `"bed-%02d/moisture":"%s"`, rng.IntN(40), []string{"dry", "damp", "wet"}[rng.IntN(3)])
		}
		b.WriteString("}}\n")
	}
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	open := func() (graphidx.ContextReader, io.Closer, error) {
		return corpus.Open(path, corpus.FormatJSONL, "", graphidx.WithPolicy(graphidx.Lenient))
	}
	one, three := filepath.Join(dir, "one"), filepath.Join(dir, "three")
	if _, err := writeCorpusCounts(context.Background(), open, one, 8, 1, nil); err != nil {
		t.Fatal(err)
	}
	passes := 0
	if _, err := writeCorpusCounts(context.Background(), open, three, 8, 3, func(int) { passes++ }); err != nil {
		t.Fatal(err)
	}
	if passes != 3 {
		t.Errorf("%d passes reported, want 3", passes)
	}
	for s := range 8 {
		name := counts.CountShardName(s, 8)
		x, err1 := os.ReadFile(filepath.Join(one, name))
		y, err2 := os.ReadFile(filepath.Join(three, name))
		if err1 != nil || err2 != nil || !bytes.Equal(x, y) {
			t.Fatalf("shard %d differs between 1 and 3 passes (%v, %v)", s, err1, err2)
		}
	}

	// countsPasses: the index's distinct cells, then passes of at most half
	// the budget each, capped at the shard count.
	idx := filepath.Join(dir, "beds.idx")
	if got, err := runCLI(t, "build", "--corpus", path, "--out", idx, "--quiet"); err != nil {
		t.Fatalf("%v\n%s", err, got)
	}
	p := counts.NewPartial()
	r, c, err := open()
	if err != nil {
		t.Fatal(err)
	}
	for {
		ctx, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		if err := p.Add(ctx); err != nil {
			t.Fatal(err)
		}
	}
	c.Close()
	_, cells, err := countsPasses(idx, 0, 0, 1<<30, 8)
	if err != nil {
		t.Fatal(err)
	}
	if want := uint64(p.NumCells()); cells != want {
		t.Errorf("countsPasses counted %d cells, the Partial has %d", cells, want)
	}
	for _, c := range []struct {
		budget int64
		shards int
		want   int
	}{
		{1 << 30, 8, 1},
		{int64(cells * partialCellBytes), 8, 2},     // half the budget per pass
		{int64(cells * partialCellBytes / 2), 8, 4}, // a quarter
		{1, 8, 8}, // capped at the shards
	} {
		if got, _, _ := countsPasses(idx, 0, 0, c.budget, c.shards); got != c.want {
			t.Errorf("budget %d, %d shards: %d passes, want %d", c.budget, c.shards, got, c.want)
		}
	}
	// Pruned pairs are scaled back in: 4 pairs seen, 2 kept → twice the cells.
	if _, scaled, _ := countsPasses(idx, 4, 2, 1<<30, 8); scaled != 2*cells {
		t.Errorf("scaled cells %d, want %d", scaled, 2*cells)
	}
}

func TestProgressLine(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		ev    graphidx.ProgressEvent
		total int64
		want  string
	}{
		{graphidx.ProgressEvent{Phase: graphidx.PhaseRead}, 1000,
			"build: read  started, 1000 bytes of input"},
		{graphidx.ProgressEvent{Phase: graphidx.PhaseRead}, -1,
			"build: read  started"},
		{graphidx.ProgressEvent{Phase: graphidx.PhaseRead, Elapsed: 6 * time.Second}, 1000,
			"build: read  0 contexts, 0 entities, 0 spill runs, 0% of input (6s)"},
		{graphidx.ProgressEvent{Phase: graphidx.PhaseRead, BytesRead: 250, Contexts: 20_000, Entities: 7, Elapsed: 3 * time.Second}, 1000,
			"build: read  20k contexts, 7 entities, 0 spill runs, 25% of input, about 9s left to read (3s)"},
		{graphidx.ProgressEvent{Phase: graphidx.PhaseRead, BytesRead: 250, Elapsed: 3 * time.Second}, -1,
			"build: read  0 contexts, 0 entities, 0 spill runs (3s)"},
		{graphidx.ProgressEvent{Phase: graphidx.PhaseMerge, Pairs: 12, Elapsed: 5 * time.Second}, 1000,
			"build: merge 0 contexts, 0 entities, 0 spill runs, 12 pairs (5s)"},
	} {
		if got := progressLine(c.ev, c.total); got != c.want {
			t.Errorf("progressLine(%+v, %d) =\n%q, want\n%q", c.ev, c.total, got, c.want)
		}
	}
}

// TestBuildHelpListsFormats: build's help and --format flag are generated
// from the format table, so every format and extension appears in them.
func TestBuildHelpListsFormats(t *testing.T) {
	t.Parallel()
	cmd := newBuildCmd()
	usage := cmd.Flags().Lookup("format").Usage
	for _, f := range corpus.Formats() {
		if !strings.Contains(cmd.Long, "\n  "+f.Name+" ") || !strings.Contains(usage, f.Name) {
			t.Errorf("format %s missing from the help or the --format flag", f.Name)
		}
		if !strings.Contains(cmd.Long, "("+strings.Join(f.Extensions, " ")+")") {
			t.Errorf("extensions of %s missing from the help", f.Name)
		}
	}
}

// TestPlainProgressShowsReadTotals: on a plain (non-terminal) writer the read
// events within 5 s of the start are held back, but the last one is printed
// when the phase changes, so the read totals are always shown. Before, a
// build shorter than 5 s printed only "read 0 contexts" for its reading.
func TestPlainProgressShowsReadTotals(t *testing.T) {
	t.Parallel()
	var out strings.Builder
	emit, done := newBuildProgress(&out, 1000, false)
	emit(graphidx.ProgressEvent{Phase: graphidx.PhaseRead})
	emit(graphidx.ProgressEvent{Phase: graphidx.PhaseRead, BytesRead: 500, Contexts: 50, Entities: 3})
	emit(graphidx.ProgressEvent{Phase: graphidx.PhaseRead, BytesRead: 1000, Contexts: 120, Entities: 4})
	emit(graphidx.ProgressEvent{Phase: graphidx.PhaseMerge, Contexts: 120, Entities: 4})
	emit(graphidx.ProgressEvent{Phase: graphidx.PhaseDone, Contexts: 120, Entities: 4, Pairs: 6})
	done()
	want := "build: read  started, 1000 bytes of input\n" +
		"build: read  120 contexts, 4 entities, 0 spill runs, 100% of input (0s)\n" +
		"build: merge 120 contexts, 4 entities, 0 spill runs (0s)\n" +
		"build: done  120 contexts, 4 entities, 0 spill runs, 6 pairs (0s)\n"
	if got := out.String(); got != want {
		t.Errorf("progress =\n%s\nwant\n%s", got, want)
	}
}
