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

// TestBuildMaxContextEntities: the builder skips and counts a context over
// the limit from a reader that does not apply it, or fails under Strict.
// (The corpus readers' own handling is tested in graphidx/corpus.)
func TestBuildMaxContextEntities(t *testing.T) {
	t.Parallel()
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
		return Build(context.Background(), jsonlReader(bytes.NewReader(corpus), "g.jsonl", opts...), out, bo...)
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
	if _, err := Build(context.Background(), jsonlReader(bytes.NewReader(mostlyBad), "g.jsonl"), out, WithMinValidShare(0.2)); err != nil {
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

// TestTooManyValuesNamesFileLine: a 65th value names file and line.
func TestTooManyValuesNamesFileLine(t *testing.T) {
	t.Parallel()
	var b strings.Builder
	for i := range MaxValues + 1 {
		fmt.Fprintf(&b, `{"id":"c%d","obs":{"valve":"v%02d","bed":"dry"}}`+"\n", i, i)
	}
	_, err := Build(context.Background(), jsonlReader(strings.NewReader(b.String()), "v.jsonl"), filepath.Join(t.TempDir(), "v.hwx"))
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
