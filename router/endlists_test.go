package router

import (
	"math/rand/v2"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// TestRuledOutOnlyAbsentPairs: the endpoint-list test that spares the
// separation check's look-ups (scratch.ruledOut) rules out only pairs the
// index does not store, and rules out most of the absent pairs that touch
// an endpoint with a short list.
func TestRuledOutOnlyAbsentPairs(t *testing.T) {
	t.Parallel()
	ix := goldenIndex(t, 2000, 8)
	rng := rand.New(rand.NewPCG(9, 9))
	sc := newScratch()
	sc.g = ix
	absent, out, long := 0, 0, 0
	for range 400 {
		sc.s, sc.t = graphidx.EntityID(rng.IntN(2000)), graphidx.EntityID(rng.IntN(2000))
		sc.endLists()
		for i, l := range [2][]graphidx.EntityID{sc.nbrS, sc.nbrT} {
			end := [2]graphidx.EntityID{sc.s, sc.t}[i]
			if n := len(ix.Neighbors(end)); (l == nil) != (n > endListMax) {
				t.Fatalf("endpoint %d with %d neighbours: kept list %v", end, n, l != nil)
			} else if l == nil {
				long++
			}
		}
		for range 50 {
			a := [2]graphidx.EntityID{sc.s, sc.t}[rng.IntN(2)]
			b := graphidx.EntityID(rng.IntN(2000))
			if nb := ix.Neighbors(a); len(nb) > 0 && rng.IntN(3) == 0 {
				b = nb[rng.IntN(len(nb))]
			}
			if rng.IntN(2) == 0 {
				a, b = b, a
			}
			_, ok := ix.Pair(a, b)
			r := sc.ruledOut(a, b)
			if r && ok {
				t.Fatalf("s=%d t=%d: pair (%d, %d) is stored but ruled out", sc.s, sc.t, a, b)
			}
			if !ok && a != b {
				absent++
				if r {
					out++
				}
			}
		}
	}
	if absent == 0 || out < absent*9/10 {
		t.Fatalf("ruled out %d of %d absent pairs touching an endpoint (%d long endpoint lists)", out, absent, long)
	}
	t.Logf("ruled out %d of %d absent pairs; %d endpoint lists longer than %d", out, absent, long, endListMax)
}
