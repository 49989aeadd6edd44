package router

import "strings"

// Query asks whether the answer to "what is To, given From = Value" should be
// direct or chained.
type Query struct {
	From  string // observed entity
	Value string // observed value of From
	To    string // target entity
	// Key is the caller's unit key: it drives A/B assignment and exploration
	// and joins outcomes to decisions. Empty means From‖Value‖To.
	Key string
}

// DirectResult is the direct estimate P(To | From = Value) with its
// expected error and the pair's support.
type DirectResult struct {
	Estimate []float64 // over Decision.Values
	Err      float64   // expected squared error Σ_v Var(θ_v) (model dependent)
	Support  uint64    // contexts observing both endpoints
}

// ChainResult is the best chain found, scored exactly.
type ChainResult struct {
	Bridges    []string  // bridge entity names in order From → … → To
	Estimate   []float64 // chained estimate over Decision.Values
	Err        float64   // expected error: Σ Var + β·m + squared distance from the reference (search.go)
	MinSupport uint64    // smallest pair support along the chain
	// Parallel reports that the two bridges are read side by side, each
	// given the observed value, and combined by the best linear predictor
	// of the target on both (docs/QUALITY.md §4e), instead of one after the
	// other. Bridges then holds the two in the order of their proxy cost.
	Parallel bool
	// Midpoint, set only with Parallel, reports that Estimate is the
	// midpoint of the parallel estimate and the one-bridge chain through
	// one of the two bridges: no table told which of the two structures the
	// pair tables fit, and Err is the midpoint's expected error over both
	// (docs/QUALITY.md §4e).
	Midpoint bool
}

// Decision is the router's answer to one Query.
//
// Slices in a Decision (Bridges, Values, Estimate, Direct.Estimate and
// everything under Chain) may be shared with the decision cache and with
// other callers: treat them as read-only. They never point into index
// memory, so they stay valid after the index is swapped out and closed.
type Decision struct {
	Mode     Mode
	Bridges  []string  // Chain.Bridges when Mode is chain, else nil
	Values   []string  // the target's value labels
	Estimate []float64 // the chosen estimate over Values
	Err      float64   // expected error of the chosen estimate
	Direct   DirectResult
	Chain    *ChainResult // best chain, nil when none was found
	// Gain is Direct.Err − Chain.Err (0 without a chain).
	Gain float64
	// Score is the quantity compared with τ: Gain, or λ·Gain − c_hop·m with
	// WithUtility (0 without a chain).
	Score  float64
	Reason Reason
	// Truncated reports that a bound (beam, candidates, expansion budget or
	// the context deadline) cut the search, so a better chain may exist.
	// When false, Chain is the exact optimum over every simple chain of at
	// most H bridges (docs/SEARCH.md).
	Truncated bool
	// Cut says which bounds cut the search (0 when not Truncated).
	Cut        Cut
	Generation uint64 // index generation the decision was computed on
	// Arm is the A/B arm of the unit ("" without arms).
	Arm string
	// Propensity is the probability with which this decision's mode was
	// chosen for this unit under the configured policy (1 without
	// exploration).
	Propensity float64
	// Explored reports that exploration overrode the preferred mode.
	Explored bool
	// Cached reports that the search result came from the decision cache.
	Cached bool
	// Key is the unit key used (Query.Key, or "" when derived).
	Key string
}

// Cut is a set of search bounds that cut a search.
type Cut uint8

const (
	// CutBeam: a search layer (the first layer's width B, the second
	// layer's fan-out f, or the B paths per side of the three-bridge join)
	// left out neighbours, and the chains through them were not met from
	// the other side. A layer that holds every neighbour is no cut, whatever
	// the index's rank prefix.
	CutBeam Cut = 1 << iota
	// CutCandidates: a chain of m bridges was left out of the k
	// proxy-cheapest candidates scored exactly, and its bound (score ≤
	// E_direct − β·m, or the utility of that) could beat the chosen chain.
	// Chains left out that could not have won are no cut.
	CutCandidates
	// CutBudget: the expansion budget (or the one-bridge phase's share of
	// it) ran out before a phase finished.
	CutBudget
	// CutDeadline: the context's deadline or cancellation stopped the search.
	CutDeadline
)

var cutNames = [...]string{"beam", "candidates", "budget", "deadline"}

// Names lists the bounds in the set ("beam", "candidates", "budget",
// "deadline"), in that order. It allocates.
func (c Cut) Names() []string {
	var out []string
	for i, n := range cutNames {
		if c&(1<<i) != 0 {
			out = append(out, n)
		}
	}
	return out
}

// String joins Names with "+" ("" for none).
func (c Cut) String() string { return strings.Join(c.Names(), "+") }

// core is the arm-independent, cacheable result of a search.
type core struct {
	values     []string
	direct     DirectResult
	chain      *ChainResult
	gain       float64
	score      float64
	truncated  bool
	cut        Cut
	generation uint64
}

// finish applies the configured policy (arm, threshold, exploration) to a
// search result. It does not allocate.
func (s *settings) finish(c *core, q *Query, cached bool) Decision {
	d := Decision{
		Values:     c.values,
		Direct:     c.direct,
		Chain:      c.chain,
		Gain:       c.gain,
		Score:      c.score,
		Truncated:  c.truncated,
		Cut:        c.cut,
		Generation: c.generation,
		Propensity: 1,
		Cached:     cached,
		Key:        q.Key,
	}
	policy := policyRouted
	if i := s.assignArm(q); i >= 0 {
		d.Arm = s.arms[i].name
		policy = s.arms[i].policy
	}
	var code string
	mode := ModeDirect
	switch {
	case c.chain == nil:
		code = ReasonNoChain
		if policy == policyDirectOnly {
			code = ReasonArmDirectOnly
		}
	case policy == policyDirectOnly:
		code = ReasonArmDirectOnly
	case policy == policyChainAlways:
		mode, code = ModeChain, ReasonArmChainAlways
	default:
		if c.score >= s.tau {
			mode, code = ModeChain, ReasonGainAbove
		} else {
			code = ReasonGainBelow
		}
		if s.epsilon > 0 {
			if s.explores(q) {
				mode ^= 1
				code = ReasonExplore
				d.Explored = true
				d.Propensity = s.epsilon
			} else {
				d.Propensity = 1 - s.epsilon
			}
		}
	}
	d.Mode = mode
	d.Reason = reason(code)
	if mode == ModeChain {
		d.Bridges = c.chain.Bridges
		d.Estimate = c.chain.Estimate
		d.Err = c.chain.Err
	} else {
		d.Estimate = c.direct.Estimate
		d.Err = c.direct.Err
	}
	return d
}
