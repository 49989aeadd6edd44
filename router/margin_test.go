package router

import (
	"testing"

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

// BenchmarkDecideSeparation measures the cost of the Bayes model's
// separation check (up to SeparationWitnesses + 1 witnesses per bridge,
// each up to three more pair look-ups, through the decision's pair memo):
// uncached decisions with the default model ("on") against the same model
// with the check off ("off", the baseline), in one run.
func BenchmarkDecideSeparation(b *testing.B) {
	for _, c := range []struct {
		name   string
		lambda float64
	}{{"off", 0}, {"on", scorer.DefaultSeparation}} {
		b.Run(c.name, func(b *testing.B) {
			m, err := scorer.NewBayes(scorer.WithSeparation(c.lambda))
			if err != nil {
				b.Fatal(err)
			}
			benchUncached(b, WithModel(m))
		})
	}
}
