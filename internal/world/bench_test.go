package world

import (
	"context"
	"io"
	"testing"
)

func benchWorld(b *testing.B) *World {
	b.Helper()
	w, err := Generate(Config{Vars: 100, Edges: 100, HeldOut: 40}, 1)
	if err != nil {
		b.Fatal(err)
	}
	return w
}

// BenchmarkWriteCorpus50k samples 50k local-geometric contexts of a
// 100-variable world and writes them as JSONL to io.Discard.
func BenchmarkWriteCorpus50k(b *testing.B) {
	w := benchWorld(b)
	cond, _ := ConditionByName(CondLocalGeometric)
	b.ReportAllocs()
	var st SampleStats
	for b.Loop() {
		var err error
		st, err = w.WriteCorpus(context.Background(), io.Discard, 50000, cond, 1)
		if err != nil {
			b.Fatal(err)
		}
	}
	if st.Contexts != 50000 || st.Observations < 50000 {
		b.Fatalf("stats %+v", st)
	}
	b.ReportMetric(float64(st.Observations)/50000, "obs/ctx")
}

// BenchmarkHeldOutTruth computes every exact conditional the eval needs for
// the held-out pairs of a 100-variable world (both directions, every value),
// on a fresh copy of the world so nothing is cached.
func BenchmarkHeldOutTruth(b *testing.B) {
	w := benchWorld(b)
	pairs := w.HeldOut()
	b.ReportAllocs()
	for b.Loop() {
		c, _ := w.WithHeldOut(pairs)
		for _, p := range pairs {
			for _, d := range [][2]int{p, {p[1], p[0]}} {
				for u := range c.Card(d[0]) {
					q, err := c.TrueConditional(d[0], u, d[1])
					if err != nil {
						b.Fatal(err)
					}
					if s := q[0] + q[1]; s < 0.999999 || s > 1.000001 {
						b.Fatalf("sum %v", s)
					}
				}
			}
		}
	}
}

// BenchmarkPickHeldOut runs the held-out search (exact MI of every
// candidate pair) on a 100-variable, 100-edge world.
func BenchmarkPickHeldOut(b *testing.B) {
	w, err := Generate(Config{Vars: 100, Edges: 100}, 1)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	var n int
	for b.Loop() {
		p, err := w.PickHeldOut(40, 0.01, 1)
		if err != nil {
			b.Fatal(err)
		}
		n = len(p)
	}
	if n == 0 {
		b.Fatal("no pairs")
	}
}

// BenchmarkGreenhouse builds the demo world (including its held-out search)
// and writes 50k local-geometric contexts as JSONL to io.Discard.
func BenchmarkGreenhouse(b *testing.B) {
	cond, _ := ConditionByName(CondLocalGeometric)
	b.ReportAllocs()
	var st SampleStats
	for b.Loop() {
		w, err := Greenhouse(1)
		if err != nil {
			b.Fatal(err)
		}
		st, err = w.WriteCorpus(context.Background(), io.Discard, 50000, cond, 1)
		if err != nil {
			b.Fatal(err)
		}
	}
	if st.Contexts != 50000 {
		b.Fatalf("stats %+v", st)
	}
	b.ReportMetric(float64(st.Observations)/50000, "obs/ctx")
}

// BenchmarkPosterior is one uncached exact query with one observed variable
// in a 100-variable, 100-edge world.
func BenchmarkPosterior(b *testing.B) {
	w := benchWorld(b)
	p := w.HeldOut()[0]
	ev := map[int]int{p[0]: 1}
	b.ReportAllocs()
	var q []float64
	for b.Loop() {
		var err error
		q, err = w.Posterior(p[1], ev)
		if err != nil {
			b.Fatal(err)
		}
	}
	if s := q[0] + q[1]; s < 0.999999 || s > 1.000001 {
		b.Fatalf("sum %v", s)
	}
}
