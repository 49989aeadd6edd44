package graphidx_test

import (
	"context"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/counts"
)

func partialOf(t testing.TB, cs []graphidx.Context) *counts.Partial {
	p := counts.NewPartial()
	for _, c := range cs {
		if err := p.Add(c); err != nil {
			t.Fatal(err)
		}
	}
	return p
}

// TestCompileMatchesPartials checks the fast builder against the reference
// name-keyed Partial, merged from shards in two different groupings
// (associativity), with and without pruning.
func TestCompileMatchesPartials(t *testing.T) {
	t.Parallel()
	n := 3000
	if testing.Short() {
		n = 800
	}
	cs := graphidx.GenCorpusForTest(1, n, 300, 5, 3)
	for _, opts := range [][]graphidx.BuildOption{nil, {graphidx.WithMinSupport(3)}, {graphidx.WithMaxNeighbors(4)}, {graphidx.WithMinSupport(2), graphidx.WithMaxNeighbors(3)}} {
		c, sum, err := graphidx.Compile(context.Background(), graphidx.SliceReaderForTest(cs), append(opts, graphidx.WithWorkers(3))...)
		if err != nil {
			t.Fatal(err)
		}
		got := graphidx.DumpSrcForTest(t, c)
		c.Close()

		// ((s0+s1)+s2) and (s0+(s1+s2)) over uneven shards.
		s := []*counts.Partial{partialOf(t, cs[:n/4]), partialOf(t, cs[n/4:2*n/3]), partialOf(t, cs[2*n/3:])}
		left := counts.NewPartial()
		left.Merge(s[0])
		left.Merge(s[1])
		left.Merge(s[2])
		right := counts.NewPartial()
		right.Merge(s[1])
		right.Merge(s[2])
		s0 := counts.NewPartial()
		s0.Merge(s[0])
		s0.Merge(right)
		for _, p := range []*counts.Partial{left, s0} {
			src, st, err := p.Compile(opts...)
			if err != nil {
				t.Fatal(err)
			}
			if want := graphidx.DumpSrcForTest(t, src); got != want {
				t.Fatalf("opts %d: Compile and Partial differ", len(opts))
			}
			if st != sum.Pairs {
				t.Errorf("prune stats %+v vs %+v", st, sum.Pairs)
			}
		}
	}
}
