package scorer_test

import (
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// tableSource is a graphidx.Source over the same random tables as a
// memStats, so that the two can be compared.
type tableSource struct {
	ents  []graphidx.EntityRecord
	pairs []graphidx.PairRecord
}

func (s *tableSource) Contexts() uint64                  { return 1 << 20 }
func (s *tableSource) Entities() []graphidx.EntityRecord { return s.ents }
func (s *tableSource) Pairs(fn func(graphidx.PairRecord) error) error {
	for _, p := range s.pairs {
		if err := fn(p); err != nil {
			return err
		}
	}
	return nil
}

// randomWorld returns the same random statistics as a memStats and as a
// graphidx.Source (ids 0..n-1, names e00..).
func randomWorld(seed uint64, n int) (*memStats, *tableSource) {
	rng := rand.New(rand.NewPCG(seed, 99))
	st := newMemStats()
	src := &tableSource{}
	labels := []string{"dry", "high", "low", "off", "on"}
	for i := 0; i < n; i++ {
		k := 1 + rng.IntN(4)
		st.entity(graphidx.EntityID(i), k)
		vals := labels[:k]
		if k == 1 {
			vals = []string{graphidx.PresentValue}
		}
		src.ents = append(src.ents, graphidx.EntityRecord{
			Name: fmt.Sprintf("e%02d", i), Values: vals, Marginal: make([]uint64, k)})
	}
	for a := 0; a < n; a++ {
		for b := a + 1; b < n; b++ {
			if rng.IntN(3) == 0 {
				continue
			}
			ka, kb := st.NumValues(graphidx.EntityID(a)), st.NumValues(graphidx.EntityID(b))
			rows := make([][]uint32, ka)
			flat := make([]uint32, 0, ka*kb)
			for r := range rows {
				rows[r] = make([]uint32, kb)
				for v := range rows[r] {
					c := uint32(1 + rng.IntN(60))
					rows[r][v] = c
					flat = append(flat, c)
					src.ents[a].Marginal[r] += uint64(c)
					src.ents[b].Marginal[v] += uint64(c)
				}
			}
			st.pair(graphidx.EntityID(a), graphidx.EntityID(b), rows)
			src.pairs = append(src.pairs, graphidx.PairRecord{A: graphidx.EntityID(a), B: graphidx.EntityID(b), Counts: flat})
		}
	}
	return st, src
}

// plainStats shows only the Stats methods of an index, hiding its optional
// marginals and ranked neighbours (which the in-memory tables lack).
type plainStats struct{ ix *graphidx.Index }

func (p plainStats) NumValues(id graphidx.EntityID) int { return p.ix.NumValues(id) }
func (p plainStats) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	return p.ix.Pair(a, b)
}

// openIndex writes src as an index file in a temporary directory and opens
// it; the index is closed when the test ends.
func openIndex(tb testing.TB, src graphidx.Source) *graphidx.Index {
	tb.Helper()
	path := filepath.Join(tb.TempDir(), "w.hwx")
	if err := graphidx.WriteFile(path, src); err != nil {
		tb.Fatal(err)
	}
	ix, err := graphidx.Open(path)
	if err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(func() { ix.Close() })
	return ix
}

// TestAgainstRealIndex writes the tables with graphidx.WriteFile, opens the
// file and checks that every model gives identical answers on the index
// (seen through its Stats methods only) and on the in-memory tables, in both
// pair orientations.
func TestAgainstRealIndex(t *testing.T) {
	t.Parallel()
	const n = 9
	mem, src := randomWorld(21, n)
	ix := openIndex(t, src)
	models := []scorer.Model{
		mustBayes(t),
		mustBayes(t, scorer.WithVariance(scorer.ExactMoments), scorer.WithAlpha(0.5)),
		mustSupport(t),
	}
	rng := rand.New(rand.NewPCG(4, 4))
	ws := scorer.NewWorkspace()
	checked := 0
	for range 300 {
		perm := rng.Perm(n)
		m := rng.IntN(4)
		p := make([]graphidx.EntityID, m+2)
		for i := range p {
			p[i] = graphidx.EntityID(perm[i])
		}
		u := rng.IntN(mem.NumValues(p[0]))
		for _, md := range models {
			a, errA := md.Chain(ws, mem, p[0], u, p[1:m+1], p[m+1])
			b, errB := md.Chain(ws, plainStats{ix}, p[0], u, p[1:m+1], p[m+1])
			if errA != nil || errB != nil {
				t.Fatalf("%s %v: mem %v, index %v", md.Name(), p, errA, errB)
			}
			if a.Err != b.Err || a.Support != b.Support || fmt.Sprint(a.Dist) != fmt.Sprint(b.Dist) {
				t.Fatalf("%s path %v u=%d: mem %+v, index %+v", md.Name(), p, u, a, b)
			}
			checked++
		}
	}
	if checked != 900 {
		t.Fatalf("checked %d", checked)
	}
}

// BenchmarkChainOnIndex measures Bayes.Chain with lookups served by a real
// memory-mapped graphidx index (K = 2, 3 bridges), the router's setting.
func BenchmarkChainOnIndex(b *testing.B) {
	const k, m = 2, 3
	mem := benchChain(k, m)
	src := &tableSource{}
	for i := 0; i < m+2; i++ {
		src.ents = append(src.ents, graphidx.EntityRecord{
			Name: fmt.Sprintf("e%02d", i), Values: []string{"off", "on"}, Marginal: make([]uint64, k)})
	}
	for a := 0; a < m+1; a++ {
		ps, _ := mem.Pair(graphidx.EntityID(a+1), graphidx.EntityID(a+2))
		flat := make([]uint32, 0, k*k)
		for r := 0; r < k; r++ {
			for v := 0; v < k; v++ {
				c := ps.Count(r, v)
				flat = append(flat, c)
				src.ents[a].Marginal[r] += uint64(c)
				src.ents[a+1].Marginal[v] += uint64(c)
			}
		}
		src.pairs = append(src.pairs, graphidx.PairRecord{A: graphidx.EntityID(a), B: graphidx.EntityID(a + 1), Counts: flat})
	}
	ix := openIndex(b, src)
	model := mustBayes(b)
	ws := scorer.NewWorkspace()
	bridges := []graphidx.EntityID{1, 2, 3}
	var est scorer.Estimate
	var err error
	b.ReportAllocs()
	for b.Loop() {
		est, err = model.Chain(ws, ix, 0, 0, bridges, 4)
	}
	if err != nil {
		b.Fatal(err)
	}
	checkEstimate(b, est, k)
}
