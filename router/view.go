package router

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
)

// ErrorMeasure says what an error figure of a decision means. It depends on
// the error model the router scores with.
type ErrorMeasure string

const (
	// MeasureSqErrorSum: the expected squared error of an estimate summed
	// over the target's values, Σ_v E[(p̂_v − p_v)²] (the Bayes model: the
	// posterior variance, plus β·m and the reference bias for a chain). It
	// is at most 1 for a distribution; divide by K for a per-value mean.
	MeasureSqErrorSum ErrorMeasure = "sq-error-sum"
	// MeasureSupportProxy: the presence-only model's proxy
	// Σ_links v0/(support + n0) + β·m. It ranks answers by how much
	// evidence backs each link; it is not an error of any distribution
	// (a presence-only target has no values to be wrong about).
	MeasureSupportProxy ErrorMeasure = "support-proxy"
)

// MeasureOf returns the measure of a model's error figures from its name:
// MeasureSupportProxy for "support", else MeasureSqErrorSum (the contract
// of scorer.Estimate.Err).
func MeasureOf(modelName string) ErrorMeasure {
	if modelName == "support" {
		return MeasureSupportProxy
	}
	return MeasureSqErrorSum
}

// ErrorMeasure is the measure of the error figures of this router's
// decisions (see MeasureOf).
func (r *Router) ErrorMeasure() ErrorMeasure { return MeasureOf(r.ModelName()) }

// ErrorFigure is one error figure in the JSON view of a decision, under a
// name that says what it is: exactly one of the two fields is set.
//
//	"sq_error_sum": expected squared error summed over the target's values
//	"error_proxy":  the presence-only support proxy (not summed over values)
type ErrorFigure struct {
	SqErrorSum *float64 `json:"sq_error_sum,omitempty"`
	ErrorProxy *float64 `json:"error_proxy,omitempty"`
}

// NewErrorFigure returns the figure v under the name of measure m.
func NewErrorFigure(m ErrorMeasure, v float64) ErrorFigure {
	if m == MeasureSupportProxy {
		return ErrorFigure{ErrorProxy: &v}
	}
	return ErrorFigure{SqErrorSum: &v}
}

// Figure returns the number (0 when unset).
func (f ErrorFigure) Figure() float64 {
	switch {
	case f.SqErrorSum != nil:
		return *f.SqErrorSum
	case f.ErrorProxy != nil:
		return *f.ErrorProxy
	}
	return 0
}

// Measure returns the figure's measure ("" when unset).
func (f ErrorFigure) Measure() ErrorMeasure {
	switch {
	case f.SqErrorSum != nil:
		return MeasureSqErrorSum
	case f.ErrorProxy != nil:
		return MeasureSupportProxy
	}
	return ""
}

// Dist is a distribution over labelled values. Its JSON form is an object
// {"label": p, ...} in the labels' order (the index's value order), which
// encoding/json's maps would not keep.
type Dist struct {
	Labels []string
	P      []float64
}

// MarshalJSON writes the object in label order; a label without a
// probability (P shorter than Labels) is left out. Non-finite
// probabilities are an error, as in encoding/json.
func (d Dist) MarshalJSON() ([]byte, error) {
	b := []byte{'{'}
	for i, l := range d.Labels {
		if i >= len(d.P) {
			break
		}
		if math.IsNaN(d.P[i]) || math.IsInf(d.P[i], 0) {
			return nil, fmt.Errorf("router: Dist: %q has probability %v", l, d.P[i])
		}
		if i > 0 {
			b = append(b, ',')
		}
		k, err := json.Marshal(l)
		if err != nil {
			return nil, err
		}
		b = append(b, k...)
		b = append(b, ':')
		b = strconv.AppendFloat(b, d.P[i], 'g', -1, 64)
	}
	return append(b, '}'), nil
}

// UnmarshalJSON reads the object back, keeping its key order.
func (d *Dist) UnmarshalJSON(data []byte) error {
	dec := json.NewDecoder(bytes.NewReader(data))
	tok, err := dec.Token()
	if err != nil {
		return err
	}
	if tok != json.Delim('{') {
		return fmt.Errorf("router: Dist: want a JSON object, got %v", tok)
	}
	d.Labels, d.P = d.Labels[:0], d.P[:0]
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return err
		}
		var p float64
		if err := dec.Decode(&p); err != nil {
			return fmt.Errorf("router: Dist: value of %q: %w", tok, err)
		}
		d.Labels, d.P = append(d.Labels, tok.(string)), append(d.P, p)
	}
	_, err = dec.Token()
	return err
}

