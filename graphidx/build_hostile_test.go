package graphidx

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime/metrics"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"
)

// wideContext is one presence-only context of n entities.
func wideContext(id string, n int) Context {
	obs := make([]Observation, n)
	for i := range obs {
		obs[i] = Observation{Entity: fmt.Sprintf("sensor-%06d", i), Value: PresentValue}
	}
	return Context{ID: id, Obs: obs}
}

// heapPeak samples the live heap every millisecond until stop is called and
// returns the largest sample.
func heapPeak() (stop func() uint64) {
	s := []metrics.Sample{{Name: "/memory/classes/heap/objects:bytes"}}
	var peak atomic.Uint64
	done := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		t := time.NewTicker(time.Millisecond)
		defer t.Stop()
		for {
			metrics.Read(s)
			if v := s[0].Value.Uint64(); v > peak.Load() {
				peak.Store(v)
			}
			select {
			case <-done:
				return
			case <-t.C:
			}
		}
	}()
	return func() uint64 { close(done); wg.Wait(); return peak.Load() }
}

// TestWideContextStreamsWithinBudget: the pairs of one wide context (3 000
// entities, 4.5 M pairs) are counted in bounded chunks, spilling within the
// budget, instead of being collected first (36 MB of keys). Not parallel:
// it samples the process heap.
func TestWideContextStreamsWithinBudget(t *testing.T) {
	const n, budget = 3000, 4 << 20
	cs := []Context{wideContext("wide", n), {ID: "small", Obs: []Observation{{"vent-1", "open"}, {"sensor-000001", PresentValue}}}}
	stop := heapPeak()
	c, sum, err := Compile(context.Background(), &sliceReader{cs: cs}, WithMemBudget(budget), WithWorkers(1),
		WithTempDir(t.TempDir()), WithMaxContextEntities(0))
	peak := stop()
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	if want := uint64(n * (n - 1) / 2); sum.Pairs.Before != want+1 {
		t.Errorf("pairs %d, want %d", sum.Pairs.Before, want+1)
	}
	if sum.SpillRuns == 0 {
		t.Errorf("no spill runs: the budget was not applied")
	}
	// The keys of the whole context would take 8·n(n−1)/2 = 36 MB.
	if limit := uint64(24 << 20); peak > limit {
		t.Errorf("live heap peaked at %d MB during the build (budget %d MB, limit %d MB): the wide context was not streamed",
			peak>>20, budget>>20, limit>>20)
	}
	t.Logf("live heap peak %.1f MB for a %d-entity context, budget %d MB, %d spill runs", float64(peak)/(1<<20), n, budget>>20, sum.SpillRuns)
}

// TestWideContextCancel: cancelling a build that is inside one wide
// context (6 000 entities, 18 M pairs) returns promptly.
func TestWideContextCancel(t *testing.T) {
	t.Parallel()
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var cancelled time.Time
	var once sync.Once
	out := filepath.Join(t.TempDir(), "w.hwx")
	errc := make(chan error, 1)
	go func() {
		_, err := Build(ctx, &sliceReader{cs: []Context{wideContext("wide", 6000)}}, out, WithMemBudget(16<<20),
			WithWorkers(1), WithTempDir(t.TempDir()), WithMaxContextEntities(0),
			WithProgress(func(ev ProgressEvent) {
				if ev.Phase == PhaseRead {
					once.Do(func() {
						time.AfterFunc(100*time.Millisecond, func() { cancelled = time.Now(); cancel() })
					})
				}
			}))
		errc <- err
	}()
	select {
	case err := <-errc:
		if !errors.Is(err, context.Canceled) {
			t.Fatalf("Build: %v, want context.Canceled", err)
		}
		d := time.Since(cancelled)
		if d > 2*time.Second {
			t.Errorf("Build returned %v after the cancel", d)
		}
		t.Logf("Build returned %v after the cancel", d.Round(time.Millisecond))
	case <-time.After(60 * time.Second):
		t.Fatal("Build did not return within 60 s of the start")
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Errorf("cancelled build wrote its output: %v", err)
	}
}

