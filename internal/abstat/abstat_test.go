package abstat

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

func TestWilsonPublished(t *testing.T) {
	t.Parallel()
	// Newcombe (1998) Stat Med 17:857, Table I, method 3 (Wilson score
	// interval without continuity correction), 95% level, 4 decimals.
	cases := []struct {
		x, n   int
		lo, hi float64
	}{
		{81, 263, 0.2553, 0.3662},
		{15, 148, 0.0624, 0.1605},
		{0, 20, 0, 0.1611},
	}
	for _, c := range cases {
		iv, err := Wilson(c.x, c.n, 0.95)
		if err != nil {
			t.Fatal(err)
		}
		if !near(iv.Lo, c.lo, 5e-5) || !near(iv.Hi, c.hi, 5e-5) {
			t.Errorf("Wilson(%d/%d) = %.5f–%.5f, want %.4f–%.4f", c.x, c.n, iv.Lo, iv.Hi, c.lo, c.hi)
		}
		if iv.Est != float64(c.x)/float64(c.n) {
			t.Errorf("estimate %v", iv.Est)
		}
	}
	// All-successes is the mirror image of zero successes (common practice:
	// the score interval is symmetric under x → n−x).
	iv, _ := Wilson(20, 20, 0.95)
	if iv.Hi != 1 || !near(iv.Lo, 1-0.1611, 5e-5) {
		t.Errorf("Wilson(20/20) = %v", iv)
	}
}

func TestNewcombeDiffPublished(t *testing.T) {
	t.Parallel()
	// Newcombe (1998) Stat Med 17:873, Table II, example 56/70 − 48/80,
	// method 10 (hybrid score, no continuity correction): 0.0524 to 0.3339.
	iv, err := NewcombeDiff(56, 70, 48, 80, 0.95)
	if err != nil {
		t.Fatal(err)
	}
	if !near(iv.Lo, 0.0524, 5e-5) || !near(iv.Hi, 0.3339, 5e-5) || !near(iv.Est, 0.2, 1e-12) {
		t.Errorf("NewcombeDiff = %.5f [%.5f, %.5f], want 0.2 [0.0524, 0.3339]", iv.Est, iv.Lo, iv.Hi)
	}
	// Swapping the groups negates the interval (common practice).
	sw, _ := NewcombeDiff(48, 80, 56, 70, 0.95)
	if !near(sw.Lo, -iv.Hi, 1e-12) || !near(sw.Hi, -iv.Lo, 1e-12) {
		t.Errorf("swap: %v vs %v", sw, iv)
	}
}

func TestTwoProportionZPublished(t *testing.T) {
	t.Parallel()
	// Pooled z for 56/70 vs 48/80 by the formula of NIST/SEMATECH
	// e-Handbook §7.3.3: 2.6502.
	r, err := TwoProportionZ(56, 70, 48, 80)
	if err != nil {
		t.Fatal(err)
	}
	if !near(r.Z, 2.6502, 5e-5) {
		t.Errorf("z = %.5f, want 2.6502", r.Z)
	}
	// Two-sided p = 2(1−Φ(z)), checked against gonum's normal survival.
	if want := 2 * distuv.UnitNormal.Survival(2.6502); !near(r.P, want, 1e-5) || !(r.P > 0.0079 && r.P < 0.0081) {
		t.Errorf("p = %v, want ≈ %v", r.P, want)
	}
	if r, _ := TwoProportionZ(0, 10, 0, 30); r.Z != 0 || r.P != 1 {
		t.Errorf("degenerate pooled p: %+v", r)
	}
}

