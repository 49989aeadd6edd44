package graphidx

import (
	"fmt"
	"math/rand/v2"
	"os"
	"testing"
	"time"

	lru "github.com/hashicorp/golang-lru/v2"
)

// benchIndex writes and opens a random index of n entities with average
// degree deg and k values each.
func benchIndex(b *testing.B, n, deg, k int) (*Index, *ixSource) {
	b.Helper()
	src := ixRandomSource(n, deg, k, 42)
	x, err := Open(ixWriteTemp(b, src), WithLazyVerify())
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { x.Close() })
	return x, src
}

// pairQueries draws stored pairs in random order and orientation.
func pairQueries(src *ixSource, m int) [][2]EntityID {
	rng := rand.New(rand.NewPCG(1, 2))
	q := make([][2]EntityID, m)
	for i := range q {
		p := src.pairs[rng.IntN(len(src.pairs))]
		if rng.IntN(2) == 0 {
			q[i] = [2]EntityID{p.A, p.B}
		} else {
			q[i] = [2]EntityID{p.B, p.A}
		}
	}
	return q
}

// BenchmarkPair measures Pair on stored pairs of a 100k-entity binary index
// (average degree 16), directly and behind a golang-lru cache big enough to
// hold every query (the best case for a cache: 100% hits after warm-up), on
// a small working set (fits the CPU cache) and a large one. It exists to
// decide whether Index should cache pair lookups.
func BenchmarkPair(b *testing.B) {
	x, src := benchIndex(b, 100_000, 16, 2)
	for _, ws := range []int{1 << 12, 1 << 16} {
		q := pairQueries(src, ws)
		cache, err := lru.New[uint64, PairStats](2 * ws)
		if err != nil {
			b.Fatal(err)
		}
		cached := func(a, c EntityID) (PairStats, bool) {
			key := uint64(a)<<32 | uint64(c)
			if ps, ok := cache.Get(key); ok {
				return ps, true
			}
			ps, ok := x.Pair(a, c)
			if ok {
				cache.Add(key, ps)
			}
			return ps, ok
		}
		for _, qq := range q {
			cached(qq[0], qq[1])
		}
		for _, mode := range []struct {
			name string
			get  func(a, c EntityID) (PairStats, bool)
		}{{"direct", x.Pair}, {"lru", cached}} {
			b.Run(fmt.Sprintf("%s/ws=%d", mode.name, ws), func(b *testing.B) {
				var sum uint64
				i := 0
				b.ReportAllocs()
				for b.Loop() {
					ps, ok := mode.get(q[i][0], q[i][1])
					if !ok {
						b.Fatal("stored pair not found")
					}
					sum += uint64(ps.Count(0, 0))
					i = (i + 1) & (len(q) - 1)
				}
				if sum == 0 {
					b.Fatal("no counts read")
				}
			})
		}
	}
}

// BenchmarkPairHub measures Pair against a hub with 200k neighbours.
func BenchmarkPairHub(b *testing.B) {
	const n = 200_001
	ents := make([]EntityRecord, n)
	for i := range ents {
		ents[i] = EntityRecord{Name: ixName(i), Values: []string{"off", "on"}, Marginal: []uint64{1, 1}}
	}
	ents[0].Marginal = []uint64{n, n}
	pairs := make([]PairRecord, n-1)
	for i := range pairs {
		pairs[i] = PairRecord{A: 0, B: EntityID(i + 1), Counts: []uint32{1, 0, 0, 1}}
	}
	src := &ixSource{contexts: 2 * n, ents: ents, pairs: pairs}
	x, err := Open(ixWriteTemp(b, src), WithLazyVerify())
	if err != nil {
		b.Fatal(err)
	}
	defer x.Close()
	rng := rand.New(rand.NewPCG(3, 4))
	ids := make([]EntityID, 1<<12)
	for i := range ids {
		ids[i] = EntityID(1 + rng.IntN(n-1))
	}
	i, hits := 0, 0
	b.ReportAllocs()
	for b.Loop() {
		if _, ok := x.Pair(0, ids[i]); ok {
			hits++
		}
		i = (i + 1) & (len(ids) - 1)
	}
	if hits == 0 {
		b.Fatal("no hub pair found")
	}
}

// BenchmarkLookup measures name lookup (binary search over sorted names).
func BenchmarkLookup(b *testing.B) {
	x, src := benchIndex(b, 100_000, 4, 2)
	rng := rand.New(rand.NewPCG(5, 6))
	names := make([]string, 1<<12)
	for i := range names {
		names[i] = src.ents[rng.IntN(len(src.ents))].Name
	}
	i, found := 0, 0
	b.ReportAllocs()
	for b.Loop() {
		if _, ok := x.Lookup(names[i]); ok {
			found++
		}
		i = (i + 1) & (len(names) - 1)
	}
	if found == 0 {
		b.Fatal("nothing found")
	}
}

