package router

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