func TestWelchHandComputed(t *testing.T) {
	t.Parallel()
	a := Summarize([]float64{4.1, 5.3, 6.0, 5.5, 4.8})
	b := Summarize([]float64{6.2, 7.1, 5.9, 8.0, 7.4, 6.8, 7.7})
	// By hand: mean a = 25.7/5 = 5.14, s² = 2.092/4 = 0.523;
	// mean b = 49.1/7 = 7.0142857, s² = 3.548571/6 = 0.5914286.
	if !near(a.Mean, 5.14, 1e-12) || !near(a.Var, 0.523, 1e-12) || !near(b.Var, 0.5914286, 1e-7) {
		t.Fatalf("summaries %+v %+v", a, b)
	}
	r, err := Welch(a, b, 0.95)
	if err != nil {
		t.Fatal(err)
	}
	// Welch–Satterthwaite by hand: s1²/n1 = 0.1046, s2²/n2 = 0.0844898;
	// ν = 0.1890898² / (0.1046²/4 + 0.0844898²/6) = 0.0357549/0.00392505
	// = 9.1094.
	if !near(r.DF, 9.1094, 1e-4) {
		t.Errorf("df = %.5f, want 9.1094", r.DF)
	}
	if !near(r.SE, math.Sqrt(0.1046+0.0844898), 1e-7) || !near(r.T, -4.31024, 1e-5) {
		t.Errorf("se %v t %v", r.SE, r.T)
	}
	// The interval half-width uses the t quantile of gonum StudentsT at ν.
	q := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: r.DF}.Quantile(0.975)
	if !near(r.Hi-r.Est, q*r.SE, 1e-12) || !near(r.Est-r.Lo, q*r.SE, 1e-12) {
		t.Errorf("interval %v, half-width want %v", r.Interval, q*r.SE)
	}
	// t table value, common practice: t_{0.975, 10} = 2.228.
	if q10 := (distuv.StudentsT{Mu: 0, Sigma: 1, Nu: 10}).Quantile(0.975); !near(q10, 2.228, 5e-4) {
		t.Errorf("t quantile %v", q10)
	}
	// Between t_{0.975,9} = 2.262 and t_{0.975,10} = 2.228 (table, common practice).
	if !(q < 2.262 && q > 2.228) {
		t.Errorf("quantile at ν=9.11 is %v", q)
	}
	if r.P > 0.01 || r.P < 0.001 {
		t.Errorf("p = %v, expected about 0.002 for t = −4.31 on 9.1 df", r.P)
	}
}

func TestWelchEdgeCases(t *testing.T) {
	t.Parallel()
	if _, err := Welch(Summary{N: 1}, Summary{N: 5, Var: 1}, 0.95); !errors.Is(err, ErrInput) {
		t.Errorf("n=1: %v", err)
	}
	r, err := Welch(Summary{N: 3, Mean: 1}, Summary{N: 4, Mean: 1}, 0.95)
	if err != nil || r.P != 1 || r.Lo != 0 || r.Hi != 0 {
		t.Errorf("zero variance: %+v %v", r, err)
	}
}

func TestChiSquareTails(t *testing.T) {
	t.Parallel()
	// Identity: P(χ²₁ ≥ x) = 2(1 − Φ(√x)) (common practice); at x = 1 it
	// is 0.3173.
	r, err := SRM([]int{5050, 4950}, []float64{1, 1})
	if err != nil {
		t.Fatal(err)
	}
	if !near(r.ChiSq, 1, 1e-12) || r.DF != 1 || !near(r.P, 2*distuv.UnitNormal.Survival(1), 1e-9) || !near(r.P, 0.3173, 5e-5) {
		t.Errorf("SRM = %+v", r)
	}
	// Table values, common practice: χ²₁(0.95) = 3.841, χ²₂(0.95) = 5.991.
	cases := []struct{ x, k, p float64 }{{3.841, 1, 0.05}, {5.991, 2, 0.05}, {9.210, 2, 0.01}}
	for _, c := range cases {
		if got := (distuv.ChiSquared{K: c.k}).Survival(c.x); !near(got, c.p, 1e-4) {
			t.Errorf("χ²_%v tail at %v = %v, want %v", c.k, c.x, got, c.p)
		}
	}
	// Three arms 80/10/10 with a clear mismatch.
	r, _ = SRM([]int{760, 130, 110}, []float64{0.8, 0.1, 0.1})
	// (760−800)²/800 + (130−100)²/100 + (110−100)²/100 = 2 + 9 + 1 = 12.
	if !near(r.ChiSq, 12, 1e-9) || r.DF != 2 || !near(r.P, math.Exp(-6), 1e-12) {
		// χ²₂ tail is exp(−x/2) exactly (common practice).
		t.Errorf("three arms: %+v", r)
	}
	r, _ = SRM([]int{10, 1}, []float64{1, 0})
	if r.P != 0 {
		t.Errorf("unit in a zero-weight arm must be a mismatch: %+v", r)
	}
	if _, err := SRM([]int{1}, []float64{1}); !errors.Is(err, ErrInput) {
		t.Error("one arm accepted")
	}
}

