package graphidx

import (
	"cmp"
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"testing"
)

// ixSource is an in-memory Source for tests.
type ixSource struct {
	contexts uint64
	ents     []EntityRecord
	pairs    []PairRecord
	// failAt makes Pairs fail when it reaches pair failAt on call failCall
	// (1-based; 0 disables).
	failCall, failAt int
	calls            int
}

var errIxInjected = errors.New("injected source failure")

func (m *ixSource) Contexts() uint64         { return m.contexts }
func (m *ixSource) Entities() []EntityRecord { return m.ents }
func (m *ixSource) Pairs(fn func(PairRecord) error) error {
	m.calls++
	for i, p := range m.pairs {
		if m.failCall == m.calls && i == m.failAt {
			return errIxInjected
		}
		if err := fn(p); err != nil {
			return err
		}
	}
	return nil
}

// ixContext is one hand-written context: entity -> value.
type ixContext map[string]string

// ixSourceFromContexts counts contexts naively (the reference the index is
// checked against): marginals per value and a K×K table per co-observed pair.
func ixSourceFromContexts(ctxs []ixContext) *ixSource {
	vals := map[string]map[string]bool{}
	for _, c := range ctxs {
		for e, v := range c {
			if vals[e] == nil {
				vals[e] = map[string]bool{}
			}
			vals[e][v] = true
		}
	}
	var names []string
	for e := range vals {
		names = append(names, e)
	}
	slices.Sort(names)
	id := map[string]int{}
	ents := make([]EntityRecord, len(names))
	for i, e := range names {
		id[e] = i
		var vs []string
		for v := range vals[e] {
			vs = append(vs, v)
		}
		slices.Sort(vs)
		ents[i] = EntityRecord{Name: e, Values: vs, Marginal: make([]uint64, len(vs))}
	}
	vi := func(e int, v string) int { i, _ := slices.BinarySearch(ents[e].Values, v); return i }
	type key struct{ a, b int }
	tabs := map[key][]uint32{}
	for _, c := range ctxs {
		for e, v := range c {
			ents[id[e]].Marginal[vi(id[e], v)]++
		}
		for ea, va := range c {
			for eb, vb := range c {
				a, b := id[ea], id[eb]
				if a >= b {
					continue
				}
				k := key{a, b}
				if tabs[k] == nil {
					tabs[k] = make([]uint32, len(ents[a].Values)*len(ents[b].Values))
				}
				tabs[k][vi(a, va)*len(ents[b].Values)+vi(b, vb)]++
			}
		}
	}
	var pairs []PairRecord
	for k, t := range tabs {
		pairs = append(pairs, PairRecord{A: EntityID(k.a), B: EntityID(k.b), Counts: t})
	}
	slices.SortFunc(pairs, func(x, y PairRecord) int {
		return cmp.Or(cmp.Compare(x.A, y.A), cmp.Compare(x.B, y.B))
	})
	return &ixSource{contexts: uint64(len(ctxs)), ents: ents, pairs: pairs}
}

// ixGreenhouse is the small hand-checked corpus used across tests
// (our own invented greenhouse scenario).
func ixGreenhouse() []ixContext {
	return []ixContext{
		{"bed.north": "wet", "pump.a": "on", "vent.east": "open"},     // c1
		{"bed.north": "wet", "pump.a": "on"},                          // c2
		{"bed.north": "dry", "pump.a": "off", "zone.temp": "hot"},     // c3
		{"vent.east": "closed", "zone.temp": "mild"},                  // c4
		{"bed.north": "dry", "vent.east": "open", "zone.temp": "hot"}, // c5
		{"pump.a": "on", "zone.temp": "cold"},                         // c6
		{"pump.a": "on", "sensor.co2": "low"},                         // c7
		{"sensor.co2": "high"},                                        // c8
	}
}

// ixRandomSource is a random graph: n entities, about n*deg/2 pairs, every
// entity with k values (k<=0: random K in 1..4), counts in 1..maxCount.
func ixRandomSource(n, deg, k int, seed uint64) *ixSource {
	rng := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	ents := make([]EntityRecord, n)
	for i := range ents {
		kk := k
		if kk <= 0 {
			kk = 1 + rng.IntN(4)
		}
		vs := make([]string, kk)
		for v := range vs {
			vs[v] = string(rune('a' + v))
		}
		ents[i] = EntityRecord{Name: ixName(i), Values: vs, Marginal: make([]uint64, kk)}
	}
	want := n * deg / 2
	keys := make([]uint64, 0, want)
	for len(keys) < want && n > 1 {
		a, b := rng.IntN(n), rng.IntN(n)
		if a == b {
			continue
		}
		if a > b {
			a, b = b, a
		}
		keys = append(keys, uint64(a)<<32|uint64(b))
	}
	slices.Sort(keys)
	keys = slices.Compact(keys)
	pairs := make([]PairRecord, len(keys))
	var maxSum uint64
	for i, key := range keys {
		a, b := EntityID(key>>32), EntityID(key)
		ka, kb := len(ents[a].Values), len(ents[b].Values)
		t := make([]uint32, ka*kb)
		for c := range t {
			t[c] = uint32(rng.IntN(5))
		}
		t[rng.IntN(len(t))]++ // support ≥ 1
		for u := 0; u < ka; u++ {
			for v := 0; v < kb; v++ {
				ents[a].Marginal[u] += uint64(t[u*kb+v])
				ents[b].Marginal[v] += uint64(t[u*kb+v])
			}
		}
		pairs[i] = PairRecord{A: a, B: b, Counts: t}
	}
	for _, e := range ents {
		var s uint64
		for _, m := range e.Marginal {
			s += m
		}
		maxSum = max(maxSum, s)
	}
	return &ixSource{contexts: maxSum + 1, ents: ents, pairs: pairs}
}