// TestMaxContextEntities: a context over the limit is a counted bad line
// naming file and line (JSONL, CSV, text), an error in strict mode; the builder
// skips and counts it from other readers, or fails under Strict.
func TestMaxContextEntities(t *testing.T) {
	t.Parallel()
	jsonl := `{"id":"a","ents":["p1","p2"]}` + "\n" + `{"id":"wide","ents":["p1","p2","p3","p4"]}` + "\n" + `{"id":"b","ents":["p1","p3","p4"]}` + "\n"
	csv := "context,entity\nc1,p1\nw,p1\nw,p2\nc1,p2\nw,p3\nw,p4\nc2,p3\n"
	text := "p1 and p2\n\n\nthe wide one:\np1 p2, p3\nand p4 p1\n\np1 p3 p4\n"
	lex, err := ParseLexicon(strings.NewReader("p1\tp1\np2\tp2\np3\tp3\np4\tp4\n"), "lex.tsv")
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name, in string
		open     func(string, ...ReadOption) ContextReader
		line     int
		skipped  int64
	}{
		{"jsonl", jsonl, func(s string, o ...ReadOption) ContextReader {
			return NewJSONLReader(strings.NewReader(s), "c.jsonl", o...)
		}, 2, 1},
		{"csv", csv, func(s string, o ...ReadOption) ContextReader {
			return NewCSVReader(strings.NewReader(s), "c.csv", o...)
		}, 3, 4},
		{"text", text, func(s string, o ...ReadOption) ContextReader {
			return NewTextReader(strings.NewReader(s), "c.txt", lex, o...)
		}, 4, 1},
	} {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			r := tc.open(tc.in, WithMaxContextEntities(3))
			got, err := readAll(t, r)
			if err != nil {
				t.Fatal(err)
			}
			st := r.(StatsReader).Stats()
			if st.Skipped[ReasonTooManyEntities] != tc.skipped || len(got) != 2 {
				t.Errorf("contexts %q, skipped %v", got, st.Skipped)
			}
			if e := st.FirstBad[ReasonTooManyEntities]; e == nil || e.Line != tc.line {
				t.Errorf("first bad %v, want line %d", e, tc.line)
			}
			var le *LineError
			_, err = readAll(t, tc.open(tc.in, WithMaxContextEntities(3), WithPolicy(Strict)))
			if !errors.As(err, &le) || le.Reason != ReasonTooManyEntities || le.Line != tc.line {
				t.Errorf("strict: %v", err)
			}
			if got, err := readAll(t, tc.open(tc.in, WithMaxContextEntities(0))); err != nil || len(got) != 3 {
				t.Errorf("no limit: %q %v", got, err)
			}
		})
	}
	cs := []Context{wideContext("w", 5), {ID: "s", Obs: []Observation{{"a", "1"}, {"b", "2"}}}}
	sum, err := Build(context.Background(), &sliceReader{cs: cs}, filepath.Join(t.TempDir(), "x.hwx"), WithMaxContextEntities(4))
	if err != nil || sum.WideContexts != 1 || sum.Contexts != 1 || !strings.Contains(sum.String(), "wide contexts") {
		t.Errorf("builder: %v, summary %+v", err, sum)
	}
	_, err = Build(context.Background(), &sliceReader{cs: cs}, filepath.Join(t.TempDir(), "y.hwx"), WithMaxContextEntities(4), WithPolicy(Strict))
	if !errors.Is(err, ErrWideContext) || !strings.Contains(err.Error(), `"w"`) {
		t.Errorf("builder strict: %v", err)
	}
}