func TestSampleSizeAndPower(t *testing.T) {
	t.Parallel()
	// The formula evaluated independently with gonum (common practice).
	p1, p2, alpha, power := 0.30, 0.40, 0.05, 0.80
	za, zb := distuv.UnitNormal.Quantile(0.975), distuv.UnitNormal.Quantile(0.80)
	pb := 0.35
	want := math.Pow(za*math.Sqrt(2*pb*(1-pb))+zb*math.Sqrt(0.3*0.7+0.4*0.6), 2) / 0.01
	n, err := SampleSizeTwoProportions(p1, p2, alpha, power)
	if err != nil {
		t.Fatal(err)
	}
	if n != int(math.Ceil(want)) || n != 356 {
		// 1.959964·sqrt(0.455) + 0.841621·sqrt(0.45) = 1.322077 + 0.564578
		// = 1.886655; squared / 0.01 = 355.95 → 356 (by hand).
		t.Errorf("n = %d, want ceil(%.2f) = 356", n, want)
	}
	pw, _ := PowerTwoProportions(p1, p2, alpha, n)
	pwLess, _ := PowerTwoProportions(p1, p2, alpha, n-1)
	if !(pw >= power && pwLess < power) {
		t.Errorf("power at n=%d is %v, at n−1 %v", n, pw, pwLess)
	}
	// Monte Carlo check of the power claim with the pooled z-test (seeded).
	rng := rand.New(rand.NewPCG(7, 11))
	const sims = 2000
	hits := 0
	for range sims {
		x1, x2 := 0, 0
		for range n {
			if rng.Float64() < p1 {
				x1++
			}
			if rng.Float64() < p2 {
				x2++
			}
		}
		z, _ := TwoProportionZ(x1, n, x2, n)
		if z.P < alpha {
			hits++
		}
	}
	got := float64(hits) / sims
	if math.Abs(got-power) > 4*math.Sqrt(power*(1-power)/sims) {
		t.Errorf("simulated power %v, want ≈ %v", got, power)
	}
	if _, err := SampleSizeTwoProportions(0.3, 0.3, 0.05, 0.8); !errors.Is(err, ErrInput) {
		t.Error("equal proportions accepted")
	}
}

func TestBootstrapMatchesWelchLargeSample(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(3, 5))
	a := make([]float64, 600)
	b := make([]float64, 500)
	for i := range a {
		a[i] = 0.6 + 0.2*rng.NormFloat64()
	}
	for i := range b {
		b[i] = 0.55 + 0.3*rng.NormFloat64()
	}
	w, _ := Welch(Summarize(a), Summarize(b), 0.95)
	bs, err := BootstrapMeanDiff(a, b, 2000, 0.95, rand.New(rand.NewPCG(1, 1)))
	if err != nil {
		t.Fatal(err)
	}
	hw := w.Hi - w.Est
	if !near(bs.Lo, w.Lo, 0.15*hw) || !near(bs.Hi, w.Hi, 0.15*hw) || !near(bs.Est, w.Est, 1e-12) {
		t.Errorf("bootstrap %v vs Welch %v", bs, w.Interval)
	}
	again, _ := BootstrapMeanDiff(a, b, 2000, 0.95, rand.New(rand.NewPCG(1, 1)))
	if again != bs {
		t.Error("same seed, different interval")
	}
}

func TestWilsonCoverage(t *testing.T) {
	t.Parallel()
	// Seeded coverage check: the 95% Wilson interval covers p in roughly
	// 95% of binomial samples (Newcombe 1998 reports mean coverage near
	// nominal for method 3).
	rng := rand.New(rand.NewPCG(9, 9))
	const n, p, sims = 60, 0.3, 4000
	cover := 0
	for range sims {
		x := 0
		for range n {
			if rng.Float64() < p {
				x++
			}
		}
		iv, _ := Wilson(x, n, 0.95)
		if iv.Contains(p) {
			cover++
		}
	}
	if c := float64(cover) / sims; c < 0.93 || c > 0.97 {
		t.Errorf("coverage %v", c)
	}
}