// View is the public JSON form of one decision: what `hopwise route
// --json` prints and what a gateway should return, so that both speak one
// vocabulary. Build it with NewView. Field by field:
//
//	from, value, to, key   the query (key omitted when empty)
//	mode                   "direct" or "chain"
//	reason, explanation    the stable reason code and its text
//	bridges                the chosen path's bridges ([] when direct)
//	parallel               true when the chosen answer reads its two bridges
//	                       side by side (ChainResult.Parallel); omitted otherwise
//	estimate               the chosen distribution over the target's values,
//	                       omitted when there is none: a presence-only target
//	                       (one label) or a fallback decision
//	sq_error_sum | error_proxy
//	                       the chosen answer's expected error, named by its
//	                       measure (ErrorFigure; both omitted for a fallback
//	                       decision, which estimated nothing); error_measure
//	                       says which measure the router uses
//	gain                   direct error − chain error (0 without a chain),
//	                       in the same measure; score is what τ is compared with
//	truncated, cut         a bound cut the search (cut lists which)
//	direct                 {estimate, sq_error_sum|error_proxy, support}:
//	                       support = contexts that observed both endpoints
//	chain                  {bridges, parallel, estimate, sq_error_sum|error_proxy,
//	                       weakest_edge_support} or null when none was found
//	                       (parallel omitted unless true)
//	generation             the index generation, 16 hex digits
//	arm, propensity, explored, cached
//	                       the A/B and exploration policy (omitted when
//	                       unused) and whether the decision came from the cache
type View struct {
	From        string       `json:"from"`
	Value       string       `json:"value"`
	To          string       `json:"to"`
	Key         string       `json:"key,omitempty"`
	Mode        Mode         `json:"mode"`
	Reason      string       `json:"reason"`
	Explanation string       `json:"explanation"`
	Bridges     []string     `json:"bridges"`
	Parallel    bool         `json:"parallel,omitempty"`
	Estimate    *Dist        `json:"estimate,omitempty"`
	Measure     ErrorMeasure `json:"error_measure"`
	ErrorFigure
	Gain      float64    `json:"gain"`
	Score     float64    `json:"score"`
	Truncated bool       `json:"truncated"`
	Cut       []string   `json:"cut,omitempty"`
	Direct    DirectView `json:"direct"`
	Chain     *ChainView `json:"chain"`
	// Generation is the index generation in 16 hex digits.
	Generation string   `json:"generation"`
	Arm        string   `json:"arm,omitempty"`
	Propensity *float64 `json:"propensity,omitempty"`
	Explored   bool     `json:"explored,omitempty"`
	Cached     bool     `json:"cached,omitempty"`
}

// DirectView is the direct answer in a View.
type DirectView struct {
	Estimate *Dist `json:"estimate,omitempty"`
	ErrorFigure
	Support uint64 `json:"support"`
}

// ChainView is the best chain in a View.
type ChainView struct {
	Bridges  []string `json:"bridges"`
	Parallel bool     `json:"parallel,omitempty"`
	Midpoint bool     `json:"midpoint,omitempty"`
	Estimate *Dist    `json:"estimate,omitempty"`
	ErrorFigure
	WeakestEdgeSupport uint64 `json:"weakest_edge_support"`
}

// NewView returns the JSON view of decision d for query q, its error
// figures named by m (Router.ErrorMeasure). O(size of d).
func NewView(q Query, d Decision, m ErrorMeasure) View {
	est := func(p []float64) *Dist {
		if len(d.Values) < 2 || len(p) != len(d.Values) {
			return nil
		}
		return &Dist{Labels: d.Values, P: p}
	}
	bridges := d.Bridges
	if bridges == nil {
		bridges = []string{}
	}
	v := View{
		From: q.From, Value: q.Value, To: q.To, Key: q.Key,
		Mode:        d.Mode,
		Reason:      d.Reason.Code,
		Explanation: d.Reason.Text,
		Bridges:     bridges,
		Estimate:    est(d.Estimate),
		Measure:     m,
		ErrorFigure: NewErrorFigure(m, d.Err),
		Gain:        d.Gain,
		Score:       d.Score,
		Truncated:   d.Truncated,
		Cut:         d.Cut.Names(),
		Direct:      DirectView{Estimate: est(d.Direct.Estimate), ErrorFigure: NewErrorFigure(m, d.Direct.Err), Support: d.Direct.Support},
		Generation:  fmt.Sprintf("%016x", d.Generation),
		Arm:         d.Arm,
		Explored:    d.Explored,
		Cached:      d.Cached,
	}
	v.Parallel = d.Mode == ModeChain && d.Chain != nil && d.Chain.Parallel
	if d.Direct.Estimate == nil {
		// A fallback decision: nothing was estimated, so no error figure.
		v.ErrorFigure, v.Direct.ErrorFigure = ErrorFigure{}, ErrorFigure{}
	}
	if d.Arm != "" || d.Propensity != 1 {
		p := d.Propensity
		v.Propensity = &p
	}
	if d.Chain != nil {
		v.Chain = &ChainView{
			Bridges:            d.Chain.Bridges,
			Parallel:           d.Chain.Parallel,
			Midpoint:           d.Chain.Midpoint,
			Estimate:           est(d.Chain.Estimate),
			ErrorFigure:        NewErrorFigure(m, d.Chain.Err),
			WeakestEdgeSupport: d.Chain.MinSupport,
		}
	}
	return v
}
