package plan

import (
	"context"
	"errors"
	"fmt"
	"math"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// ErrMismatch is returned by FromDists when the bridge distributions do not
// belong to the decision (count, entity or label/probability lengths
// differ).
var ErrMismatch = errors.New("plan: bridge distributions do not match the decision")

// Namer gives an entity's display name. *graphidx.Lexicon satisfies it (a
// nil *Lexicon names nothing). An empty name means "none": the plan then
// shows the entity id.
type Namer interface {
	DisplayName(entity string) string
}

// Source computes what Build needs beyond the decision: the chain's
// distribution at each bridge and the meaning of the router's error
// figures. *router.Router satisfies it.
type Source interface {
	ChainDists(ctx context.Context, q router.Query, d router.Decision) ([]router.BridgeDist, error)
	ErrorMeasure() router.ErrorMeasure
}

// Step is one bridge of a chain, in order from the observed entity to the
// target (and, as Plan.Answer, the target itself).
type Step struct {
	Entity string `json:"entity"` // entity id in the index
	Name   string `json:"name"`   // display name (the id when the namer has none)
	// Value is the value the chain expects at this entity (the most
	// probable one, ties to the first label) and Prob its probability.
	// Both are unset, and HasValue is false, for an entity with a single
	// value label (presence-only) or without an estimate.
	Value    string  `json:"value,omitempty"`
	Prob     float64 `json:"prob,omitempty"`
	HasValue bool    `json:"has_value"`
}

// Plan is how to answer one question, from one decision.
type Plan struct {
	Mode     router.Mode `json:"mode"`
	From     string      `json:"from"`
	FromName string      `json:"from_name"`
	// Value is the observed value of From; HasValue is false when From
	// has a single value label (presence-only: being mentioned is all).
	Value    string `json:"value,omitempty"`
	HasValue bool   `json:"has_value"`
	To       string `json:"to"`
	ToName   string `json:"to_name"`
	// Steps has one entry per bridge, in order, when Mode is chain; it is
	// empty for a direct plan.
	Steps []Step `json:"steps"`
	// Parallel: the chain's two bridges are each worked out from the
	// observed value alone and the answer from both together
	// (router.ChainResult.Parallel), instead of one after the other.
	Parallel bool `json:"parallel,omitempty"`
	// Answer summarises the chosen estimate: the target with its most
	// probable value (HasValue false for a presence-only target or a
	// fallback decision without an estimate).
	Answer Step `json:"answer"`
	// ErrorFigure is the chosen estimate's expected error, named by its
	// measure (sq_error_sum or error_proxy; see router.ErrorMeasure).
	router.ErrorFigure
	// Support is the evidence behind the chosen answer: for a direct plan
	// the contexts observing both endpoints, for a chain the support of
	// its weakest edge.
	Support uint64 `json:"support"`
	// Reason is the decision's reason code (router.Reason*).
	Reason string `json:"reason"`
	// Truncated: a search bound cut the search, so a better chain may
	// exist.
	Truncated bool `json:"truncated,omitempty"`
}

// Build computes the bridge distributions of d with src and returns its
// plan (see FromDists). q must be the query d answered. namer may be nil.
// Cost: one src.ChainDists call (O(m²·K³) for *router.Router) plus O(m·K).
func Build(ctx context.Context, src Source, q router.Query, d router.Decision, namer Namer) (Plan, error) {
	var dists []router.BridgeDist
	if d.Mode == router.ModeChain {
		var err error
		if dists, err = src.ChainDists(ctx, q, d); err != nil {
			return Plan{}, err
		}
	}
	return FromDists(q, d, dists, src.ErrorMeasure(), namer)
}

// FromDists returns the plan of decision d for query q, given the chain's
// distribution at each of d.Bridges (ignored for a direct decision) and
// the measure of the router's error figures. namer may be nil. Errors wrap
// ErrMismatch. O(m·K).
func FromDists(q router.Query, d router.Decision, dists []router.BridgeDist, m router.ErrorMeasure, namer Namer) (Plan, error) {
	p := Plan{
		Mode:        d.Mode,
		From:        q.From,
		FromName:    nameOf(namer, q.From),
		To:          q.To,
		ToName:      nameOf(namer, q.To),
		ErrorFigure: router.NewErrorFigure(m, d.Err),
		Support:     d.Direct.Support,
		Reason:      d.Reason.Code,
		Truncated:   d.Truncated,
	}
	// The decision carries the target's labels only, so From's value is
	// judged by the router's measure: under the presence-only support
	// model the value PresentValue just says From was mentioned.
	if q.Value != "" && (q.Value != presentValue || m != router.MeasureSupportProxy) {
		p.Value, p.HasValue = q.Value, true
	}
	p.Answer = pick(q.To, p.ToName, d.Values, d.Estimate)
	if d.Mode != router.ModeChain {
		return p, nil
	}
	if d.Chain != nil {
		p.Support = d.Chain.MinSupport
		p.Parallel = d.Chain.Parallel
	}
	if len(dists) != len(d.Bridges) {
		return Plan{}, fmt.Errorf("%w: %d distributions for %d bridges", ErrMismatch, len(dists), len(d.Bridges))
	}
	p.Steps = make([]Step, len(dists))
	for i, bd := range dists {
		if bd.Entity != d.Bridges[i] {
			return Plan{}, fmt.Errorf("%w: distribution %d is for %q, bridge %d is %q", ErrMismatch, i, bd.Entity, i, d.Bridges[i])
		}
		if len(bd.Values) != len(bd.Dist) {
			return Plan{}, fmt.Errorf("%w: bridge %q has %d labels and %d probabilities", ErrMismatch, bd.Entity, len(bd.Values), len(bd.Dist))
		}
		p.Steps[i] = pick(bd.Entity, nameOf(namer, bd.Entity), bd.Values, bd.Dist)
	}
	return p, nil
}

const presentValue = graphidx.PresentValue

// pick returns the step of entity with its most probable value. An entity
// with fewer than two labels, or whose probabilities are missing or not
// finite, gets no value.
func pick(entity, name string, labels []string, dist []float64) Step {
	s := Step{Entity: entity, Name: name}
	if len(labels) < 2 || len(dist) != len(labels) {
		return s
	}
	best := -1
	for i, x := range dist {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return s
		}
		if best < 0 || x > dist[best] {
			best = i
		}
	}
	s.Value, s.Prob, s.HasValue = labels[best], dist[best], true
	return s
}

func nameOf(n Namer, entity string) string {
	if l, ok := n.(*graphidx.Lexicon); ok && l == nil {
		return entity // a nil *Lexicon in the interface: no names
	}
	if n != nil {
		if s := n.DisplayName(entity); s != "" {
			return s
		}
	}
	return entity
}
