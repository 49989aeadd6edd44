package graphidx

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"sort"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx/internal/testcorpus"
	"github.com/hopwise/hopwise/internal/stress"
)

// naiveCounts is the baseline: encoding/json per line and nested string
// maps, single-threaded. counts["a=u"]["b=v"] for a < b; marginals under "".
func naiveCounts(data []byte) (map[string]map[string]int, int, error) {
	counts := map[string]map[string]int{}
	var line struct {
		ID   string            `json:"id"`
		Obs  map[string]string `json:"obs"`
		Ents []string          `json:"ents"`
	}
	sc := bufio.NewScanner(bytes.NewReader(data))
	sc.Buffer(make([]byte, 1<<20), 1<<24)
	n := 0
	for sc.Scan() {
		line.Obs, line.Ents = nil, nil
		if err := json.Unmarshal(sc.Bytes(), &line); err != nil {
			return nil, 0, err
		}
		keys := make([]string, 0, len(line.Obs)+len(line.Ents))
		for e, v := range line.Obs {
			keys = append(keys, e+"="+v)
		}
		for _, e := range line.Ents {
			keys = append(keys, e+"="+PresentValue)
		}
		sort.Strings(keys)
		for i, a := range keys {
			m := counts[a]
			if m == nil {
				m = map[string]int{}
				counts[a] = m
			}
			m[""]++
			for _, b := range keys[i+1:] {
				m[b]++
			}
		}
		n++
	}
	return counts, n, sc.Err()
}

const benchContexts = 200_000

// Two corpus shapes: "sparse" spreads the contexts over 20,000 sensors
// (868k distinct pairs, each seen ~6 times: count tables far larger than the
// cache), "dense" over 2,000 (94k pairs seen ~60 times: tables that fit in
// cache). Both have exactly 8 entities per context.
var benchShapes = []struct {
	name     string
	entities int
}{{"sparse", 20_000}, {"dense", 2_000}}

var benchCache = map[int][]byte{}

func benchData(entities int) []byte {
	if d, ok := benchCache[entities]; ok {
		return d
	}
	d := testcorpus.JSONL(benchContexts, entities, 42)
	benchCache[entities] = d
	return d
}

func benchHopwise(b *testing.B, data []byte) {
	out := filepath.Join(b.TempDir(), "bench.idx")
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	var sum BuildSummary
	cpu0 := testcorpus.CPUTime()
	for b.Loop() {
		var err error
		sum, err = Build(context.Background(), jsonlReader(bytes.NewReader(data), "bench.jsonl"), out)
		if err != nil {
			b.Fatal(err)
		}
	}
	cpu := testcorpus.CPUTime() - cpu0
	if sum.Contexts != benchContexts || sum.Observations != 8*benchContexts || sum.Read.SkippedTotal() != 0 {
		b.Fatalf("sanity: %+v", sum)
	}
	reportRates(b, cpu)
}

func benchNaive(b *testing.B, data []byte) {
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	var n int
	cpu0 := testcorpus.CPUTime()
	for b.Loop() {
		var err error
		if _, n, err = naiveCounts(data); err != nil {
			b.Fatal(err)
		}
	}
	cpu := testcorpus.CPUTime() - cpu0
	if n != benchContexts {
		b.Fatalf("sanity: %d contexts", n)
	}
	reportRates(b, cpu)
}

// reportRates reports contexts per wall-clock second and per CPU-second
// (all goroutines; the latter is independent of other load on the machine).
func reportRates(b *testing.B, cpu time.Duration) {
	total := float64(benchContexts) * float64(b.N)
	b.ReportMetric(total/b.Elapsed().Seconds(), "contexts/s")
	if cpu > 0 {
		b.ReportMetric(total/cpu.Seconds(), "contexts/cpu-s")
	}
}

