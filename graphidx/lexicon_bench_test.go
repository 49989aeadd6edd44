package graphidx

import (
	"bytes"
	"fmt"
	"io"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"testing"
	"time"
	"unsafe"

	"github.com/hopwise/hopwise/graphidx/internal/testcorpus"
	"github.com/hopwise/hopwise/internal/cpuclock"
)

var greenhouseKinds = []string{"moisture probe", "leaf wilt", "vent motor", "drip valve", "soil moisture",
	"light sensor", "fan", "heater", "co2 sensor", "humidity sensor", "pump", "root temperature",
	"nutrient doser", "shade screen", "mist nozzle", "ph probe", "ec probe", "camera", "tray scale", "flow meter"}

// greenhouseLexicon streams a generated lexicon of n forms, two per entity
// "bed-N/kind": "bed N kind" and "kind of bed N"; for every valuedEvery-th
// entity the second form states a value ("kind of bed N reads high").
type greenhouseLexicon struct {
	i, n, valuedEvery int
	buf               []byte
}

func newGreenhouseLexicon(n, valuedEvery int) io.Reader {
	return &greenhouseLexicon{n: n, valuedEvery: valuedEvery}
}

func (g *greenhouseLexicon) Read(p []byte) (int, error) {
	for len(g.buf) < len(p) && g.i < g.n {
		e := g.i / 2
		kind := greenhouseKinds[e%len(greenhouseKinds)]
		bed := e / len(greenhouseKinds)
		id := fmt.Sprintf("bed-%d/%s", bed, strings.ReplaceAll(kind, " ", "-"))
		switch {
		case g.i%2 == 0:
			g.buf = fmt.Appendf(g.buf, "bed %d %s\t%s\n", bed, kind, id)
		case g.valuedEvery > 0 && e%g.valuedEvery == 0:
			g.buf = fmt.Appendf(g.buf, "%s of bed %d reads high\t%s\thigh\n", kind, bed, id)
		default:
			g.buf = fmt.Appendf(g.buf, "%s of bed %d\t%s\n", kind, bed, id)
		}
		g.i++
	}
	if len(g.buf) == 0 {
		return 0, io.EOF
	}
	n := copy(p, g.buf)
	g.buf = g.buf[:copy(g.buf, g.buf[n:])]
	return n, nil
}

// greenhousePrompt is a prompt of about size bytes of operator questions
// naming beds below beds (the lexicon's bed count).
func greenhousePrompt(seed uint64, size, beds int) string {
	rng := rand.New(rand.NewPCG(seed, 1))
	var b strings.Builder
	for b.Len() < size {
		k1 := greenhouseKinds[rng.IntN(len(greenhouseKinds))]
		k2 := greenhouseKinds[rng.IntN(len(greenhouseKinds))]
		fmt.Fprintf(&b, "Since Tuesday the %s of bed %d reads high while the operators wonder whether bed %d %s, "+
			"which was serviced last week, explains the readings seen in the morning shift. ",
			k1, rng.IntN(beds), rng.IntN(beds), k2)
	}
	return b.String()[:size]
}

// BenchmarkLexicon1M loads a 1,000,000-form lexicon (500,000 entities, one
// in ten with a valued form) and links 2 KB prompts against it. It reports
// the load time and heap per form (runtime.MemStats after GC), and the p50
// and p99 of per-prompt thread-CPU time over batches, beside the time of
// tokenizing the same prompt (the baseline: the part of the work every
// matcher does).
func BenchmarkLexicon1M(b *testing.B) {
	const n = 1_000_000
	data, err := io.ReadAll(newGreenhouseLexicon(n, 10)) // generated before timing
	if err != nil {
		b.Fatal(err)
	}
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	t0 := testcorpus.CPUTime() // the process's CPU: the collector's work counts too
	w0 := time.Now()
	l, err := ParseLexicon(bytes.NewReader(data), "gen.tsv")
	loadCPU, loadWall := testcorpus.CPUTime()-t0, time.Since(w0)
	if err != nil {
		b.Fatal(err)
	}
	runtime.GC()
	runtime.ReadMemStats(&after)
	runtime.KeepAlive(data) // in both readings
	heap := float64(after.HeapAlloc-before.HeapAlloc) / n
	st := l.Stats()
	if st.Forms != n {
		b.Fatalf("forms %d", st.Forms)
	}

	beds := n / 2 / len(greenhouseKinds)
	prompts := make([]string, 64)
	for i := range prompts {
		prompts[i] = greenhousePrompt(uint64(i), 2048, beds)
	}
	ms, _ := l.Link(prompts[0])
	if len(ms) < 8 {
		b.Fatalf("only %d mentions in a 2 KB prompt: %+v", len(ms), ms)
	}
	var m linker
	tokenize := func(p string) int {
		m.tz.reset(unsafe.Slice(unsafe.StringData(p), len(p)), l.seed, false) // read only
		m.toks = m.toks[:0]
		m.scan(len(p) + 1)
		return len(m.toks)
	}
	// Per-prompt thread-CPU time, over batches of 20 prompts.
	const batch = 20
	var link, base []float64
	buf := make([]Mention, 0, 64)
	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	i := 0
	for b.Loop() {
		p := prompts[i%len(prompts)]
		i++
		c0 := cpuclock.ThreadOrWall()
		for range batch {
			buf, err = l.AppendLinks(buf[:0], p)
		}
		c1 := cpuclock.ThreadOrWall()
		for range batch {
			tokenize(p)
		}
		c2 := cpuclock.ThreadOrWall()
		if err != nil || len(buf) < 4 {
			b.Fatalf("%v, %d mentions", err, len(buf))
		}
		link = append(link, float64(c1-c0)/batch)
		base = append(base, float64(c2-c1)/batch)
	}
	slices.Sort(link)
	slices.Sort(base)
	q := func(s []float64, p float64) float64 { return s[int(p*float64(len(s)-1))] }
	// Reported after the loop: b.Loop deletes metrics reported before it.
	b.ReportMetric(loadCPU.Seconds(), "load-cpu-s")
	b.ReportMetric(loadWall.Seconds(), "load-wall-s")
	b.ReportMetric(heap, "heap-B/form")
	b.ReportMetric(float64(st.MemBytes)/n, "membytes-B/form")
	b.ReportMetric(q(link, 0.5), "link-p50-ns")
	b.ReportMetric(q(link, 0.99), "link-p99-ns")
	b.ReportMetric(q(base, 0.5), "tokenize-p50-ns")
	b.ReportMetric(q(link, 0.5)/q(base, 0.5), "link/tokenize")
}

// BenchmarkLinkNested links a paragraph of 10,000 "x" tokens against the
// 2,047 nested forms "x", "x x", …: every token starts 2,047 overlapping
// matches, none of which the matcher materialises.
func BenchmarkLinkNested(b *testing.B) {
	lexText, text := nestedForms(2047, 10000)
	l := mustLexicon(b, lexText)
	b.ReportAllocs()
	buf := make([]Mention, 0, 16)
	var err error
	for b.Loop() {
		buf, err = l.AppendLinks(buf[:0], text)
	}
	if err != nil || len(buf) != 5 {
		b.Fatalf("%v, %d mentions", err, len(buf))
	}
}
