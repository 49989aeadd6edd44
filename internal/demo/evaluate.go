package demo

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"sort"

	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
)

// Row is one line of the demo table: the mean squared errors of one query
// set (see the package doc for the measure).
type Row struct {
	Set     string // "far-apart (held-out)" or "well-supported"
	Pairs   int    // distinct unordered entity pairs
	Queries int    // (from, value, to) queries routed: both directions, every value
	// Skipped counts queries without an exact answer (evidence of
	// probability zero); they are not in the means.
	Skipped int
	// WithChain counts queries for which the router found a chain.
	WithChain int
	// Routed to chain: decisions whose mode is chain.
	RoutedChain int
	// Mean squared errors vs the exact conditional.
	Direct, Chained, Routed float64
	// MeanSupport is the mean support of the direct pair.
	MeanSupport float64
}

// ChainShare is the share of the set's queries routed to a chain.
func (r Row) ChainShare() float64 {
	if r.Queries == 0 {
		return 0
	}
	return float64(r.RoutedChain) / float64(r.Queries)
}

// Explained is one decision shown with its reason, bridges and exact truth.
type Explained struct {
	Set                string
	From, Value, To    string
	Mode               string
	Reason             string
	Bridges            []string
	Support            uint64 // direct pair support
	ChainMinSupport    uint64
	Gain               float64
	TargetValue        string  // the value whose probability is shown
	Truth, Direct      float64 // P(To = TargetValue | From = Value)
	Chained            float64 // NaN-free: equals Direct without a chain
	DirectSE, RoutedSE float64 // squared errors (package measure)
}

type evalResult struct {
	heldOut, supported Row
	explained          []Explained
}

// query is one routed (from, value, to) query with its measured errors.
type query struct {
	set                      int // 0 held-out, 1 supported
	from, to, value          int
	d                        router.Decision
	truth                    []float64
	seDirect, seChain, seRtd float64
}

// evaluate routes both directions and every value of each held-out and each
// supported pair and measures the three estimates against exact truth.
func evaluate(ctx context.Context, w *world.World, r *router.Router, inst *otelx.Instrumentation, nExplain int) (evalResult, error) {
	sets := [2][][2]int{w.HeldOut(), w.Supported()}
	rows := [2]Row{{Set: "far-apart (held-out)"}, {Set: "well-supported"}}
	var all []query
	n := 0
	for si, pairs := range sets {
		row := &rows[si]
		row.Pairs = len(pairs)
		var sumD, sumC, sumR, sumSup float64
		for _, p := range pairs {
			for _, dir := range [2][2]int{{p[0], p[1]}, {p[1], p[0]}} {
				from, to := dir[0], dir[1]
				for u := range w.Card(from) {
					n++
					truth, err := w.TrueConditional(from, u, to)
					if errors.Is(err, world.ErrImpossibleEvidence) {
						row.Skipped++
						continue
					}
					if err != nil {
						return evalResult{}, fmt.Errorf("demo: exact P(%s | %s): %w", w.Name(to), w.Name(from), err)
					}
					q := router.Query{From: w.Name(from), Value: w.Labels(from)[u], To: w.Name(to), Key: fmt.Sprintf("demo-q%04d", n)}
					d, err := inst.Decide(ctx, r, q)
					if err != nil {
						return evalResult{}, fmt.Errorf("demo: routing %s=%s → %s: %w", q.From, q.Value, q.To, err)
					}
					if !slices.Equal(d.Values, w.Labels(to)) {
						return evalResult{}, fmt.Errorf("demo: index values %v of %s differ from the world's %v", d.Values, q.To, w.Labels(to))
					}
					qq := query{set: si, from: from, to: to, value: u, d: d, truth: truth}
					qq.seDirect = sqErr(d.Direct.Estimate, truth)
					qq.seChain = qq.seDirect
					if d.Chain != nil {
						row.WithChain++
						qq.seChain = sqErr(d.Chain.Estimate, truth)
					}
					qq.seRtd = sqErr(d.Estimate, truth)
					if d.Mode == router.ModeChain {
						row.RoutedChain++
					}
					row.Queries++
					sumD += qq.seDirect
					sumC += qq.seChain
					sumR += qq.seRtd
					sumSup += float64(d.Direct.Support)
					all = append(all, qq)
				}
			}
		}
		if row.Queries > 0 {
			k := float64(row.Queries)
			row.Direct, row.Chained, row.Routed, row.MeanSupport = sumD/k, sumC/k, sumR/k, sumSup/k
		}
	}
	return evalResult{heldOut: rows[0], supported: rows[1], explained: pickExplained(w, all, rows, nExplain)}, nil
}

