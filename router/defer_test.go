package router

import (
	"context"
	"fmt"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// TestDeferredSeparationExact: deciding with the separation bias deferred
// to the chains that could win (chainScore) gives the decisions of
// computing it for every chain — same modes and bridges, errors and scores
// equal to 10 significant digits (only the order of the final additions
// differs) — on the 2000 queries of TestDecideGoldenDigest. Not parallel:
// it flips the package's deferSeparation.
func TestDeferredSeparationExact(t *testing.T) {
	if testing.Short() {
		t.Skip("builds a 20k-entity index")
	}
	ix, qs := goldenQueries(t)
	run := func(def bool) []string {
		deferSeparation = def
		r := mustNew(t, wrapIndex(ix), WithCacheSize(0))
		var out []string
		for _, q := range qs {
			d, err := r.Decide(context.Background(), q)
			if err != nil {
				out = append(out, err.Error())
				continue
			}
			s := fmt.Sprintf("%v %q %.10g %.10g", d.Mode, d.Bridges, d.Err, d.Score)
			if d.Chain != nil {
				s += fmt.Sprintf(" %q %.10g", d.Chain.Bridges, d.Chain.Err)
			}
			out = append(out, s)
		}
		return out
	}
	defer func() { deferSeparation = true }()
	a, b := run(false), run(true)
	chains := 0
	for i := range a {
		if a[i] != b[i] {
			t.Errorf("query %d: computed always %s, deferred %s", i, a[i], b[i])
		}
		if strings.HasPrefix(a[i], "chain") {
			chains++
		}
	}
	if chains == 0 {
		t.Fatal("no query chained; the test shows nothing")
	}
}

// goldenQueries builds the seeded 20k-entity power-law index of
// TestDecideGoldenDigest and its 2000 queries (every fourth from the
// largest hub, values drawn at random).
func goldenQueries(t *testing.T) (*graphidx.Index, []Query) {
	t.Helper()
	const n = 20_000
	ix := goldenIndex(t, n, 32)
	src := newPowerLaw(n, 32, 2.1, 1)
	qs := benchQueries(src, 2000, 11)
	rng := rand.New(rand.NewPCG(11, 12))
	for i := range qs {
		qs[i].Value = []string{"off", "on"}[rng.IntN(2)]
		if i%4 == 0 { // hub queries: entity 0 has the largest weight
			qs[i].From = src.Entities()[0].Name
			if qs[i].To == qs[i].From {
				qs[i].To = src.Entities()[1].Name
			}
		}
	}
	return ix, qs
}