// TestBuildNeverReplacesWithEmpty: random bytes, an empty file (also in
// strict mode) and a corpus mostly of bad lines all fail and leave the good
// index at --out byte-identical.
func TestBuildNeverReplacesWithEmpty(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	out := filepath.Join(dir, "prod.hwx")
	var good bytes.Buffer
	for i := range 20 {
		fmt.Fprintf(&good, `{"id":"c%d","obs":{"vent-%d":"open","bed-%d":"dry"}}`+"\n", i, i%3, i%4)
	}
	build := func(corpus []byte, opts ...ReadOption) (BuildSummary, error) {
		bo := []BuildOption{}
		for _, o := range opts {
			if b, ok := o.(BuildOption); ok {
				bo = append(bo, b)
			}
		}
		return Build(context.Background(), NewJSONLReader(bytes.NewReader(corpus), "g.jsonl", opts...), out, bo...)
	}
	if _, err := build(good.Bytes()); err != nil {
		t.Fatal(err)
	}
	want, _ := os.ReadFile(out)
	garbage := make([]byte, 64<<10)
	rng := rand.New(rand.NewPCG(1, 2))
	for i := range garbage {
		garbage[i] = byte(rng.Uint32())
	}
	mostlyBad := append([]byte(nil), good.Bytes()[:bytes.IndexByte(good.Bytes(), '\n')+1]...)
	for range 3 {
		mostlyBad = append(mostlyBad, "{not json\n"...)
	}
	for _, tc := range []struct {
		name   string
		corpus []byte
		opts   []ReadOption
		want   error
	}{
		{"random bytes", garbage, nil, ErrNoContexts},
		{"empty", nil, nil, ErrNoContexts},
		{"empty strict", nil, []ReadOption{WithPolicy(Strict)}, ErrNoContexts},
		{"blank lines", []byte("\n \n\n"), nil, ErrNoContexts},
		{"25% valid", mostlyBad, nil, ErrTooFewValid},
	} {
		_, err := build(tc.corpus, tc.opts...)
		if !errors.Is(err, tc.want) {
			t.Errorf("%s: %v, want %v", tc.name, err, tc.want)
		}
		if got, _ := os.ReadFile(out); !bytes.Equal(got, want) {
			t.Fatalf("%s: the good index was replaced", tc.name)
		}
	}
	// The share guard can be lowered.
	if _, err := Build(context.Background(), NewJSONLReader(bytes.NewReader(mostlyBad), "g.jsonl"), out, WithMinValidShare(0.2)); err != nil {
		t.Errorf("share 0.2: %v", err)
	}
}

// TestBuildCancelledInWritePhase: a cancel that arrives while the index is
// written stops the write and leaves the previous file untouched.
func TestBuildCancelledInWritePhase(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	out := filepath.Join(dir, "x.hwx")
	if err := os.WriteFile(out, []byte("previous"), 0o644); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	_, err := Build(ctx, &sliceReader{cs: genCorpus(3, 2000, 300, 5, 2)}, out, WithProgress(func(ev ProgressEvent) {
		if ev.Phase == PhaseWrite {
			cancel()
		}
	}))
	if !errors.Is(err, context.Canceled) {
		t.Errorf("Build cancelled in the write phase: %v", err)
	}
	if b, _ := os.ReadFile(out); string(b) != "previous" {
		t.Errorf("output replaced (%d bytes)", len(b))
	}
	if m, _ := filepath.Glob(filepath.Join(dir, TempPrefix(out)+"*")); len(m) > 0 {
		t.Errorf("temporary files left: %v", m)
	}
}

