package traceset

import (
	"errors"
	"fmt"
	"strings"

	"github.com/hopwise/hopwise/otelx"
)

// Sentinel errors.
var (
	// ErrNoTraces: no trace file was given.
	ErrNoTraces = errors.New("traceset: at least one trace file is required")
	// ErrNothingJoined: the files hold no decision span, or no decision
	// could be joined with an outcome.
	ErrNothingJoined = errors.New("traceset: nothing to analyse")
)

// Set is a set of trace files read and joined with outcomes.
type Set struct {
	Files []string        `json:"files"`
	Stats otelx.ReadStats `json:"read"`
	Join  otelx.JoinStats `json:"join"`
	// OutcomeSource says where the outcomes came from: "trace outcome
	// spans" or the outcomes file's path.
	OutcomeSource string `json:"outcome_source"`
	// Ignored counts outcome spans of the traces left unused because an
	// outcomes file was given.
	Ignored int            `json:"ignored_trace_outcomes,omitempty"`
	Joined  []otelx.Joined `json:"-"`
	Log     *otelx.Log     `json:"-"`
}

// Load reads the trace files and joins their decisions with outcomes: the
// outcome spans of the traces, or the plain outcomes file when outcomes
// is not empty. It fails with ErrNothingJoined when there is no decision
// or nothing joins, saying how many of each were read.
func Load(traces []string, outcomes string) (*Set, error) {
	if len(traces) == 0 {
		return nil, ErrNoTraces
	}
	lg, err := otelx.ReadTraceFiles(traces...)
	if err != nil {
		return nil, err
	}
	s := &Set{Files: traces, Stats: lg.Stats, Log: lg, OutcomeSource: "trace outcome spans"}
	outs := lg.Outcomes
	if outcomes != "" {
		if outs, err = otelx.ReadOutcomeFile(outcomes); err != nil {
			return nil, err
		}
		s.OutcomeSource = outcomes
		s.Ignored = len(lg.Outcomes)
	}
	if len(lg.Decisions) == 0 {
		return nil, fmt.Errorf("%w: no decision spans (%s) in %s", ErrNothingJoined, otelx.SpanDecide, strings.Join(traces, ", "))
	}
	s.Joined, s.Join = otelx.Join(lg.Decisions, outs)
	if len(s.Joined) == 0 {
		return nil, fmt.Errorf("%w: no decision could be joined with an outcome (%d decisions, %d outcomes from %s; %d decisions without key)",
			ErrNothingJoined, len(lg.Decisions), len(outs), s.OutcomeSource, s.Join.DecisionsWithoutKey)
	}
	return s, nil
}

// Cost is an outcome's cost: its tokens, or tokens × costPerToken when
// costPerToken > 0. Token counts are bounded by otelx.MaxTokens, so the
// sum is exact and finite.
func Cost(o *otelx.OutcomeRecord, costPerToken float64) float64 {
	t := float64(o.Tokens())
	if costPerToken > 0 {
		return t * costPerToken
	}
	return t
}

// CostUnit names the unit of Cost: "tokens", or "price" with a price.
func CostUnit(costPerToken float64) string {
	if costPerToken > 0 {
		return "price"
	}
	return "tokens"
}