// BenchmarkNeighbors measures Neighbors and RankedNeighbors.
func BenchmarkNeighbors(b *testing.B) {
	x, _ := benchIndex(b, 100_000, 16, 2)
	var total int
	id := EntityID(0)
	b.ReportAllocs()
	for b.Loop() {
		total += len(x.Neighbors(id)) + len(x.RankedNeighbors(id))
		id = (id + 7919) % 100_000
	}
	if total == 0 {
		b.Fatal("no neighbours")
	}
}

// BenchmarkOpen1M opens a 1M-entity binary index (average degree 8):
// lazily (header, section table, label tables) and fully verified.
func BenchmarkOpen1M(b *testing.B) {
	src := ixRandomSource(1_000_000, 8, 2, 9)
	start := time.Now()
	path := ixWriteTemp(b, src)
	st, _ := os.Stat(path)
	b.Logf("wrote %d entities, %d pairs, %d bytes in %v", len(src.ents), len(src.pairs), st.Size(), time.Since(start))
	for _, tc := range []struct {
		name string
		opts []OpenOption
	}{{"lazy", []OpenOption{WithLazyVerify()}}, {"full", nil}} {
		b.Run(tc.name, func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				x, err := Open(path, tc.opts...)
				if err != nil {
					b.Fatal(err)
				}
				if x.NumEntities() != 1_000_000 {
					b.Fatal("wrong entity count")
				}
				x.Close()
			}
		})
	}
}

// BenchmarkPairBatch compares Pair called once per pair with PairBatch on
// the same stored pairs of a 300k-entity binary index (average degree 32,
// about 120 MB of adjacency and counts, more than the CPU caches hold),
// drawn at random so that nearly every look-up misses the caches.
func BenchmarkPairBatch(b *testing.B) {
	x, src := benchIndex(b, 300_000, 32, 2)
	q := pairQueries(src, 1<<16)
	a := make([]EntityID, len(q))
	c := make([]EntityID, len(q))
	for i, p := range q {
		a[i], c[i] = p[0], p[1]
	}
	const batch = 32
	out := make([]PairStats, batch)
	ok := make([]bool, batch)
	b.Run("single", func(b *testing.B) {
		var sum uint64
		i := 0
		b.ReportAllocs()
		for b.Loop() {
			for j := 0; j < batch; j++ {
				ps, found := x.Pair(a[i+j], c[i+j])
				if !found {
					b.Fatal("stored pair not found")
				}
				sum += uint64(ps.Count(0, 0))
			}
			i = (i + batch) & (len(q) - 1)
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*batch), "ns/pair")
		if sum == 0 {
			b.Fatal("no counts read")
		}
	})
	b.Run("batch", func(b *testing.B) {
		var sum uint64
		i := 0
		b.ReportAllocs()
		for b.Loop() {
			x.PairBatch(a[i:i+batch], c[i:i+batch], out, ok)
			for j := 0; j < batch; j++ {
				if !ok[j] {
					b.Fatal("stored pair not found")
				}
				sum += uint64(out[j].Count(0, 0))
			}
			i = (i + batch) & (len(q) - 1)
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*batch), "ns/pair")
		if sum == 0 {
			b.Fatal("no counts read")
		}
	})
}

