package abstat

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// SRMResult is Pearson's chi-square goodness-of-fit test of observed arm
// counts against the configured allocation.
type SRMResult struct {
	ChiSq    float64   `json:"chi_sq"`
	DF       int       `json:"df"`
	P        float64   `json:"p"`
	Expected []float64 `json:"expected"`
}

// SRM tests for a sample-ratio mismatch: with N = Σ counts and shares
// w_i/Σw,
//
//	χ² = Σ (O_i − E_i)² / E_i,  E_i = N·w_i/Σw,  df = k − 1,
//
// p = P(χ²_df ≥ χ²) from gonum's ChiSquared survival function (Pearson's
// test, common practice). Arms with weight 0 must have count 0 (any unit
// there is a mismatch, reported as p = 0) and do not add a degree of
// freedom. O(k).
func SRM(counts []int, weights []float64) (SRMResult, error) {
	if len(counts) != len(weights) || len(counts) < 2 {
		return SRMResult{}, fmt.Errorf("%w: need ≥ 2 arms with one weight each, got %d counts and %d weights", ErrInput, len(counts), len(weights))
	}
	var n, wsum float64
	for i, c := range counts {
		w := weights[i]
		if c < 0 || !(w >= 0) || math.IsInf(w, 0) {
			return SRMResult{}, fmt.Errorf("%w: arm %d: count %d, weight %v", ErrInput, i, c, w)
		}
		n += float64(c)
		wsum += w
	}
	if n == 0 || wsum == 0 {
		return SRMResult{}, fmt.Errorf("%w: no units or zero total weight", ErrInput)
	}
	r := SRMResult{Expected: make([]float64, len(counts))}
	k := 0
	for i, c := range counts {
		e := n * weights[i] / wsum
		r.Expected[i] = e
		if weights[i] == 0 {
			if c > 0 {
				r.ChiSq = math.Inf(1)
			}
			continue
		}
		k++
		d := float64(c) - e
		r.ChiSq += d * d / e
	}
	r.DF = k - 1
	switch {
	case math.IsInf(r.ChiSq, 1):
		r.P = 0
	case r.DF < 1:
		r.P = 1
	default:
		r.P = distuv.ChiSquared{K: float64(r.DF)}.Survival(r.ChiSq)
	}
	return r, nil
}
