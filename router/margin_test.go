package router

import (
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// Marginal forwards the wrapped graph's marginals (scorer.Marginals), as a
// wrapper of an index should (see Graph), so that the test wrappers decide
// as the index itself does.
func (g nonClosing) Marginal(id graphidx.EntityID) []uint64 {
	if m, ok := g.Graph.(scorer.Marginals); ok {
		return m.Marginal(id)
	}
	return nil
}