// ixName gives zero-padded names so ids follow name order.
func ixName(i int) string {
	const digits = "0123456789"
	b := []byte("zone-0000000")
	for p := len(b) - 1; i > 0; p-- {
		b[p] = digits[i%10]
		i /= 10
	}
	return string(b)
}

// ixWriteTemp writes src to a fresh file and returns its path.
func ixWriteTemp(tb testing.TB, src Source, opts ...WriteOption) string {
	tb.Helper()
	path := filepath.Join(tb.TempDir(), "test.hwx")
	if err := WriteFile(path, src, opts...); err != nil {
		tb.Fatalf("WriteFile: %v", err)
	}
	return path
}

// ixOpen opens path with opts and closes the index when the test ends.
func ixOpen(tb testing.TB, path string, opts ...OpenOption) *Index {
	tb.Helper()
	x, err := Open(path, opts...)
	if err != nil {
		tb.Fatalf("Open: %v", err)
	}
	tb.Cleanup(func() { x.Close() })
	return x
}

func ixReadFile(tb testing.TB, path string) []byte {
	tb.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		tb.Fatal(err)
	}
	return b
}

// ixRankedRef is the reference support ranking of entity i in src.
func ixRankedRef(src *ixSource, i EntityID, r int) []EntityID {
	type nb struct {
		id  EntityID
		sup uint64
	}
	var l []nb
	for _, p := range src.pairs {
		var s uint64
		for _, c := range p.Counts {
			s += uint64(c)
		}
		if p.A == i {
			l = append(l, nb{p.B, s})
		} else if p.B == i {
			l = append(l, nb{p.A, s})
		}
	}
	slices.SortFunc(l, func(x, y nb) int { return cmp.Or(cmp.Compare(y.sup, x.sup), cmp.Compare(x.id, y.id)) })
	out := []EntityID{}
	for _, x := range l[:min(len(l), r)] {
		out = append(out, x.id)
	}
	return out
}

// ixExercise calls every read method on every id (and some out of range) so
// damaged views are probed for panics.
func ixExercise(x *Index) {
	n := x.NumEntities()
	for i := 0; i <= n+1; i++ {
		id := EntityID(i)
		name := x.Name(id)
		x.Lookup(name)
		vs := x.Values(id)
		for _, l := range vs {
			x.ValueIndex(id, l)
		}
		x.NumValues(id)
		x.Marginal(id)
		x.EntitySupport(id)
		x.RankedNeighbors(id)
		x.Degree(id)
		for _, nb := range x.Neighbors(id) {
			if ps, ok := x.Pair(id, nb); ok {
				ps.Support()
			}
			if ps, ok := x.Pair(nb, id); ok {
				ps.Support()
			}
		}
		x.Pair(id, EntityID(n-1-i))
		ixHintedDisagree(x, id)
		ixRankedDisagree(x, id)
	}
	x.Lookup("zzz")
	x.Lookup("")
}

// ixHintedDisagree looks up id's ranked pairs with and without their
// stored hints (PairBatchHinted, Pair) and returns the first ranked
// neighbour whose answers differ, or -1. On a file whose lists are valid
// they must agree whatever the hints hold.
func ixHintedDisagree(x *Index, id EntityID) int {
	rk, hints := x.RankedNeighbors(id), x.RankedPairHints(id)
	if len(hints) != len(rk) {
		hints = make([]uint32, len(rk))
		for j := range hints {
			hints[j] = NoPairHint
		}
	}
	a := make([]EntityID, len(rk))
	for j := range a {
		a[j] = id
	}
	out, ok := make([]PairStats, len(rk)), make([]bool, len(rk))
	x.PairBatchHinted(a, rk, hints, out, ok)
	for j, y := range rk {
		want, wok := x.Pair(id, y)
		if ok[j] != wok || !ixSamePair(out[j], want) {
			return j
		}
	}
	return -1
}

// ixSamePair reports whether p and q are the same statistics.
func ixSamePair(p, q PairStats) bool {
	if p.A != q.A || p.B != q.B || p.KA != q.KA || p.KB != q.KB {
		return false
	}
	for u := 0; u < p.KA; u++ {
		for v := 0; v < p.KB; v++ {
			if p.Count(u, v) != q.Count(u, v) {
				return false
			}
		}
	}
	return true
}
