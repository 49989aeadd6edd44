package demo

import (
	"bytes"
	"context"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/eval"
	"github.com/hopwise/hopwise/otelx"
)

// TestRunSmall runs the whole demo on a small corpus and checks that the
// table it prints shows chained estimates beating direct ones on far-apart
// pairs, that the files exist, and that the trace file holds one decision
// span per routed query.
func TestRunSmall(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	var log bytes.Buffer
	events := 0
	progress := func(size int64) (func(graphidx.ProgressEvent), func()) {
		if size <= 0 {
			t.Errorf("progress started with corpus size %d", size)
		}
		return func(graphidx.ProgressEvent) { events++ }, func() {}
	}
	rep, err := Run(context.Background(), Config{Dir: dir, Seed: 3, Contexts: 20_000, Progress: progress, Log: &log})
	if err != nil {
		t.Fatal(err)
	}
	if events == 0 {
		t.Error("no build progress events")
	}
	var table bytes.Buffer
	if err := rep.WriteTable(&table); err != nil {
		t.Fatal(err)
	}
	if err := rep.WriteFiles(&table); err != nil {
		t.Fatal(err)
	}
	t.Logf("\n%s%s", log.String(), table.String())

	h, s := rep.Eval.HeldOut, rep.Eval.Supported
	if h.N == 0 || s.N == 0 {
		t.Fatalf("empty query sets: %+v %+v", h, s)
	}
	// The point of the product: on pairs never seen together, chaining
	// beats answering directly, and the router captures that.
	if !(h.Chain < h.Direct) {
		t.Errorf("held-out: chained MSE %.5f not below direct %.5f", h.Chain, h.Direct)
	}
	if !(h.Routed < h.Direct) {
		t.Errorf("held-out: routed MSE %.5f not below direct %.5f", h.Routed, h.Direct)
	}
	if h.ChainShare < 0.5 {
		t.Errorf("held-out: only %.0f%% routed to a chain", 100*h.ChainShare)
	}
	// On supported pairs the router must mostly keep the direct answer:
	// always chaining there is far worse than routing.
	if !(s.Routed < s.Chain/4) || s.ChainShare > 0.25 {
		t.Errorf("supported: routed MSE %.6f vs chained %.6f, %.0f%% chained", s.Routed, s.Chain, 100*s.ChainShare)
	}
	// The traced pass routes the harness's queries with the same router
	// settings, so its counts must agree with the harness's.
	for _, c := range []struct {
		name string
		sc   eval.Scores
		tr   Traced
	}{{"held-out", h, rep.HeldOut}, {"supported", s, rep.Supported}} {
		if c.tr.Queries != c.sc.N {
			t.Errorf("%s: traced %d queries, eval %d", c.name, c.tr.Queries, c.sc.N)
		}
		if math.Abs(c.tr.ChainShare()-c.sc.ChainShare) > 1e-9 {
			t.Errorf("%s: traced chain share %.4f, eval %.4f", c.name, c.tr.ChainShare(), c.sc.ChainShare)
		}
	}
	// Held-out pairs never co-occur (world package contract).
	if rep.HeldOut.MeanSupport != 0 {
		t.Errorf("held-out mean support %.1f, want 0", rep.HeldOut.MeanSupport)
	}
	if len(rep.Explained) == 0 {
		t.Error("no explained decisions")
	}
	out := table.String()
	for _, want := range []string{"far-apart (held-out)", "well-supported", "chain via", "hopwise route --index"} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q", want)
		}
	}
	// Free text: one question chained, one direct, each through mentions
	// (a valued fact and a target), a decision and a plan with one step
	// per bridge.
	if len(rep.Texts) != 2 || rep.Texts[0].Decisions[0].Mode.String() != "chain" || rep.Texts[1].Decisions[0].Mode.String() != "direct" {
		t.Fatalf("texts: %+v", rep.Texts)
	}
	for _, ex := range rep.Texts {
		if len(ex.Mentions) < 2 || !ex.Mentions[0].HasValue || len(ex.Decisions) != len(ex.Plans) || len(ex.Plans) != len(ex.Prompts) {
			t.Errorf("%s: %d mentions, %d decisions, %d plans", ex.ID, len(ex.Mentions), len(ex.Decisions), len(ex.Plans))
		}
		for i, d := range ex.Decisions {
			if len(ex.Plans[i].Steps) != len(d.Bridges) || ex.Prompts[i] == "" {
				t.Errorf("%s: plan of %d steps for %d bridges", ex.ID, len(ex.Plans[i].Steps), len(d.Bridges))
			}
		}
	}
	for _, want := range []string{"From a question to a plan", "mention  \"", "chain template:", "direct template:", "--lexicon"} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q", want)
		}
	}
	for _, p := range []string{rep.Files.Corpus, rep.Files.Index, rep.Files.Queries, rep.Files.Truth, rep.Files.Trace, rep.Files.Plot, rep.Files.Lexicon, rep.Files.Questions} {
		st, err := os.Stat(p)
		if err != nil || st.Size() == 0 {
			t.Errorf("file %s missing or empty: %v", p, err)
		}
		if filepath.Dir(p) != dir {
			t.Errorf("file %s outside %s", p, dir)
		}
	}
	png, err := os.ReadFile(rep.Files.Plot)
	if err != nil || !bytes.HasPrefix(png, []byte("\x89PNG\r\n\x1a\n")) {
		t.Errorf("plot is not a PNG (%v)", err)
	}
	lg, err := otelx.ReadTraceFiles(rep.Files.Trace)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := len(lg.Decisions), rep.HeldOut.Queries+rep.Supported.Queries; got != want {
		t.Errorf("trace has %d decisions, want %d", got, want)
	}
	chains := 0
	for _, d := range lg.Decisions {
		if d.Mode == "chain" {
			chains++
		}
	}
	if want := rep.HeldOut.RoutedChain + rep.Supported.RoutedChain; chains != want {
		t.Errorf("trace has %d chain decisions, table %d", chains, want)
	}
}

func TestConfigErrors(t *testing.T) {
	t.Parallel()
	for _, c := range []Config{{Contexts: 5}, {Contexts: MaxContexts + 1}, {Workers: -1}, {Examples: 11}} {
		c.Dir = t.TempDir()
		if _, err := Run(context.Background(), c); !errors.Is(err, ErrBadConfig) {
			t.Errorf("%+v: err %v, want ErrBadConfig", c, err)
		}
	}
}
