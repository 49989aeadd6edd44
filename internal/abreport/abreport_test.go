package abreport

import (
	"errors"
	"fmt"
	"math"
	"testing"

	"github.com/hopwise/hopwise/internal/abstat"
	"github.com/hopwise/hopwise/internal/traceset"
	"github.com/hopwise/hopwise/otelx"
)

// joined builds a set of decisions with outcomes: for each arm, n units
// of which the first k succeed (score 1, else 0), every unit once, chains
// in the routed arm.
func joined(arms map[string][2]int) *traceset.Set {
	s := &traceset.Set{}
	for _, arm := range []string{"direct-only", "routed"} {
		nk, ok := arms[arm]
		if !ok {
			continue
		}
		for i := range nk[0] {
			mode := "direct"
			if arm == "routed" {
				mode = "chain"
			}
			score := 0.0
			if i < nk[1] {
				score = 1
			}
			d := &otelx.DecisionRecord{Key: fmt.Sprintf("%s-bed-%d", arm, i), Arm: arm, Mode: mode, SamplingRatio: 1}
			o := &otelx.OutcomeRecord{Key: d.Key, Score: score, InputTokens: 100, OutputTokens: int64(10 * len(mode))} // 50 chain, 60 direct
			s.Joined = append(s.Joined, otelx.Joined{Decision: d, Outcome: o})
		}
	}
	return s
}

// TestCompareHandComputed: 7/10 against 3/10, checked against abstat's
// own published-value-tested intervals and hand sums.
func TestCompareHandComputed(t *testing.T) {
	t.Parallel()
	o := DefaultOptions()
	o.Reps = 200
	o.Allocation = map[string]float64{"routed": 1, "direct-only": 1}
	rep, err := Compare(joined(map[string][2]int{"direct-only": {10, 3}, "routed": {10, 7}}), o)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Control != "direct-only" || len(rep.Arms) != 2 || rep.Arms[0].Arm != "direct-only" {
		t.Fatalf("arms %+v", rep.Arms)
	}
	r := rep.Arms[1]
	if r.N != 10 || r.Units != 10 || r.Successes != 7 || r.MeanScore != 0.7 || r.ChainShare != 1 || r.MeanCost != 150 {
		t.Errorf("routed arm %+v", r)
	}
	want, _ := abstat.NewcombeDiff(7, 10, 3, 10, 0.95)
	d := rep.Diffs[0]
	if d.Success != want || math.Abs(d.Success.Est-0.4) > 1e-12 || d.Cost == nil || d.Cost.Est != -10 {
		t.Errorf("diff %+v, want success %v and cost −10 (60 output tokens direct, 50 chained)", d, want)
	}
	if rep.SRM == nil || rep.SRM.ChiSq != 0 || rep.SRM.Mismatch {
		t.Errorf("srm %+v", rep.SRM)
	}
}

func TestCompareRefusals(t *testing.T) {
	t.Parallel()
	one := joined(map[string][2]int{"routed": {5, 2}})
	if _, err := Compare(one, DefaultOptions()); !errors.Is(err, ErrNoComparison) {
		t.Errorf("one arm: %v", err)
	}
	two := joined(map[string][2]int{"direct-only": {5, 2}, "routed": {5, 3}})
	for _, mod := range []func(*Options){
		func(o *Options) { o.Confidence = 1 },
		func(o *Options) { o.Control = "chain-always" },
		func(o *Options) { o.Allocation = map[string]float64{"routed": 1} },
		func(o *Options) { o.Allocation = map[string]float64{"routed": 1, "chain-always": 1} },
		func(o *Options) { o.Power, o.MDE = 0.8, 0 },
	} {
		o := DefaultOptions()
		o.Reps = 10
		mod(&o)
		if _, err := Compare(two, o); !errors.Is(err, ErrBadOption) {
			t.Errorf("%+v: %v", o, err)
		}
	}
}

func ExampleCompare() {
	o := DefaultOptions()
	o.Reps = 0
	rep, err := Compare(joined(map[string][2]int{"direct-only": {40, 22}, "routed": {40, 31}}), o)
	if err != nil {
		fmt.Println(err)
		return
	}
	d := rep.Diffs[0]
	fmt.Printf("%s − %s: success %+.3f [%+.3f, %+.3f], significant %v\n", d.Arm, d.Control, d.Success.Est, d.Success.Lo, d.Success.Hi, d.Significant)
	// Output: routed − direct-only: success +0.225 [+0.018, +0.408], significant true
}