// TestPairBatchMatchesPair: PairBatch returns, pair for pair, the view Pair
// returns — stored pairs in both orientations, absent pairs, a == b and ids
// out of range — on a uniform-K and a mixed-K index, for batch lengths
// around the lockstep width.
func TestPairBatchMatchesPair(t *testing.T) {
	t.Parallel()
	for _, k := range []int{2, 0} { // 0: 1–4 values per entity
		src := ixRandomSource(3000, 12, k, 77)
		x, err := Open(ixWriteTemp(t, src))
		if err != nil {
			t.Fatal(err)
		}
		defer x.Close()
		rng := rand.New(rand.NewPCG(8, uint64(k)))
		n := EntityID(len(src.ents))
		var a, b []EntityID
		for len(a) < 4000 {
			var p, q EntityID
			switch r := rng.IntN(10); {
			case r < 6:
				sp := src.pairs[rng.IntN(len(src.pairs))]
				p, q = sp.A, sp.B
			case r < 8:
				p, q = EntityID(rng.IntN(int(n))), EntityID(rng.IntN(int(n)))
			case r < 9:
				p = EntityID(rng.IntN(int(n)))
				q = p
			default:
				p, q = EntityID(rng.IntN(int(n))), n+EntityID(rng.IntN(3))
			}
			if rng.IntN(2) == 0 {
				p, q = q, p
			}
			a, b = append(a, p), append(b, q)
		}
		found := 0
		for start := 0; start < len(a); {
			m := min(1+rng.IntN(2*pairBatchWidth+3), len(a)-start)
			out := make([]PairStats, m)
			ok := make([]bool, m)
			for i := range out {
				out[i], ok[i] = PairStats{A: 99, KA: 7}, true // overwritten
			}
			x.PairBatch(a[start:start+m], b[start:start+m], out, ok)
			for i := range m {
				want, wok := x.Pair(a[start+i], b[start+i])
				got := out[i]
				same := ok[i] == wok && got.A == want.A && got.B == want.B && got.KA == want.KA && got.KB == want.KB &&
					got.swapped == want.swapped && len(got.counts) == len(want.counts) &&
					(len(got.counts) == 0 || &got.counts[0] == &want.counts[0])
				if !same {
					t.Fatalf("k=%d Pair(%d, %d) = %+v %v, PairBatch gave %+v %v", k, a[start+i], b[start+i], want, wok, got, ok[i])
				}
				if wok {
					found++
				}
			}
			start += m
		}
		if found < 2000 {
			t.Fatalf("k=%d: only %d stored pairs among the queries", k, found)
		}
	}
}

// TestAppendNameMatchesName: AppendName appends exactly Name's bytes, leaves
// dst alone for an id out of range, and allocates nothing when dst has room.
func TestAppendNameMatchesName(t *testing.T) { // not parallel: AllocsPerRun
	ix, err := Open(ixWriteTemp(t, ixRandomSource(500, 6, 2, 5)))
	if err != nil {
		t.Fatal(err)
	}
	defer ix.Close()
	buf := make([]byte, 0, 256)
	for id := range EntityID(ix.NumEntities()) {
		got := ix.AppendName(buf[:0], id)
		if string(got) != ix.Name(id) {
			t.Fatalf("id %d: AppendName %q, Name %q", id, got, ix.Name(id))
		}
	}
	if got := ix.AppendName([]byte("x"), EntityID(ix.NumEntities())); string(got) != "x" {
		t.Errorf("out of range: %q", got)
	}
	if n := testing.AllocsPerRun(100, func() { buf = ix.AppendName(buf[:0], 0) }); n != 0 {
		t.Errorf("AppendName allocated %v times with room in dst", n)
	}
}

// BenchmarkPairBatchHinted compares PairBatch with PairBatchHinted on the
// same pairs of the index of BenchmarkPairBatch: random entries of random
// entities' ranked lists, each with its stored hint (RankedPairHints), so
// that the hinted look-up reads one checked list entry where PairBatch
// binary-searches the lower entity's upper list.
func BenchmarkPairBatchHinted(b *testing.B) {
	x, _ := benchIndex(b, 300_000, 32, 2)
	const n = 1 << 16
	a, c, hint, entry := make([]EntityID, 0, n), make([]EntityID, 0, n), make([]uint32, 0, n), make([]uint32, 0, n)
	rng := rand.New(rand.NewPCG(7, 8))
	for len(a) < n {
		e := EntityID(rng.IntN(x.NumEntities()))
		rk, hk := x.RankedNeighbors(e), x.RankedPairHints(e)
		if len(rk) == 0 || len(hk) != len(rk) {
			continue
		}
		j := rng.IntN(len(rk))
		a, c, hint, entry = append(a, e), append(c, rk[j]), append(hint, hk[j]), append(entry, uint32(j))
	}
	const batch = 32
	out := make([]PairStats, batch)
	ok := make([]bool, batch)
	for _, name := range []string{"batch", "hinted", "ranked"} {
		b.Run(name, func(b *testing.B) {
			var sum uint64
			i := 0
			b.ReportAllocs()
			for b.Loop() {
				switch name {
				case "hinted":
					x.PairBatchHinted(a[i:i+batch], c[i:i+batch], hint[i:i+batch], out, ok)
				case "ranked":
					x.PairBatchRanked(a[i:i+batch], c[i:i+batch], entry[i:i+batch], out, ok)
				default:
					x.PairBatch(a[i:i+batch], c[i:i+batch], out, ok)
				}
				for j := 0; j < batch; j++ {
					if !ok[j] {
						b.Fatal("stored pair not found")
					}
					sum += uint64(out[j].Count(0, 0))
				}
				i = (i + batch) & (n - 1)
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*batch), "ns/pair")
			if sum == 0 {
				b.Fatal("no counts read")
			}
		})
	}
}
