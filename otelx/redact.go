package otelx

import (
	"context"
	"errors"

	"github.com/hopwise/hopwise/router"
)

// errWithheld is what a failed decision's span records, with entity hashing
// on, for an error that is not one of the known sentinels: its text may name
// entities or values.
var errWithheld = errors.New("otelx: decision failed (error text withheld: entity hashing is on)")

// spanError returns the error a failed decision's span records (the
// exception event and the status message). Without entity hashing it is err
// itself. With hashing, the router's errors name the offending entity or
// value in clear ("router: unknown entity: \"x\""), so the span gets only the
// sentinel err wraps (router.ErrUnknownEntity, ErrUnknownValue,
// ErrSameEntity, ErrClosed, context.Canceled, context.DeadlineExceeded),
// or errWithheld. The query attributes of the span carry the hashed names.
func (in *Instrumentation) spanError(err error) error {
	if !in.hashed {
		return err
	}
	for _, s := range [...]error{
		router.ErrUnknownEntity, router.ErrUnknownValue, router.ErrSameEntity, router.ErrClosed,
		context.Canceled, context.DeadlineExceeded,
	} {
		if errors.Is(err, s) {
			return s
		}
	}
	return errWithheld
}
