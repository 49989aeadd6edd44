package router

import (
	"context"
	"math"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// presenceGraph is a presence-only index: tags that occur together.
func presenceGraph(valued bool) *memGraph {
	b := newMemBuilder(3)
	p := graphidx.PresentValue
	bed := b.entity("bed-4", p)
	pump := b.entity("pump-2", p)
	vent := b.entity("vent-north", p)
	if valued {
		b.entity("zone-1/humidity", "high", "low")
	}
	b.pair(vent, pump, 300)
	b.pair(pump, bed, 400)
	b.pair(vent, bed, 2)
	return b.build()
}

func TestPresenceOnlyIndexSelectsSupportModel(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	q := Query{From: "vent-north", Value: graphidx.PresentValue, To: "bed-4"}
	bayes, err := scorer.NewBayes()
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name      string
		valued    bool
		opts      []Option
		wantModel string
		presence  bool
	}{
		{name: "presence-only, no config", wantModel: "support", presence: true},
		{name: "presence-only, alpha and beta of the default model", opts: []Option{WithAlpha(2), WithBeta(0.01)}, wantModel: "support", presence: true},
		{name: "presence-only, explicit Bayes", opts: []Option{WithModel(bayes)}, wantModel: "bayes", presence: true},
		{name: "one valued entity", valued: true, wantModel: "bayes"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			r, err := New(presenceGraph(tc.valued), tc.opts...)
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			if r.ModelName() != tc.wantModel || r.PresenceOnly() != tc.presence {
				t.Fatalf("model %q presence %v, want %q %v", r.ModelName(), r.PresenceOnly(), tc.wantModel, tc.presence)
			}
			d, err := r.Decide(ctx, q)
			if err != nil {
				t.Fatal(err)
			}
			if tc.wantModel != "support" {
				return
			}
			// err(direct) = v0/(support + n0) with the scorer's defaults.
			want := scorer.DefaultV0 / (2 + scorer.DefaultN0)
			if math.Abs(d.Direct.Err-want) > 1e-15 || d.Direct.Support != 2 {
				t.Errorf("direct error %g support %d, want %g and 2", d.Direct.Err, d.Direct.Support, want)
			}
			if r.ErrorMeasure() != MeasureSupportProxy {
				t.Errorf("measure %q", r.ErrorMeasure())
			}
			if d.Chain == nil || len(d.Chain.Bridges) != 1 || d.Chain.Bridges[0] != "pump-2" {
				t.Fatalf("chain %+v, want via pump-2", d.Chain)
			}
			wantChain := scorer.DefaultV0/(300+scorer.DefaultN0) + scorer.DefaultV0/(400+scorer.DefaultN0) + scorer.DefaultSupportBeta
			if math.Abs(d.Chain.Err-wantChain) > 1e-12 {
				t.Errorf("chain error %g, want %g", d.Chain.Err, wantChain)
			}
		})
	}
}
