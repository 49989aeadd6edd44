package scorer

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestParallelVarianceMonteCarlo checks the delta-method variance of the
// parallel estimate (parWork.variance) against the variance of the
// estimate over posterior draws of every row it reads and of each table's
// row shares (Dirichlet vectors), on random tables of a few hundred contexts per row with
// K = 3, 3, 2 and 3 values (s, b1, b2, t), with and without the bridges'
// own table. The delta method is first order, so they agree within 20 %.
func TestParallelVarianceMonteCarlo(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	ks, k1, k2, kt := 3, 3, 2, 3
	mk := func(ka, kb int) ptab {
		var tb ptab
		tb.ka, tb.kb = ka, kb
		tb.th = make([]float64, ka*kb)
		tb.w = make([]float64, ka)
		tb.ci = make([]float64, ka)
		tot := 0.0
		for r := range ka {
			n := 200 + rng.Float64()*400
			s := 0.0
			for v := range kb {
				x := 0.2 + rng.Float64()
				tb.th[r*kb+v] = x
				s += x
			}
			for v := range kb {
				tb.th[r*kb+v] /= s
			}
			tb.w[r] = n
			tot += n
			tb.ci[r] = 1 / (n + float64(kb) + 1)
		}
		for r := range ka {
			tb.w[r] /= tot
		}
		tb.cw = 1 / (tot + 1)
		return tb
	}
	for _, withD := range []bool{false, true} {
		pw := &parWork{a1: mk(ks, k1), a2: mk(ks, k2), t1: mk(k1, kt), t2: mk(k2, kt), d: mk(k1, k2), hasD: withD}
		pw.base, pw.tmp, pw.hubT = make([]float64, kt), make([]float64, kt), make([]float64, kt)
		const u = 1
		if !pw.estimate(u, pw.base) {
			t.Fatal("no estimate")
		}
		delta, ok := pw.variance(u, kt)
		if !ok {
			t.Fatal("no variance")
		}
		// Monte Carlo over Dirichlet rows with concentration 1/c_r − 1.
		tabs := []*ptab{&pw.a1, &pw.a2, &pw.t1, &pw.t2}
		if withD {
			tabs = append(tabs, &pw.d)
		}
		orig := make([][]float64, len(tabs))
		origW := make([][]float64, len(tabs))
		for i, tb := range tabs {
			orig[i] = append([]float64(nil), tb.th...)
			origW[i] = append([]float64(nil), tb.w...)
		}
		draw := func(dst, mean []float64, conc float64) {
			s := 0.0
			for v := range dst {
				g := distuv.Gamma{Alpha: conc * mean[v], Beta: 1, Src: rng}.Rand()
				dst[v] = g
				s += g
			}
			for v := range dst {
				dst[v] /= s
			}
		}
		mean := make([]float64, kt)
		var sum, sumSq [8]float64
		const draws = 20000
		est := make([]float64, kt)
		copy(mean, pw.base)
		for range draws {
			for i, tb := range tabs {
				for r := range tb.ka {
					draw(tb.th[r*tb.kb:r*tb.kb+tb.kb], orig[i][r*tb.kb:r*tb.kb+tb.kb], 1/tb.ci[r]-1)
				}
				draw(tb.w[:tb.ka], origW[i], 1/tb.cw-1)
			}
			if !pw.estimate(u, est) {
				t.Fatal("no estimate on a draw")
			}
			for v := range kt {
				sum[v] += est[v]
				sumSq[v] += est[v] * est[v]
			}
		}
		for i, tb := range tabs {
			copy(tb.th, orig[i])
			copy(tb.w, origW[i])
		}
		mc := 0.0
		for v := range kt {
			m := sum[v] / draws
			mc += sumSq[v]/draws - m*m
		}
		t.Logf("bridges' table %v: delta-method Σ_v Var %.4g, Monte Carlo %.4g (ratio %.3f)", withD, delta, mc, delta/mc)
		if math.Abs(delta/mc-1) > 0.2 {
			t.Errorf("bridges' table %v: delta-method variance %.4g, Monte Carlo %.4g", withD, delta, mc)
		}
	}
}
