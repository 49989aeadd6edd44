package otelx

import (
	"context"
	"errors"
	"strings"
	"sync"
	"sync/atomic"

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

// maxCachedHashes bounds hashCache: entity names and values come from the
// index's vocabulary, so a few thousand cover a gateway's working set; past
// the bound, names are hashed on every use.
const maxCachedHashes = 1 << 14

// hashCache memoises HashEntity: an HMAC-SHA256 costs about 0.6 µs
// (an inner and an outer SHA-256 compression and a hex encoding; measured in
// BenchmarkHashEntity), a map lookup a few tens of nanoseconds. It holds
// at most maxCachedHashes names, and is safe for concurrent use.
type hashCache struct {
	m sync.Map // name → pseudonym
	n atomic.Int64
}

func (c *hashCache) get(name string) (string, bool) {
	v, ok := c.m.Load(name)
	if !ok {
		return "", false
	}
	return v.(string), true
}

func (c *hashCache) put(name, pseudonym string) {
	if c.n.Load() >= maxCachedHashes {
		return
	}
	// A clone, so that the cache does not pin the caller's larger buffer.
	if _, loaded := c.m.LoadOrStore(strings.Clone(name), pseudonym); !loaded {
		c.n.Add(1)
	}
}
