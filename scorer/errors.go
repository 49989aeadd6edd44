package scorer

import "errors"

// Sentinel errors. Functions wrap them with details (entity ids, values,
// option names); test with errors.Is.
var (
	// ErrBadOption reports an option value outside its domain (α ≤ 0, NaN,
	// negative β, ...) or an option that does not apply to the model being
	// constructed.
	ErrBadOption = errors.New("scorer: bad option")

	// ErrValueRange reports an observed value index u outside [0, K) for the
	// observed entity.
	ErrValueRange = errors.New("scorer: value out of range")

	// ErrUnknownEntity reports an entity for which Stats.NumValues returns
	// K < 1, i.e. an id the statistics do not know.
	ErrUnknownEntity = errors.New("scorer: unknown entity")

	// ErrBadStats reports statistics that contradict themselves: a nil Stats,
	// K above graphidx.MaxValues, or a PairStats whose entities or dimensions
	// do not match the request.
	ErrBadStats = errors.New("scorer: inconsistent statistics")

	// ErrBadPath reports a query or chain that visits an entity twice
	// (s = t, a bridge equal to an endpoint, or a repeated bridge).
	ErrBadPath = errors.New("scorer: entity repeated on path")

	// ErrNoEstimates reports a Combine call with no estimates.
	ErrNoEstimates = errors.New("scorer: no estimates to combine")

	// ErrBadEstimate reports an estimate Combine cannot use: a NaN or
	// negative Err, or a Dist whose length differs from the others; and a
	// reference estimate with a value outside [0, 1] (ProjectReference).
	ErrBadEstimate = errors.New("scorer: bad estimate")
)