// BenchmarkBuild measures Build (read, count, merge, write the index) on
// 200k generated 8-entity contexts against the naive baseline in the same
// run, for both corpus shapes. Compare the contexts/s metrics;
// TestBuildSpeedup prints the ratios.
func BenchmarkBuild(b *testing.B) {
	for _, sh := range benchShapes {
		data := benchData(sh.entities)
		b.Run(sh.name+"/hopwise", func(b *testing.B) { benchHopwise(b, data) })
		b.Run(sh.name+"/naive", func(b *testing.B) { benchNaive(b, data) })
	}
}

// TestBuildSpeedup runs both benchmarks and logs contexts/s and the ratio
// (targets: ≥ 300k contexts/s on 2 cores, ≥ 5× the baseline). It only runs
// with HOPWISE_STRESS=1 because it takes tens of seconds; it asserts the
// results agree, never a timing.
func TestBuildSpeedup(t *testing.T) {
	stress.Require(t, "build speed-up against the naive builder")
	// Agreement on a slice of the corpus: every naive count equals the
	// matching cell of the compiled index.
	small := testcorpus.JSONL(5000, 500, 3)
	naive, _, err := naiveCounts(small)
	if err != nil {
		t.Fatal(err)
	}
	c, _, err := Compile(context.Background(), jsonlReader(bytes.NewReader(small), "s.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	ents := c.Entities()
	cells := 0
	c.Pairs(func(p PairRecord) error {
		kb := len(ents[p.B].Values)
		for i, n := range p.Counts {
			if n == 0 {
				continue
			}
			cells++
			a := ents[p.A].Name + "=" + ents[p.A].Values[i/kb]
			bb := ents[p.B].Name + "=" + ents[p.B].Values[i%kb]
			// The baseline orients pairs by "name=value" strings.
			if got := naive[a][bb] + naive[bb][a]; got != int(n) {
				t.Fatalf("%s %s: %d vs naive %d", a, bb, n, got)
			}
		}
		return nil
	})
	total := 0
	for _, m := range naive {
		for k, n := range m {
			if k != "" && n > 0 {
				total++
			}
		}
	}
	if total != cells {
		t.Fatalf("%d non-zero cells vs naive %d", cells, total)
	}

	for _, sh := range benchShapes {
		data := benchData(sh.entities)
		h := testing.Benchmark(func(b *testing.B) { benchHopwise(b, data) })
		n := testing.Benchmark(func(b *testing.B) { benchNaive(b, data) })
		hs, ns := h.Extra["contexts/s"], n.Extra["contexts/s"]
		hc, nc := h.Extra["contexts/cpu-s"], n.Extra["contexts/cpu-s"]
		t.Logf("%s: hopwise Build %.0f contexts/s wall, %.0f per CPU-second (%s/op, %d allocs/op, %d B/op)",
			sh.name, hs, hc, h.T/(max(1, time.Duration(h.N))), h.AllocsPerOp(), h.AllocedBytesPerOp())
		t.Logf("%s: naive baseline %.0f contexts/s wall, %.0f per CPU-second", sh.name, ns, nc)
		t.Logf("%s: ratio %.1fx wall, %.1fx per CPU-second", sh.name, hs/ns, hc/nc)
	}
}

// TestWriteBenchCorpus writes a large benchmark corpus for measuring the
// peak RSS of "hopwise build" with /usr/bin/time -v. It only runs when
// -bench-corpus names the output file; -bench-contexts and -bench-entities
// set the size (defaults 2,000,000 and 200,000).
func TestWriteBenchCorpus(t *testing.T) {
	path := *benchCorpusFlag
	if path == "" {
		t.Skip("give -bench-corpus FILE to write the corpus")
	}
	n, ents := *benchContextsFlag, *benchEntitiesFlag
	if n < 1 || ents < 2 {
		t.Fatalf("-bench-contexts %d, -bench-entities %d: want ≥ 1 and ≥ 2", n, ents)
	}
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	const chunk = 100_000
	for i := 0; i < n; i += chunk {
		// Seed per chunk so the file is deterministic.
		if _, err := f.Write(testcorpus.JSONL(min(chunk, n-i), ents, uint64(i)+1)); err != nil {
			t.Fatal(err)
		}
	}
}
