package abstat

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"
)

// Summary holds the sufficient statistics of one sample for Welch's test.
type Summary struct {
	N    int     `json:"n"`
	Mean float64 `json:"mean"`
	Var  float64 `json:"var"` // unbiased sample variance (n−1 denominator)
}

// Summarize computes n, mean and unbiased variance in one pass (Welford's
// update, common practice). O(n).
func Summarize(xs []float64) Summary {
	var s Summary
	var m2 float64
	for _, x := range xs {
		s.N++
		d := x - s.Mean
		s.Mean += d / float64(s.N)
		m2 += d * (x - s.Mean)
	}
	if s.N > 1 {
		s.Var = m2 / float64(s.N-1)
	}
	return s
}

// WelchResult is Welch's unequal-variance t procedure for mean1 − mean2.
type WelchResult struct {
	Interval
	SE float64 `json:"se"`
	DF float64 `json:"df"` // Welch–Satterthwaite degrees of freedom
	T  float64 `json:"t"`
	P  float64 `json:"p"` // two-sided p-value of H0: equal means
}

// Welch compares two independent samples by their summaries:
//
//	SE = sqrt(s1²/n1 + s2²/n2)
//	ν  = (s1²/n1 + s2²/n2)² / ((s1²/n1)²/(n1−1) + (s2²/n2)²/(n2−1))
//	CI = (m1 − m2) ± t_{ν, 1−(1−conf)/2} · SE
//
// (Welch 1947; Satterthwaite 1946). Both samples need n ≥ 2. When both
// variances are 0 the interval collapses to the difference, with ν = n1+n2−2
// and p = 1 if the means agree, else 0. O(1).
func Welch(a, b Summary, conf float64) (WelchResult, error) {
	if a.N < 2 || b.N < 2 {
		return WelchResult{}, fmt.Errorf("%w: Welch needs at least 2 observations per sample, got %d and %d", ErrInput, a.N, b.N)
	}
	if !(conf > 0 && conf < 1) {
		return WelchResult{}, fmt.Errorf("%w: confidence %v not in (0,1)", ErrInput, conf)
	}
	if a.Var < 0 || b.Var < 0 || math.IsNaN(a.Var+b.Var+a.Mean+b.Mean) {
		return WelchResult{}, fmt.Errorf("%w: bad sample summary", ErrInput)
	}
	va, vb := a.Var/float64(a.N), b.Var/float64(b.N)
	d := a.Mean - b.Mean
	se := math.Sqrt(va + vb)
	r := WelchResult{Interval: Interval{Est: d, Lo: d, Hi: d}, SE: se}
	if se == 0 {
		r.DF = float64(a.N + b.N - 2)
		if d == 0 {
			r.P = 1
		}
		return r, nil
	}
	r.DF = (va + vb) * (va + vb) / (va*va/float64(a.N-1) + vb*vb/float64(b.N-1))
	t := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: r.DF}
	q := t.Quantile(1 - (1-conf)/2)
	r.Lo, r.Hi = d-q*se, d+q*se
	r.T = d / se
	r.P = 2 * t.Survival(math.Abs(r.T))
	return r, nil
}

// Percentile returns the q-quantile (0 ≤ q ≤ 1) of sorted values by linear
// interpolation between order statistics (Hyndman & Fan type 7, common
// practice). sorted must be ascending and non-empty. O(1).
func Percentile(sorted []float64, q float64) float64 {
	if len(sorted) == 1 {
		return sorted[0]
	}
	h := q * float64(len(sorted)-1)
	i := int(math.Floor(h))
	if i >= len(sorted)-1 {
		return sorted[len(sorted)-1]
	}
	if i < 0 {
		return sorted[0]
	}
	return sorted[i] + (h-float64(i))*(sorted[i+1]-sorted[i])
}

// PercentileInterval turns bootstrap replicates into a percentile interval
// around est. replicates is sorted in place. NaN replicates are an error.
func PercentileInterval(est float64, replicates []float64, conf float64) (Interval, error) {
	if len(replicates) == 0 {
		return Interval{}, fmt.Errorf("%w: no bootstrap replicates", ErrInput)
	}
	if !(conf > 0 && conf < 1) {
		return Interval{}, fmt.Errorf("%w: confidence %v not in (0,1)", ErrInput, conf)
	}
	for _, r := range replicates {
		if math.IsNaN(r) {
			return Interval{}, fmt.Errorf("%w: NaN bootstrap replicate", ErrInput)
		}
	}
	slices.Sort(replicates)
	a := (1 - conf) / 2
	return Interval{Est: est, Lo: Percentile(replicates, a), Hi: Percentile(replicates, 1-a)}, nil
}

