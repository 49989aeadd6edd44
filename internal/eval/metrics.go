package eval

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/stat"
)

// Spearman returns Spearman's rank correlation of x and y: the Pearson
// correlation (gonum stat.Correlation) of their mid-ranks, so ties get the
// mean of the ranks they span (Spearman 1904; the tie rule is common
// practice). NaN when the lengths differ, fewer than two pairs are given,
// or either side is constant. O(n log n).
func Spearman(x, y []float64) float64 {
	if len(x) != len(y) || len(x) < 2 {
		return math.NaN()
	}
	rx, ry := midRanks(x), midRanks(y)
	return stat.Correlation(rx, ry, nil)
}

// midRanks returns the 1-based ranks of x, ties sharing their mean rank.
func midRanks(x []float64) []float64 {
	idx := make([]int, len(x))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return x[idx[a]] < x[idx[b]] })
	r := make([]float64, len(x))
	for i := 0; i < len(idx); {
		j := i + 1
		for j < len(idx) && x[idx[j]] == x[idx[i]] {
			j++
		}
		mid := float64(i+j+1) / 2 // mean of ranks i+1 … j
		for k := i; k < j; k++ {
			r[idx[k]] = mid
		}
		i = j
	}
	return r
}

// meanRatio returns mean(pred)/mean(real), NaN without data or when the
// realised mean is 0.
func meanRatio(pred, real []float64) float64 {
	if len(pred) == 0 || len(pred) != len(real) {
		return math.NaN()
	}
	mr := stat.Mean(real, nil)
	if mr == 0 {
		return math.NaN()
	}
	return stat.Mean(pred, nil) / mr
}
