package ope

import (
	"slices"
	"sort"
)

// Binned is the outcome model of the doubly robust estimator: per mode, a
// weighted step-function regression of reward and cost on the routing
// score, over up to maxBins quantile bins of at least MinPerBin samples
// each. Direct decisions without an available chain form a group of their
// own (a single bin). Empty groups fall back to the pooled means.
// Predict is O(log bins); safe for concurrent use after fitting.
type Binned struct {
	groups       [3]binGroup // 0: direct without chain, 1: direct with chain, 2: chain
	meanR, meanC float64
}

// MinPerBin is the smallest number of samples in one bin of Binned.
const MinPerBin = 20

type binGroup struct {
	upper []float64 // upper score edge of each bin, ascending
	r, c  []float64 // weighted mean reward and cost per bin
}

func (g *binGroup) empty() bool { return len(g.r) == 0 }

func (g *binGroup) predict(score float64) (float64, float64) {
	i := sort.SearchFloat64s(g.upper, score)
	if i >= len(g.r) {
		i = len(g.r) - 1
	}
	return g.r[i], g.c[i]
}

func group(s *Sample, a Action) int {
	switch {
	case a == Chain:
		return 2
	case s.HasChain:
		return 1
	}
	return 0
}

// FitBinned fits the model on the logged samples (each in the group of its
// logged mode), weighting by Sample.Weight. O(n log n).
func FitBinned(samples []Sample, maxBins int) *Binned {
	if maxBins < 1 {
		maxBins = 1
	}
	m := &Binned{}
	var idx [3][]int
	var sw, sr, sc float64
	for i := range samples {
		s := &samples[i]
		g := group(s, s.Logged)
		idx[g] = append(idx[g], i)
		sw += s.Weight
		sr += s.Weight * s.Reward
		sc += s.Weight * s.Cost
	}
	if sw > 0 {
		m.meanR, m.meanC = sr/sw, sc/sw
	}
	for g := range idx {
		ids := idx[g]
		if len(ids) == 0 {
			continue
		}
		slices.SortFunc(ids, func(a, b int) int {
			switch {
			case samples[a].Score < samples[b].Score:
				return -1
			case samples[a].Score > samples[b].Score:
				return 1
			}
			return 0
		})
		nb := min(maxBins, max(1, len(ids)/MinPerBin))
		if g == 0 {
			nb = 1
		}
		grp := &m.groups[g]
		start := 0
		for b := range nb {
			end := (b + 1) * len(ids) / nb
			// keep equal scores in one bin
			for end < len(ids) && end > start && samples[ids[end]].Score == samples[ids[end-1]].Score {
				end++
			}
			if end <= start {
				continue
			}
			var w, r, c float64
			for _, i := range ids[start:end] {
				s := &samples[i]
				w += s.Weight
				r += s.Weight * s.Reward
				c += s.Weight * s.Cost
			}
			grp.upper = append(grp.upper, samples[ids[end-1]].Score)
			grp.r = append(grp.r, r/w)
			grp.c = append(grp.c, c/w)
			start = end
			if start >= len(ids) {
				break
			}
		}
	}
	return m
}

// Predict returns the modelled reward and cost of taking mode a on the
// sample's context.
func (m *Binned) Predict(s *Sample, a Action) (reward, cost float64) {
	g := group(s, a)
	if !m.groups[g].empty() {
		if g == 0 {
			return m.groups[0].r[0], m.groups[0].c[0]
		}
		return m.groups[g].predict(s.Score)
	}
	if g == 1 && !m.groups[0].empty() {
		return m.groups[0].r[0], m.groups[0].c[0]
	}
	return m.meanR, m.meanC
}

// fitFolds returns the outcome models of k-fold cross-fitting: models[f]
// is fitted on every sample i with i mod k ≠ f and predicts for the samples
// of fold f. With k = 1, or fewer than k samples, it is one in-sample
// model. O(k · n log n).
func fitFolds(samples []Sample, maxBins, k int) []*Binned {
	if k <= 1 || len(samples) < k {
		return []*Binned{FitBinned(samples, maxBins)}
	}
	models := make([]*Binned, k)
	train := make([]Sample, 0, len(samples)-len(samples)/k)
	for f := range k {
		train = train[:0]
		for i := range samples {
			if i%k != f {
				train = append(train, samples[i])
			}
		}
		models[f] = FitBinned(train, maxBins)
	}
	return models
}