// BootstrapMeanDiff is the percentile bootstrap interval for mean(a) −
// mean(b): each of reps replicates resamples a and b with replacement,
// independently (Efron & Tibshirani 1993, ch. 13). rng makes it
// reproducible. Cost O(reps·(len(a)+len(b))), O(reps) memory.
func BootstrapMeanDiff(a, b []float64, reps int, conf float64, rng *rand.Rand) (Interval, error) {
	if len(a) == 0 || len(b) == 0 {
		return Interval{}, fmt.Errorf("%w: bootstrap needs non-empty samples, got %d and %d", ErrInput, len(a), len(b))
	}
	if reps < 1 {
		return Interval{}, fmt.Errorf("%w: reps = %d", ErrInput, reps)
	}
	if rng == nil {
		return Interval{}, fmt.Errorf("%w: nil rng", ErrInput)
	}
	mean := func(xs []float64) float64 {
		var s float64
		for _, x := range xs {
			s += x
		}
		return s / float64(len(xs))
	}
	resampled := func(xs []float64) float64 {
		var s float64
		for range xs {
			s += xs[rng.IntN(len(xs))]
		}
		return s / float64(len(xs))
	}
	reps64 := make([]float64, reps)
	for i := range reps64 {
		reps64[i] = resampled(a) - resampled(b)
	}
	return PercentileInterval(mean(a)-mean(b), reps64, conf)
}

// ClusterBootstrapMeanDiff is the percentile bootstrap interval for the
// difference of per-observation means of a and b when observations come in
// clusters (the decisions of one unit, say) that may be correlated: each
// replicate resamples whole clusters with replacement, independently in a
// and b, and takes Σ cluster sums / Σ cluster sizes (resampling the first
// stage of a two-stage sample; Davison & Hinkley 1997, §3.8). With every
// cluster of size one it draws exactly what BootstrapMeanDiff draws from
// the same rng. Every cluster must be non-empty. Cost
// O(reps·(clusters(a)+clusters(b))) after O(n) to sum the clusters.
func ClusterBootstrapMeanDiff(a, b [][]float64, reps int, conf float64, rng *rand.Rand) (Interval, error) {
	_, iv, err := clusterBootstrap(a, b, reps, conf, rng)
	return iv, err
}

// clusterBootstrap returns the replicates and the interval.
func clusterBootstrap(a, b [][]float64, reps int, conf float64, rng *rand.Rand) ([]float64, Interval, error) {
	if len(a) == 0 || len(b) == 0 {
		return nil, Interval{}, fmt.Errorf("%w: bootstrap needs non-empty samples, got %d and %d clusters", ErrInput, len(a), len(b))
	}
	if reps < 1 {
		return nil, Interval{}, fmt.Errorf("%w: reps = %d", ErrInput, reps)
	}
	if rng == nil {
		return nil, Interval{}, fmt.Errorf("%w: nil rng", ErrInput)
	}
	type cl struct{ sum, n float64 }
	sums := func(cs [][]float64, name string) ([]cl, float64, error) {
		out := make([]cl, len(cs))
		var s, n float64
		for i, c := range cs {
			if len(c) == 0 {
				return nil, 0, fmt.Errorf("%w: cluster %d of %s is empty", ErrInput, i, name)
			}
			for _, x := range c {
				out[i].sum += x
			}
			out[i].n = float64(len(c))
			s += out[i].sum
			n += out[i].n
		}
		return out, s / n, nil
	}
	ca, ma, err := sums(a, "a")
	if err != nil {
		return nil, Interval{}, err
	}
	cb, mb, err := sums(b, "b")
	if err != nil {
		return nil, Interval{}, err
	}
	resampled := func(cs []cl) float64 {
		var s, n float64
		for range cs {
			c := cs[rng.IntN(len(cs))]
			s += c.sum
			n += c.n
		}
		return s / n
	}
	out := make([]float64, reps)
	for i := range out {
		out[i] = resampled(ca) - resampled(cb)
	}
	iv, err := PercentileInterval(ma-mb, out, conf)
	return out, iv, err
}

// DesignEffect is the ratio of the bootstrap variance of the difference of
// means when whole clusters are resampled to that when single observations
// are (Kish's design effect, estimated by resampling; Kish 1965 §5.4). It
// is ≈ 1 for independent observations and ≈ 1 + (m̄ − 1)·ρ for clusters of
// mean size m̄ and intra-cluster correlation ρ. Both bootstraps draw reps
// replicates from rng.
func DesignEffect(a, b [][]float64, reps int, rng *rand.Rand) (float64, error) {
	cr, _, err := clusterBootstrap(a, b, reps, 0.95, rng)
	if err != nil {
		return 0, err
	}
	flat := func(cs [][]float64) [][]float64 {
		var out [][]float64
		for _, c := range cs {
			for i := range c {
				out = append(out, c[i:i+1])
			}
		}
		return out
	}
	ir, _, err := clusterBootstrap(flat(a), flat(b), reps, 0.95, rng)
	if err != nil {
		return 0, err
	}
	vc, vi := Summarize(cr).Var, Summarize(ir).Var
	if vi == 0 {
		if vc == 0 {
			return 1, nil
		}
		return math.Inf(1), nil
	}
	return vc / vi, nil
}