func TestBadInput(t *testing.T) {
	t.Parallel()
	for _, err := range []error{
		func() error { _, e := Wilson(5, 3, 0.95); return e }(),
		func() error { _, e := Wilson(1, 3, 1.5); return e }(),
		func() error { _, e := NewcombeDiff(1, 0, 1, 2, 0.95); return e }(),
		func() error { _, e := TwoProportionZ(-1, 3, 1, 2); return e }(),
		func() error {
			_, e := BootstrapMeanDiff(nil, []float64{1}, 10, 0.95, rand.New(rand.NewPCG(1, 1)))
			return e
		}(),
		func() error { _, e := PercentileInterval(0, []float64{math.NaN()}, 0.95); return e }(),
	} {
		if !errors.Is(err, ErrInput) {
			t.Errorf("want ErrInput, got %v", err)
		}
	}
}

// TestClusterBootstrapSingletons: with clusters of one observation the
// cluster bootstrap draws exactly what BootstrapMeanDiff draws.
func TestClusterBootstrapSingletons(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(8, 9))
	a, b := make([]float64, 120), make([]float64, 90)
	for i := range a {
		a[i] = rng.Float64()
	}
	for i := range b {
		b[i] = 0.2 + rng.Float64()
	}
	single := func(xs []float64) [][]float64 {
		out := make([][]float64, len(xs))
		for i := range xs {
			out[i] = xs[i : i+1]
		}
		return out
	}
	want, err := BootstrapMeanDiff(a, b, 500, 0.9, rand.New(rand.NewPCG(4, 4)))
	if err != nil {
		t.Fatal(err)
	}
	got, err := ClusterBootstrapMeanDiff(single(a), single(b), 500, 0.9, rand.New(rand.NewPCG(4, 4)))
	if err != nil {
		t.Fatal(err)
	}
	if !near(got.Lo, want.Lo, 1e-12) || !near(got.Hi, want.Hi, 1e-12) || !near(got.Est, want.Est, 1e-12) {
		t.Errorf("singleton clusters %v, plain bootstrap %v", got, want)
	}
	if _, err := ClusterBootstrapMeanDiff([][]float64{{1}, {}}, single(b), 10, 0.9, rng); !errors.Is(err, ErrInput) {
		t.Errorf("empty cluster: err %v, want ErrInput", err)
	}
}

// TestClusterBootstrapCoverage: units of 8 decisions sharing a unit
// effect (intra-cluster correlation ρ = 0.5, so a design effect of
// 1 + 7·0.5 = 4.5; Kish 1965 §5.4) and no true difference between arms.
// Over 300 seeded data sets the unit-resampling 95% interval covers 0 at
// close to its nominal rate, the observation-resampling one far less
// often, and DesignEffect estimates ≈ 4.5.
func TestClusterBootstrapCoverage(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(21, 22))
	const sets, units, m = 300, 40, 8
	draw := func() [][]float64 {
		cs := make([][]float64, units)
		for i := range cs {
			u := rng.NormFloat64() // unit effect, variance 1
			cs[i] = make([]float64, m)
			for j := range cs[i] {
				cs[i][j] = u + rng.NormFloat64() // noise variance 1: ρ = 0.5
			}
		}
		return cs
	}
	flat := func(cs [][]float64) []float64 {
		var out []float64
		for _, c := range cs {
			out = append(out, c...)
		}
		return out
	}
	var coverC, coverI int
	var deff float64
	for s := range sets {
		a, b := draw(), draw()
		seed := rand.New(rand.NewPCG(uint64(s), 7))
		ci, err := ClusterBootstrapMeanDiff(a, b, 400, 0.95, seed)
		if err != nil {
			t.Fatal(err)
		}
		ii, err := BootstrapMeanDiff(flat(a), flat(b), 400, 0.95, seed)
		if err != nil {
			t.Fatal(err)
		}
		if ci.Contains(0) {
			coverC++
		}
		if ii.Contains(0) {
			coverI++
		}
		if s < 60 {
			d, err := DesignEffect(a, b, 400, seed)
			if err != nil {
				t.Fatal(err)
			}
			deff += d / 60
		}
	}
	pc, pi := float64(coverC)/sets, float64(coverI)/sets
	t.Logf("coverage of 0: by unit %.3f, by decision %.3f; mean design effect %.2f (expected 4.5)", pc, pi, deff)
	if pc < 0.9 || pi > 0.8 || !near(deff, 4.5, 1.2) {
		t.Errorf("coverage by unit %.3f (want ≥ 0.90), by decision %.3f (want ≤ 0.80), design effect %.2f (want 4.5 ± 1.2)", pc, pi, deff)
	}
}
