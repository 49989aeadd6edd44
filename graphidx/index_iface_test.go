package graphidx_test

import (
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
)

// Compile-time checks that *Index serves the router and the scorer. They
// live in an external test package because router imports graphidx.
var (
	_ router.Graph            = (*graphidx.Index)(nil)
	_ router.RankedPrefetcher = (*graphidx.Index)(nil)
	_ router.EntityPrefetcher = (*graphidx.Index)(nil)
	_ router.TwoLookuper      = (*graphidx.Index)(nil)
	_ scorer.Stats            = (*graphidx.Index)(nil)
)
