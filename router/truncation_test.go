package router

import (
	"context"
	"reflect"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// TestHugeBeamOnSmallGraphIsNotTruncated: on a complete graph of 8
// entities, a beam and fan-out that hold every neighbour cut nothing, with
// the whole ranked lists or with a rank prefix of 2 (the search then reads
// past the prefix and must decide the same). With the default k only the
// candidates bound may cut.
func TestHugeBeamOnSmallGraphIsNotTruncated(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	for seed := uint64(1); seed <= 4; seed++ {
		full := randomGraph(seed, 8, 1)
		short := randomGraph(seed, 8, 1)
		short.SetRankPrefix(2)
		huge := []Option{WithBeam(100000), WithFanOut(100000), WithMaxCandidates(1 << 16), WithCacheSize(0)}
		rf := mustNew(t, nonClosing{full}, huge...)
		rs := mustNew(t, nonClosing{short}, huge...)
		rd := mustNew(t, nonClosing{full}, WithBeam(100000), WithFanOut(100000), WithCacheSize(0))
		for s := range 8 {
			for tt := range 8 {
				if s == tt {
					continue
				}
				q := Query{From: full.Name(graphidx.EntityID(s)), Value: full.Values(graphidx.EntityID(s))[0], To: full.Name(graphidx.EntityID(tt))}
				df, err := rf.Decide(ctx, q)
				if err != nil {
					t.Fatal(err)
				}
				ds, err := rs.Decide(ctx, q)
				if err != nil {
					t.Fatal(err)
				}
				if df.Truncated || df.Cut != 0 || ds.Truncated || ds.Cut != 0 {
					t.Fatalf("seed %d %v: truncated %v %q (whole lists), %v %q (prefix 2)", seed, q, df.Truncated, df.Cut, ds.Truncated, ds.Cut)
				}
				if !reflect.DeepEqual(df.Chain, ds.Chain) || df.Gain != ds.Gain {
					t.Fatalf("seed %d %v: prefix 2 decided %+v, whole lists %+v", seed, q, ds.Chain, df.Chain)
				}
				dd, err := rd.Decide(ctx, q)
				if err != nil {
					t.Fatal(err)
				}
				if dd.Cut&^CutCandidates != 0 {
					t.Fatalf("seed %d %v: default k cut by %q; only candidates may cut", seed, q, dd.Cut)
				}
			}
		}
	}
}

// TestEachBoundCuts: each bound, set tight on a complete graph of 10
// entities, is the one named in Cut (the deadline: TestDeadlineTruncates).
func TestEachBoundCuts(t *testing.T) {
	t.Parallel()
	g := randomGraph(3, 10, 1)
	zero, _ := scorer.NewBayes(scorer.WithBeta(0))
	for _, tc := range []struct {
		name string
		opts []Option
		want Cut
	}{
		{"beam", []Option{WithBeam(1), WithMaxCandidates(1 << 16), WithMaxBridges(2)}, CutBeam},
		{"fan-out", []Option{WithFanOut(1), WithMaxCandidates(1 << 16), WithMaxBridges(2)}, CutBeam},
		{"three-bridge beam", []Option{WithBeam(3), WithFanOut(100), WithMaxCandidates(1 << 16)}, CutBeam},
		{"candidates", []Option{WithModel(zero), WithMaxCandidates(1)}, CutCandidates},
		{"budget", []Option{WithExpansionBudget(20), WithMaxCandidates(1 << 16)}, CutBudget},
	} {
		r := mustNew(t, nonClosing{g}, append([]Option{WithCacheSize(0)}, tc.opts...)...)
		n := 0
		for s := range 10 {
			tt := (s + 3) % 10
			d, err := r.Decide(context.Background(), Query{From: g.Name(graphidx.EntityID(s)), Value: g.Values(graphidx.EntityID(s))[0], To: g.Name(graphidx.EntityID(tt))})
			if err != nil {
				t.Fatal(err)
			}
			if d.Cut&tc.want != 0 {
				n++
				if !d.Truncated {
					t.Errorf("%s: Cut %q without Truncated", tc.name, d.Cut)
				}
			}
			if other := d.Cut &^ (tc.want | CutCandidates); other != 0 {
				t.Errorf("%s: %s→%s also cut by %q", tc.name, g.Name(graphidx.EntityID(s)), g.Name(graphidx.EntityID(tt)), other)
			}
		}
		if n != 10 {
			t.Errorf("%s: %d of 10 decisions cut by %q, want all", tc.name, n, tc.want)
		}
	}
}

// TestDroppedChainsThatCannotWinAreNoCut: with k = 1 the longer chain is
// left out of the candidates. With β = 0.13 its bound E_direct − 2β is below
// the one-bridge chain's score, so leaving it out loses nothing and the
// decision is not truncated; with β = 0 it could have won, which is a cut.
func TestDroppedChainsThatCannotWinAreNoCut(t *testing.T) {
	t.Parallel()
	b := newMemBuilder(5)
	s := b.entity("vent-a", "closed", "open")
	tt := b.entity("bed-b", "dry", "wet")
	z := b.entity("zone-z", "humid", "dry")
	a := b.entity("pump-a", "off", "on")
	c := b.entity("pump-c", "off", "on")
	b.pair(s, z, 900, 100, 100, 900) // strong one-bridge chain
	b.pair(z, tt, 900, 100, 100, 900)
	b.pair(s, a, 30, 20, 20, 30) // weak two-bridge chain
	b.pair(a, c, 30, 20, 20, 30)
	b.pair(c, tt, 30, 20, 20, 30)
	g := b.build()
	q := Query{From: "vent-a", Value: "open", To: "bed-b"}
	for _, tc := range []struct {
		beta float64
		want Cut
	}{{0.13, 0}, {0, CutCandidates}} {
		m, err := scorer.NewBayes(scorer.WithBeta(tc.beta))
		if err != nil {
			t.Fatal(err)
		}
		r := mustNew(t, nonClosing{g}, WithModel(m), WithMaxCandidates(1), WithCacheSize(0))
		d, err := r.Decide(context.Background(), q)
		if err != nil {
			t.Fatal(err)
		}
		if d.Chain == nil || len(d.Chain.Bridges) != 1 || d.Chain.Bridges[0] != "zone-z" {
			t.Fatalf("β %g: chain %+v, want via zone-z", tc.beta, d.Chain)
		}
		if d.Cut != tc.want || d.Truncated != (tc.want != 0) {
			t.Errorf("β %g: truncated %v cut %q, want %q", tc.beta, d.Truncated, d.Cut, tc.want)
		}
	}
}

// TestBeyondRankPrefixRanksBySupport: a beam wider than the rank prefix but
// narrower than the degree takes the best-supported neighbours past the
// prefix (looked up), and says the beam cut.
func TestBeyondRankPrefixRanksBySupport(t *testing.T) {
	t.Parallel()
	b := newMemBuilder(9)
	s := b.entity("hub", "off", "on")
	tt := b.entity("leaf", "off", "on")
	var mids []graphidx.EntityID
	for i := range 6 {
		m := b.entity("bed-"+string(rune('a'+i)), "dry", "wet")
		mids = append(mids, m)
		n := uint32(10 * (i + 1)) // bed-f best supported
		b.pair(s, m, n, n/2, n/2, n)
	}
	b.pair(mids[0], tt, 40, 10, 10, 40) // only bed-a reaches the leaf
	g := b.build()
	g.SetRankPrefix(2)
	sc := newScratch()
	sc.g, sc.st = g, &settings{beam: 4, fanOut: 4}
	sc.bud = budget{left: 1 << 20}
	l1, ok, cut := sc.layer1(nil, s, tt)
	var got []string
	for _, x := range l1 {
		got = append(got, g.Name(x.id))
	}
	want := []string{"bed-f", "bed-e", "bed-d", "bed-c"}
	if !reflect.DeepEqual(got, want) || ok || !cut {
		t.Fatalf("layer1 = %v ok %v cut %v, want %v, false, true", got, ok, cut, want)
	}
}