// sqErr is (1/K) Σ_v (p̂_v − p_v)²; a missing estimate counts as uniform.
func sqErr(est, truth []float64) float64 {
	k := len(truth)
	if k == 0 {
		return 0
	}
	var s float64
	for v, p := range truth {
		e := 1 / float64(k)
		if v < len(est) {
			e = est[v]
		}
		s += (e - p) * (e - p)
	}
	return s / float64(k)
}

// pickExplained chooses n decisions that show the job: far-apart queries the
// router chained with the largest error reduction (distinct pairs), the
// far-apart query it still answered directly with the smallest gain, and the
// best-supported query it answered directly.
func pickExplained(w *world.World, all []query, rows [2]Row, n int) []Explained {
	var out []Explained
	seen := map[[2]int]bool{}
	add := func(q query) {
		key := [2]int{min(q.from, q.to), max(q.from, q.to)}
		if seen[key] || len(out) >= n {
			return
		}
		seen[key] = true
		out = append(out, explain(w, q, rows[q.set].Set))
	}
	var held, sup []query
	for _, q := range all {
		if q.set == 0 {
			held = append(held, q)
		} else {
			sup = append(sup, q)
		}
	}
	sort.SliceStable(held, func(i, j int) bool { return held[i].d.Gain > held[j].d.Gain })
	sort.SliceStable(sup, func(i, j int) bool { return sup[i].d.Direct.Support > sup[j].d.Direct.Support })
	nChain := max(n-2, 1)
	for _, q := range held {
		if len(out) >= nChain {
			break
		}
		if q.d.Mode == router.ModeChain {
			add(q)
		}
	}
	for i := len(held) - 1; i >= 0; i-- {
		if held[i].d.Mode == router.ModeDirect {
			add(held[i])
			break
		}
	}
	for _, q := range sup {
		if q.d.Mode == router.ModeDirect {
			add(q)
			break
		}
	}
	for _, q := range held { // fill up when a kind was missing
		add(q)
	}
	return out
}

func explain(w *world.World, q query, set string) Explained {
	// Show the probability of the target's value that the truth favours.
	v := 0
	for i, p := range q.truth {
		if p > q.truth[v] {
			v = i
		}
	}
	e := Explained{
		Set: set, From: w.Name(q.from), Value: w.Labels(q.from)[q.value], To: w.Name(q.to),
		Mode: q.d.Mode.String(), Reason: q.d.Reason.Code, Bridges: q.d.Bridges,
		Support: q.d.Direct.Support, Gain: q.d.Gain, TargetValue: w.Labels(q.to)[v],
		Truth: q.truth[v], Direct: at(q.d.Direct.Estimate, v), DirectSE: q.seDirect, RoutedSE: q.seRtd,
	}
	e.Chained = e.Direct
	if q.d.Chain != nil {
		e.Chained = at(q.d.Chain.Estimate, v)
		e.ChainMinSupport = q.d.Chain.MinSupport
		if e.Bridges == nil {
			e.Bridges = q.d.Chain.Bridges
		}
	}
	return e
}

func at(s []float64, i int) float64 {
	if i < len(s) {
		return s[i]
	}
	return 0
}
