package beamjob

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/testing/ptest"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
	"github.com/hopwise/hopwise/graphidx/counts"
)

// TestMain runs every pipeline of this package on prism, Beam's local
// portable runner, with the SDK worker in this process (loopback
// environment, job endpoint on localhost). The deprecated direct runner is
// not used: it skips the portable encoding that exposes missing
// registrations.
func TestMain(m *testing.M) {
	ptest.MainWithDefault(m, "prism")
}

// writeCorpus writes n seeded greenhouse contexts (invented zones, vents,
// pumps and crop beds; Zipf-skewed entity popularity, 1-4 values per entity,
// every tenth context presence-only) split over `files` JSONL files, with a
// few bad and blank lines, and returns their concatenation.
func writeCorpus(t testing.TB, dir string, seed uint64, n, ents, files int) []byte {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 7))
	zipf := rand.NewZipf(rng, 1.2, 3, uint64(ents-1))
	kinds := []string{"zone", "vent", "pump", "bed"}
	vals := [][]string{{"cool", "warm", "hot"}, {"open", "shut"}, {"on", "off"}, {"dry", "moist", "wet", "flooded"}}
	bufs := make([]bytes.Buffer, files)
	for i := range n {
		b := &bufs[i%files]
		switch {
		case i%1009 == 17:
			fmt.Fprintf(b, "{\"id\":\"x%d\",\"obs\":{\"vent1\":2}}\n", i) // bad-field
		case i%1013 == 29:
			b.WriteString("{not json\n") // bad-json
		case i%503 == 3:
			b.WriteString("\n")
		}
		k := 2 + rng.IntN(5)
		seen := map[uint64]bool{}
		var parts []string
		for range k {
			e := zipf.Uint64()
			if seen[e] {
				continue
			}
			seen[e] = true
			name := kinds[e%4] + strconv.FormatUint(e, 10)
			if i%10 == 4 {
				parts = append(parts, strconv.Quote(name+".seen"))
			} else {
				vs := vals[e%4]
				parts = append(parts, strconv.Quote(name)+":"+strconv.Quote(vs[rng.IntN(len(vs))]))
			}
		}
		if i%10 == 4 {
			fmt.Fprintf(b, "{\"id\":\"c%d\",\"ents\":[%s]}\n", i, strings.Join(parts, ","))
		} else {
			fmt.Fprintf(b, "{\"id\":\"c%d\",\"obs\":{%s}}\r\n", i, strings.Join(parts, ","))
		}
	}
	var all bytes.Buffer
	for f := range files {
		if err := os.WriteFile(filepath.Join(dir, fmt.Sprintf("part-%02d.jsonl", f)), bufs[f].Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		all.Write(bufs[f].Bytes())
	}
	return all.Bytes()
}

func directIndex(t testing.TB, data []byte, opts ...graphidx.BuildOption) ([]byte, graphidx.BuildSummary) {
	t.Helper()
	out := filepath.Join(t.TempDir(), "direct.hwi")
	r := corpus.NewJSONLReader(bytes.NewReader(data), "corpus.jsonl")
	sum, err := graphidx.Build(context.Background(), r, out, opts...)
	if err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	return b, sum
}

