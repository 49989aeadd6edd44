package scorer

import (
	"fmt"
	"math"
)

// Combine merges estimates of the same target (typically from several
// chains) by inverse-error weighting:
//
//	w_i = (1/Err_i) / Σ_j (1/Err_j),  Dist = Σ_i w_i Dist_i,  Err = 1 / Σ_i (1/Err_i).
//
// This is the minimum-variance linear combination, and the combined Err is
// exact, when the estimates are unbiased and their errors independent
// (chains sharing no edge; common practice, inverse-variance weighting). The
// β·m bias terms are treated as if they were variances, so for chains with
// correlated biases the combined Err is optimistic. Combined Err never exceeds
// the smallest input Err.
//
// Var is Σ_i w_i² Var_i, the variance of the weighted mean of independent
// estimates.
//
// Estimates with Err = 0 are exact: if any is present, Dist is the plain mean
// of those and Err = 0. Estimates with Err = +Inf get weight 0 (if all are
// +Inf, Dist is the plain mean and Err = +Inf). Support is the sum of the
// supports (saturating), the evidence behind the combination.
//
// Errors: ErrNoEstimates for an empty slice; ErrBadEstimate for a NaN or
// negative Err, an empty Dist, or Dists of different lengths. A single
// estimate is returned with a copy of its Dist. O(n·K), one allocation.
func Combine(ests []Estimate) (Estimate, error) {
	if len(ests) == 0 {
		return Estimate{}, ErrNoEstimates
	}
	k := len(ests[0].Dist)
	zeros, infs := 0, 0
	for i, e := range ests {
		if len(e.Dist) != k || k == 0 {
			return Estimate{}, fmt.Errorf("%w: estimate %d has %d values, estimate 0 has %d", ErrBadEstimate, i, len(e.Dist), k)
		}
		if math.IsNaN(e.Err) || e.Err < 0 {
			return Estimate{}, fmt.Errorf("%w: estimate %d has Err %v", ErrBadEstimate, i, e.Err)
		}
		switch {
		case e.Err == 0:
			zeros++
		case math.IsInf(e.Err, 1):
			infs++
		}
	}
	out := Estimate{Dist: make([]float64, k)}
	for _, e := range ests {
		if out.Support+e.Support < out.Support {
			out.Support = math.MaxUint64
		} else {
			out.Support += e.Support
		}
	}
	// weight returns the unnormalised weight of e.
	var weight func(e Estimate) float64
	switch {
	case zeros > 0:
		weight = func(e Estimate) float64 {
			if e.Err == 0 {
				return 1
			}
			return 0
		}
		out.Err = 0
	case infs == len(ests):
		weight = func(Estimate) float64 { return 1 }
		out.Err = math.Inf(1)
	default:
		weight = func(e Estimate) float64 { return 1 / e.Err } // 1/Inf = 0
	}
	total := 0.0
	for _, e := range ests {
		w := weight(e)
		total += w
		for v, p := range e.Dist {
			out.Dist[v] += w * p
		}
	}
	for v := range out.Dist {
		out.Dist[v] /= total
	}
	// Var = Σ_i w_i² Var_i with the normalised weights (independent
	// estimates); estimates of weight 0 add nothing.
	for _, e := range ests {
		if w := weight(e) / total; w > 0 && !math.IsInf(e.Var, 0) {
			out.Var += w * w * e.Var
		}
	}
	if zeros == 0 && infs < len(ests) {
		out.Err = 1 / total
	}
	return out, nil
}