// TestHostileNames: control characters, lone surrogates and case-variant
// keys are rejected naming the line and the reason.
func TestHostileNames(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		line, reason string
	}{
		{`{"id":"c","ents":["vent\u001b[2J"]}`, ReasonControlChar},
		{`{"id":"c","obs":{"vent":"op\u0085en"}}`, ReasonControlChar},
		{`{"id":"c\u007f","ents":["vent"]}`, ReasonControlChar},
		{`{"id":"c","ents":["zone-\ud800"]}`, ReasonBadUTF8},
		{`{"id":"c","ents":["zone-\udc00\ud800"]}`, ReasonBadUTF8},
		{`{"id":"c","ents":["zone-\ud800x"]}`, ReasonBadUTF8},
		{`{"id":"c","ents":["a"],"ID":"d"}`, ReasonBadField},
		{`{"id":"c","Obs":{"a":"1"},"ents":["b"]}`, ReasonBadField},
		{`{"id":"c","ENTS":["a"],"ents":["b"]}`, ReasonBadField},
	} {
		in := `{"id":"ok","ents":["zone-\ud83c\udf31","pump"]}` + "\n" + tc.line + "\n"
		got, err := readAll(t, NewJSONLReader(strings.NewReader(in), "h.jsonl"))
		if err != nil || len(got) != 1 || !strings.Contains(got[0], "zone-\U0001F331") {
			t.Errorf("%s: lenient read %q %v", tc.line, got, err)
		}
		_, err = readAll(t, NewJSONLReader(strings.NewReader(in), "h.jsonl", WithPolicy(Strict)))
		var le *LineError
		if !errors.As(err, &le) || le.Reason != tc.reason || le.Line != 2 {
			t.Errorf("%s: strict %v, want h.jsonl:2 %s", tc.line, err, tc.reason)
			continue
		}
		if msg := le.Error(); strings.ContainsAny(msg, "\x1b\x7f") || strings.Contains(msg, "\u0085") {
			t.Errorf("%s: error message carries a raw control character: %q", tc.line, msg)
		}
	}
	csv := "context,entity,value\nc1,vent,open\nc1,\"bed\x1b]0;x\x07\",dry\n"
	_, err := readAll(t, NewCSVReader(strings.NewReader(csv), "h.csv", WithPolicy(Strict)))
	var le *LineError
	if !errors.As(err, &le) || le.Reason != ReasonControlChar || le.Line != 3 {
		t.Errorf("csv: %v", err)
	}
}

// TestCSVOpenQuoteNamesSwallowedLines: a quote that never closes reports
// the lines it swallowed.
func TestCSVOpenQuoteNamesSwallowedLines(t *testing.T) {
	t.Parallel()
	in := "context,entity,value\nc1,vent,open\nc2,\"pump,on\nc3,bed,dry\nc4,bed,wet\nc5,fan,off\n"
	r := NewCSVReader(strings.NewReader(in), "q.csv")
	if _, err := readAll(t, r); err != nil {
		t.Fatal(err)
	}
	e := r.Stats().FirstBad[ReasonBadQuote]
	if e == nil || e.Line != 3 || !strings.Contains(e.Detail, "lines 4-6") || !strings.Contains(e.Detail, "3 lines") {
		t.Errorf("bad-quote error %v: want line 3 naming the swallowed lines 4-6", e)
	}
}

// TestTooManyValuesNamesFileLine: a 65th value names file and line.
func TestTooManyValuesNamesFileLine(t *testing.T) {
	t.Parallel()
	var b strings.Builder
	for i := range MaxValues + 1 {
		fmt.Fprintf(&b, `{"id":"c%d","obs":{"valve":"v%02d","bed":"dry"}}`+"\n", i, i)
	}
	_, err := Build(context.Background(), NewJSONLReader(strings.NewReader(b.String()), "v.jsonl"), filepath.Join(t.TempDir(), "v.hwx"))
	if !errors.Is(err, ErrTooManyValues) || !strings.Contains(err.Error(), fmt.Sprintf("v.jsonl:%d:", MaxValues+1)) {
		t.Errorf("got %v, want v.jsonl:%d", err, MaxValues+1)
	}
}

// TestEscapeControl: control characters and invalid bytes are escaped,
// everything else is kept.
func TestEscapeControl(t *testing.T) {
	t.Parallel()
	for in, want := range map[string]string{
		"zone-1/air-temp": "zone-1/air-temp",
		"bed\x1b[31m":     `bed\x1b[31m`,
		"a\nb\tc\x7f":     `a\x0ab\x09c\x7f`,
		"csi\u009b":       `csi\u009b`,
		"bad\xff":         `bad\xff`,
		"ünïcødé 🌱":       "ünïcødé 🌱",
		"\ufffd":          "\ufffd",
	} {
		if got := EscapeControl(in); got != want {
			t.Errorf("EscapeControl(%q) = %q, want %q", in, got, want)
		}
	}
}