func countsIndex(t testing.TB, dirs []string, opts ...graphidx.BuildOption) []byte {
	t.Helper()
	src, _, err := counts.MergeCounts(context.Background(), dirs, opts...)
	if err != nil {
		t.Fatal(err)
	}
	defer src.(io.Closer).Close()
	out := filepath.Join(t.TempDir(), "counts.hwi")
	if err := graphidx.WriteFile(out, src); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func runPipeline(t testing.TB, cfg Config) (beam.PipelineResult, error) {
	t.Helper()
	p, s := beam.NewPipelineWithRoot()
	if err := Pipeline(s, cfg); err != nil {
		t.Fatal(err)
	}
	return ptest.RunWithMetrics(p)
}

func shardSizes(t testing.TB, dir string) (files int, total, smallest, largest int64) {
	t.Helper()
	ms, _ := filepath.Glob(filepath.Join(dir, "counts-*.hwc"))
	smallest = -1
	for _, m := range ms {
		fi, err := os.Stat(m)
		if err != nil {
			t.Fatal(err)
		}
		total += fi.Size()
		if smallest < 0 || fi.Size() < smallest {
			smallest = fi.Size()
		}
		largest = max(largest, fi.Size())
	}
	return len(ms), total, smallest, largest
}

// TestPipelineByteIdentical: the prism pipeline's count shards, compiled
// with counts.CompileCounts, give the same index file byte for byte as
// graphidx.Build on the corpus, with and without pruning. The corpus has
// 50,000 contexts (5,000 with -short, 500,000 with HOPWISE_STRESS=1).
func TestPipelineByteIdentical(t *testing.T) {
	n := 50000 // about 10 s on prism on 2 busy cores
	if testing.Short() {
		n = 5000
	}
	if os.Getenv("HOPWISE_STRESS") == "1" { // the repository's one stress switch (internal/stress)
		n = 500_000
	}
	dir := t.TempDir()
	data := writeCorpus(t, dir, 42, n, max(50, n/50), 3)
	out := filepath.Join(dir, "counts")
	start := time.Now()
	res, err := runPipeline(t, Config{Inputs: []string{filepath.Join(dir, "part-*.jsonl")}, Output: out,
		Shards: 8, FlushCells: 4096})
	if err != nil {
		t.Fatal(err)
	}
	elapsed := time.Since(start)
	files, total, smallest, largest := shardSizes(t, out)
	if files != 8 {
		t.Fatalf("%d shard files, want 8", files)
	}

	direct, sum := directIndex(t, data)
	if sum.Pairs.After == 0 || sum.Read.SkippedTotal() == 0 {
		t.Fatalf("degenerate corpus: %d pairs, %d skipped lines", sum.Pairs.After, sum.Read.SkippedTotal())
	}
	if !bytes.Equal(direct, countsIndex(t, []string{out})) {
		t.Fatal("index from the pipeline's count shards differs from the direct build")
	}
	opts := []graphidx.BuildOption{graphidx.WithMinSupport(2), graphidx.WithMaxNeighbors(8)}
	if d, _ := directIndex(t, data, opts...); !bytes.Equal(d, countsIndex(t, []string{out}, opts...)) {
		t.Fatal("pruned index from count shards differs from the pruned direct build")
	}

	// Nothing dropped silently: the job's counters reconcile with the
	// single-machine reader's line accounting.
	got := Counters(res)
	if got[CounterContexts] != int64(sum.Contexts) {
		t.Fatalf("job counted %d contexts, direct build %d", got[CounterContexts], sum.Contexts)
	}
	for reason, k := range sum.Read.Skipped {
		if got[SkippedPrefix+reason] != k {
			t.Fatalf("skipped %s: job %d, reader %d", reason, got[SkippedPrefix+reason], k)
		}
	}
	if got[CounterShards] != 8 || got[CounterShardBytes] != total {
		t.Fatalf("counters say %d shards / %d bytes, disk has 8 / %d", got[CounterShards], got[CounterShardBytes], total)
	}
	t.Logf("%d contexts, %d pairs: prism pipeline %s; 8 shards, %d bytes total (%d..%d each); index %d bytes",
		sum.Contexts, sum.Pairs.After, elapsed.Round(time.Millisecond), total, smallest, largest, len(direct))
}

// TestPipelineMergeEqualsRebuild: counting two corpora in separate jobs and
// merging their count sets gives the index of their union.
func TestPipelineMergeEqualsRebuild(t *testing.T) {
	dirA, dirB := t.TempDir(), t.TempDir()
	a := writeCorpus(t, dirA, 1, 1500, 40, 2)
	b := writeCorpus(t, dirB, 2, 1200, 60, 1)
	for _, d := range []string{dirA, dirB} {
		if _, err := runPipeline(t, Config{Inputs: []string{filepath.Join(d, "*.jsonl")}, Output: filepath.Join(d, "counts"), Shards: 3}); err != nil {
			t.Fatal(err)
		}
	}
	union, _ := directIndex(t, append(append([]byte{}, a...), b...))
	if !bytes.Equal(union, countsIndex(t, []string{filepath.Join(dirA, "counts"), filepath.Join(dirB, "counts")})) {
		t.Fatal("merge of A's and B's counts differs from the build of A∪B")
	}
}

// TestPipelineStrict: in strict mode a bad line fails the job, and the error
// names the file and the reason.
func TestPipelineStrict(t *testing.T) {
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "bad.jsonl"), []byte("{\"id\":\"c1\",\"obs\":{\"vent1\":\"open\"}}\n{\"id\":\"c2\",\"obs\":{\"vent1\":\"open\",\"vent1\":\"shut\"}}\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, err := runPipeline(t, Config{Inputs: []string{filepath.Join(dir, "bad.jsonl")}, Output: filepath.Join(dir, "counts"), Shards: 2, Strict: true})
	if err == nil || !strings.Contains(err.Error(), "bad.jsonl") || !strings.Contains(err.Error(), graphidx.ReasonDuplicateEntity) {
		t.Fatalf("strict job: got %v, want an error naming bad.jsonl and %s", err, graphidx.ReasonDuplicateEntity)
	}
}

func TestConfigCheck(t *testing.T) {
	for _, c := range []Config{
		{Output: "o"},
		{Inputs: []string{"x"}},
		{Inputs: []string{"x"}, Output: "o", Shards: -1},
		{Inputs: []string{"x"}, Output: "o", Shards: counts.MaxCountShards + 1},
	} {
		if err := c.check(); err == nil {
			t.Fatalf("config %+v accepted", c)
		}
	}
	c := Config{Inputs: []string{"x"}, Output: "o"}
	if err := c.check(); err != nil || c.Shards != DefaultShards || c.FlushCells != DefaultFlushCells {
		t.Fatalf("defaults: %+v, %v", c, err)
	}
}
