package scorer

import "github.com/hopwise/hopwise/graphidx"

// Labels is the part of an index that tells its value labels.
// *graphidx.Index satisfies it.
type Labels interface {
	NumEntities() int
	Values(id graphidx.EntityID) []string
}

// PresenceOnly reports whether an index records presence only: it has at
// least one entity and every entity's labels are exactly
// [graphidx.PresentValue]. Such an index has nothing for the Bayes model to
// estimate (each target's single value has probability 1 and posterior
// variance 0), so callers choose the Support model for it (Select).
//
// When l also has a method PresenceOnly() bool, that answer is used.
// Otherwise the scan stops at the first valued entity, so it is O(1) for a
// typical valued index and O(n) for a presence-only one (one label-slice
// read per entity, about a nanosecond each).
func PresenceOnly(l Labels) bool {
	if p, ok := l.(interface{ PresenceOnly() bool }); ok {
		return p.PresenceOnly()
	}
	n := l.NumEntities()
	if n <= 0 {
		return false
	}
	for id := 0; id < n; id++ {
		v := l.Values(graphidx.EntityID(id))
		if len(v) != 1 || v[0] != graphidx.PresentValue {
			return false
		}
	}
	return true
}

// Select returns the model for an index when none was configured: Support
// (with opts) for a presence-only index, else Bayes (with opts). Options
// that one model rejects are errors (ErrBadOption), as from NewBayes and
// NewSupport.
func Select(l Labels, opts ...Option) (Model, error) {
	if PresenceOnly(l) {
		return NewSupport(opts...)
	}
	return NewBayes(opts...)
}
