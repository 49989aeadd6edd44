package demo

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"sort"
	"strings"

	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
)

// Traced summarises the traced routing pass over one query set.
type Traced struct {
	Set     string // "far-apart (held-out)" or "well-supported"
	Queries int    // (from, value, to) queries routed and traced
	// Skipped counts queries without an exact answer (evidence of
	// probability zero) or whose observed value never occurs in the corpus.
	Skipped     int
	WithChain   int     // queries for which the router found a chain
	RoutedChain int     // decisions whose mode is chain
	MeanSupport float64 // mean support of the direct pair
}

// ChainShare is the share of the set's queries routed to a chain.
func (t Traced) ChainShare() float64 {
	if t.Queries == 0 {
		return 0
	}
	return float64(t.RoutedChain) / float64(t.Queries)
}

// Explained is one decision shown with its reason, bridges and exact truth.
type Explained struct {
	Set             string
	From, Value, To string
	Mode            string
	Reason          string
	Bridges         []string // the chosen chain, or the best chain not taken
	Support         uint64   // direct pair support
	ChainMinSupport uint64
	Gain            float64
	TargetValue     string  // the value whose probability is shown
	Truth, Direct   float64 // P(To = TargetValue | From = Value)
	Chained         float64 // equals Direct without a chain
}

type routeResult struct {
	heldOut, supported Traced
	explained          []Explained
}

type routed struct {
	set             int // 0 held-out, 1 supported
	from, to, value int
	d               router.Decision
	truth           []float64
}

// route decides both directions and every value of each held-out and each
// supported pair (the eval harness's query set) through the instrumented
// router, with unit keys so the traces can be joined to outcomes.
func route(ctx context.Context, w *world.World, r *router.Router, inst *otelx.Instrumentation, nExplain int) (routeResult, error) {
	rows := [2]Traced{{Set: "far-apart (held-out)"}, {Set: "well-supported"}}
	qs, impossible, err := demoQueries(w)
	if err != nil {
		return routeResult{}, err
	}
	rows[0].Skipped, rows[1].Skipped = impossible[0], impossible[1]
	var all []routed
	var sumSup [2]float64
	for n, dq := range qs {
		row := &rows[dq.set]
		q := dq.query(w, fmt.Sprintf("demo-q%04d", n+1))
		d, err := inst.Decide(ctx, r, q)
		if errors.Is(err, router.ErrUnknownValue) {
			row.Skipped++
			continue
		}
		if err == nil {
			err = dq.checkValues(w, d)
		}
		if err != nil {
			return routeResult{}, fmt.Errorf("demo: routing %s=%s → %s: %w", q.From, q.Value, q.To, err)
		}
		row.Queries++
		if d.Chain != nil {
			row.WithChain++
		}
		if d.Mode == router.ModeChain {
			row.RoutedChain++
		}
		sumSup[dq.set] += float64(d.Direct.Support)
		all = append(all, routed{set: dq.set, from: dq.from, to: dq.to, value: dq.value, d: d, truth: dq.truth})
	}
	for i := range rows {
		if rows[i].Queries > 0 {
			rows[i].MeanSupport = sumSup[i] / float64(rows[i].Queries)
		}
	}
	return routeResult{heldOut: rows[0], supported: rows[1], explained: pickExplained(w, all, rows, nExplain)}, nil
}

// demoQuery is one question of the demo with its exact answer: entity to
// given entity from = its value-th value, from query set set (0 held-out,
// 1 supported).
type demoQuery struct {
	set, from, value, to int
	truth                []float64 // exact P(to | from = value), by value index
}

// demoQueries lists both directions and every value of each held-out and
// each supported pair of w (the eval harness's query set), leaving out,
// and counting per set, the queries whose evidence has probability zero.
func demoQueries(w *world.World) (qs []demoQuery, impossible [2]int, err error) {
	for si, pairs := range [2][][2]int{w.HeldOut(), w.Supported()} {
		for _, p := range pairs {
			for _, dir := range [2][2]int{{p[0], p[1]}, {p[1], p[0]}} {
				from, to := dir[0], dir[1]
				for u := range w.Card(from) {
					truth, err := w.TrueConditional(from, u, to)
					if errors.Is(err, world.ErrImpossibleEvidence) {
						impossible[si]++
						continue
					}
					if err != nil {
						return nil, impossible, fmt.Errorf("demo: exact P(%s | %s): %w", w.Name(to), w.Name(from), err)
					}
					qs = append(qs, demoQuery{set: si, from: from, value: u, to: to, truth: truth})
				}
			}
		}
	}
	return qs, impossible, nil
}

// query is the router query of q with the unit key key.
func (q demoQuery) query(w *world.World, key string) router.Query {
	return router.Query{From: w.Name(q.from), Value: w.Labels(q.from)[q.value], To: w.Name(q.to), Key: key}
}

// checkValues checks that the decision's target values are the world's, in
// the same order, so estimates and exact answers line up.
func (q demoQuery) checkValues(w *world.World, d router.Decision) error {
	labels := w.Labels(q.to)
	if !slices.Equal(d.Values, labels) {
		return fmt.Errorf("index values %v of %s differ from the world's %v", d.Values, w.Name(q.to), labels)
	}
	return nil
}

// pickExplained chooses n decisions that show the job: far-apart queries the
// router chained with the largest error reduction (distinct pairs), the
// far-apart query it answered directly with the smallest gain (if any), and
// the best-supported query it answered directly.
func pickExplained(w *world.World, all []routed, rows [2]Traced, n int) []Explained {
	var out []Explained
	seen := map[[2]int]bool{}
	shown := map[string]bool{} // chains already shown
	add := func(q routed) {
		key := [2]int{min(q.from, q.to), max(q.from, q.to)}
		chain := strings.Join(q.d.Bridges, "\x00")
		if seen[key] || (chain != "" && shown[chain]) || len(out) >= n {
			return
		}
		seen[key], shown[chain] = true, chain != ""
		out = append(out, explain(w, q, rows[q.set].Set))
	}
	var held, sup []routed
	for _, q := range all {
		if q.set == 0 {
			held = append(held, q)
		} else {
			sup = append(sup, q)
		}
	}
	// By gain, then longer chains first (they show more of the reasoning).
	sort.SliceStable(held, func(i, j int) bool {
		if held[i].d.Gain != held[j].d.Gain {
			return held[i].d.Gain > held[j].d.Gain
		}
		return len(held[i].d.Bridges) > len(held[j].d.Bridges)
	})
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

func explain(w *world.World, q routed, set string) Explained {
	// Show the probability of the value the truth favours.
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
		Truth: q.truth[v], Direct: at(q.d.Direct.Estimate, v),
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
