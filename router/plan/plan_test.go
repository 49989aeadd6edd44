package plan_test

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/router/plan"
)

type fakeSource struct {
	dists   []router.BridgeDist
	err     error
	measure router.ErrorMeasure
	calls   int
}

func (f *fakeSource) ChainDists(context.Context, router.Query, router.Decision) ([]router.BridgeDist, error) {
	f.calls++
	return f.dists, f.err
}
func (f *fakeSource) ErrorMeasure() router.ErrorMeasure { return f.measure }

func chainDecision(bridges ...string) router.Decision {
	return router.Decision{
		Mode:     router.ModeChain,
		Bridges:  bridges,
		Values:   []string{"firm", "wilted"},
		Estimate: []float64{0.3, 0.7},
		Err:      0.01,
		Chain:    &router.ChainResult{Bridges: bridges, MinSupport: 40},
		Direct:   router.DirectResult{Support: 2},
		Reason:   router.Reason{Code: router.ReasonGainAbove},
	}
}

func TestFromDists(t *testing.T) {
	t.Parallel()
	q := router.Query{From: "vent-a", Value: "open", To: "bed-1/leaf"}
	two := []router.BridgeDist{
		{Entity: "zone-1/hum", Values: []string{"high", "low"}, Dist: []float64{0.25, 0.75}},
		{Entity: "pump-2", Values: []string{"off", "on"}, Dist: []float64{0.5, 0.5}},
	}
	tests := []struct {
		name    string
		q       router.Query
		d       router.Decision
		dists   []router.BridgeDist
		measure router.ErrorMeasure
		namer   plan.Namer
		wantErr error
		check   func(t *testing.T, p plan.Plan)
	}{
		{name: "chain", q: q, d: chainDecision("zone-1/hum", "pump-2"), dists: two, measure: router.MeasureSqErrorSum,
			namer: names{"zone-1/hum": "zone 1 humidity"},
			check: func(t *testing.T, p plan.Plan) {
				want := []plan.Step{
					{Entity: "zone-1/hum", Name: "zone 1 humidity", Value: "low", Prob: 0.75, HasValue: true},
					{Entity: "pump-2", Name: "pump-2", Value: "off", Prob: 0.5, HasValue: true}, // tie: first label
				}
				if len(p.Steps) != 2 || p.Steps[0] != want[0] || p.Steps[1] != want[1] {
					t.Errorf("steps %+v, want %+v", p.Steps, want)
				}
				if p.Answer != (plan.Step{Entity: "bed-1/leaf", Name: "bed-1/leaf", Value: "wilted", Prob: 0.7, HasValue: true}) {
					t.Errorf("answer %+v", p.Answer)
				}
				if p.Support != 40 || p.SqErrorSum == nil || *p.SqErrorSum != 0.01 || p.ErrorProxy != nil {
					t.Errorf("support %d, figure %+v", p.Support, p.ErrorFigure)
				}
				if !p.HasValue || p.Value != "open" || p.Reason != router.ReasonGainAbove {
					t.Errorf("from value %q %v, reason %q", p.Value, p.HasValue, p.Reason)
				}
			}},
		{name: "presence-only", q: router.Query{From: "vent-a", Value: "present", To: "bed-1"},
			d: router.Decision{Mode: router.ModeChain, Bridges: []string{"pump-2"}, Values: []string{"present"}, Estimate: []float64{1},
				Err: 0.2, Chain: &router.ChainResult{Bridges: []string{"pump-2"}, MinSupport: 9}},
			dists:   []router.BridgeDist{{Entity: "pump-2", Values: []string{"present"}, Dist: []float64{1}}},
			measure: router.MeasureSupportProxy,
			check: func(t *testing.T, p plan.Plan) {
				if p.HasValue || p.Value != "" || p.Answer.HasValue || p.Steps[0].HasValue || p.Steps[0].Value != "" {
					t.Errorf("presence-only plan carries values: %+v", p)
				}
				if p.ErrorProxy == nil || *p.ErrorProxy != 0.2 || p.SqErrorSum != nil || p.Measure() != router.MeasureSupportProxy {
					t.Errorf("figure %+v", p.ErrorFigure)
				}
			}},
		{name: "valued present label", q: router.Query{From: "sensor", Value: "present", To: "bed-1"},
			d: router.Decision{Mode: router.ModeDirect}, measure: router.MeasureSqErrorSum,
			check: func(t *testing.T, p plan.Plan) {
				if !p.HasValue || p.Value != "present" {
					t.Errorf("a valued index's label %q was dropped", p.Value)
				}
			}},
		{name: "direct ignores dists", q: q, d: router.Decision{Mode: router.ModeDirect, Chain: &router.ChainResult{MinSupport: 3},
			Direct: router.DirectResult{Support: 77}}, dists: two, measure: router.MeasureSqErrorSum,
			check: func(t *testing.T, p plan.Plan) {
				if len(p.Steps) != 0 || p.Support != 77 || p.Answer.HasValue {
					t.Errorf("direct plan %+v", p)
				}
			}},
		{name: "nil lexicon namer, non-finite distribution", q: q, d: chainDecision("pump-2"), measure: router.MeasureSqErrorSum,
			namer: (*graphidx.Lexicon)(nil),
			dists: []router.BridgeDist{{Entity: "pump-2", Values: []string{"off", "on"}, Dist: []float64{math.NaN(), 0.5}}},
			check: func(t *testing.T, p plan.Plan) {
				if p.Steps[0].HasValue || p.Steps[0].Name != "pump-2" || p.FromName != "vent-a" {
					t.Errorf("steps %+v from %q", p.Steps, p.FromName)
				}
			}},
		{name: "chain fallback without a chain", q: q, d: router.Decision{Mode: router.ModeChain, Reason: router.Reason{Code: router.ReasonUnknownEntityFallback}},
			measure: router.MeasureSqErrorSum,
			check: func(t *testing.T, p plan.Plan) {
				if len(p.Steps) != 0 || p.Answer.HasValue || plan.Template(p) != "direct" {
					t.Errorf("fallback plan %+v renders %s", p, plan.Template(p))
				}
			}},
		{name: "count mismatch", q: q, d: chainDecision("zone-1/hum"), dists: two, wantErr: plan.ErrMismatch},
		{name: "entity mismatch", q: q, d: chainDecision("pump-2", "zone-1/hum"), dists: two, wantErr: plan.ErrMismatch},
		{name: "length mismatch", q: q, d: chainDecision("pump-2"),
			dists: []router.BridgeDist{{Entity: "pump-2", Values: []string{"off", "on"}, Dist: []float64{1}}}, wantErr: plan.ErrMismatch},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			p, err := plan.FromDists(tc.q, tc.d, tc.dists, tc.measure, tc.namer)
			if tc.wantErr != nil {
				if !errors.Is(err, tc.wantErr) {
					t.Fatalf("err %v, want %v", err, tc.wantErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			tc.check(t, p)
		})
	}
}

func TestBuildCallsSourceForChainsOnly(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	q := router.Query{From: "vent-a", Value: "open", To: "bed-1/leaf"}
	src := &fakeSource{measure: router.MeasureSqErrorSum,
		dists: []router.BridgeDist{{Entity: "pump-2", Values: []string{"off", "on"}, Dist: []float64{0.1, 0.9}}}}
	p, err := plan.Build(ctx, src, q, chainDecision("pump-2"), nil)
	if err != nil || len(p.Steps) != 1 || p.Steps[0].Value != "on" || src.calls != 1 {
		t.Fatalf("chain: %+v, %v, %d calls", p, err, src.calls)
	}
	if _, err := plan.Build(ctx, src, q, router.Decision{Mode: router.ModeDirect}, nil); err != nil || src.calls != 1 {
		t.Fatalf("direct: %v, %d calls (want no ChainDists call)", err, src.calls)
	}
	src.err = router.ErrStaleDecision
	if _, err := plan.Build(ctx, src, q, chainDecision("pump-2"), nil); !errors.Is(err, router.ErrStaleDecision) {
		t.Fatalf("source error: %v", err)
	}
}

func TestRendererTemplates(t *testing.T) {
	t.Parallel()
	chain, err := plan.FromDists(router.Query{From: "a", Value: "x", To: "b"}, chainDecision("c"),
		[]router.BridgeDist{{Entity: "c", Values: []string{"lo", "hi"}, Dist: []float64{0.4, 0.6}}}, router.MeasureSqErrorSum, nil)
	if err != nil {
		t.Fatal(err)
	}
	direct := chain
	direct.Mode, direct.Steps = router.ModeDirect, nil
	tests := []struct {
		name     string
		opts     []plan.RenderOption
		p        plan.Plan
		newErr   bool
		want     string // substring of the output
		wantExec bool   // Render fails
	}{
		{name: "default chain", p: chain, want: `Step 1: work out the state of c (the records lean to "hi", 60%).`},
		{name: "default direct", p: direct, want: "Answer directly (known: a: x; asked: b)."},
		{name: "chain without steps renders direct", p: func() plan.Plan { p := chain; p.Steps = nil; return p }(), want: "Answer directly"},
		{name: "own chain", opts: []plan.RenderOption{plan.WithChainTemplate("{{range .Steps}}[{{.Name}}={{.Value}}]{{end}} {{fixed .Figure}}")},
			p: chain, want: "[c=hi] 0.01"},
		{name: "unparsable chain", opts: []plan.RenderOption{plan.WithChainTemplate("{{range .Steps}")}, newErr: true},
		{name: "unparsable direct", opts: []plan.RenderOption{plan.WithDirectTemplate("{{nosuchfunc .To}}")}, newErr: true},
		// A template that fails on the shapes every router produces fails
		// in NewRenderer, once, instead of on every plan of that shape
		// (route used to print the error for each chained query, and a
		// gateway found out at its first chain decision).
		{name: "missing field", opts: []plan.RenderOption{plan.WithDirectTemplate("{{.Nope}}")}, newErr: true},
		{name: "missing field in chain", opts: []plan.RenderOption{plan.WithChainTemplate("{{range .Steps}}{{.Nmae}}{{end}}")}, newErr: true},
		{name: "index out of range", opts: []plan.RenderOption{plan.WithChainTemplate("{{index .Steps 5}}")}, newErr: true},
		{name: "bad argument type", opts: []plan.RenderOption{plan.WithDirectTemplate("{{inc .To}}")}, newErr: true},
		{name: "second step on a one-step chain", opts: []plan.RenderOption{plan.WithChainTemplate("{{(index .Steps 1).Name}}")}, newErr: true},
		// A failure no sample shape reaches still fails in Execute.
		{name: "failure on one plan only", opts: []plan.RenderOption{plan.WithDirectTemplate(`{{if eq .From "a"}}{{index .Steps 0}}{{end}}`)}, p: direct, wantExec: true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			r, err := plan.NewRenderer(tc.opts...)
			if tc.newErr {
				if !errors.Is(err, plan.ErrTemplate) {
					t.Fatalf("NewRenderer: %v, want ErrTemplate", err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			var b strings.Builder
			err = r.Execute(&b, tc.p)
			if tc.wantExec {
				if !errors.Is(err, plan.ErrTemplate) || b.Len() != 0 {
					t.Fatalf("Execute: %v, wrote %q; want ErrTemplate and nothing written", err, b.String())
				}
				return
			}
			if err != nil || !strings.Contains(b.String(), tc.want) {
				t.Fatalf("Execute: %v\n%s\nwant it to contain %q", err, b.String(), tc.want)
			}
		})
	}
	var zero plan.Renderer
	if _, err := zero.Render(chain); !errors.Is(err, plan.ErrTemplate) {
		t.Errorf("zero Renderer: %v", err)
	}
}

// TestParallelPlan: a decision whose chain reads its two bridges side by
// side (router.ChainResult.Parallel) gives a plan with Parallel set, and
// the default chain template asks for each bridge from what is known alone
// and for the answer from both together; a sequential chain of the same
// bridges renders as before.
func TestParallelPlan(t *testing.T) {
	q := router.Query{From: "cloudy", Value: "true", To: "wetgrass"}
	d := chainDecision("sprinkler", "rain")
	d.Chain.Parallel = true
	dists := []router.BridgeDist{
		{Entity: "sprinkler", Values: []string{"false", "true"}, Dist: []float64{0.9, 0.1}},
		{Entity: "rain", Values: []string{"false", "true"}, Dist: []float64{0.2, 0.8}},
	}
	r, err := plan.NewRenderer()
	if err != nil {
		t.Fatal(err)
	}
	for _, par := range []bool{true, false} {
		d.Chain.Parallel = par
		p, err := plan.FromDists(q, d, dists, router.MeasureSqErrorSum, nil)
		if err != nil {
			t.Fatal(err)
		}
		text, err := r.Render(p)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("parallel %v:\n%s", par, text)
		alone := strings.Count(text, "from what is known alone")
		if p.Parallel != par || (par && (alone != 2 || !strings.Contains(text, "those states taken together"))) ||
			(!par && (alone != 0 || !strings.Contains(text, "from those steps"))) {
			t.Errorf("parallel %v: plan.Parallel %v, text\n%s", par, p.Parallel, text)
		}
	}
}
