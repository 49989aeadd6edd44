package scorer

import (
	"errors"
	"fmt"
	"math"
)

// ErrFit reports calibration data that cannot determine the constants: no
// samples, NaN or negative errors, or errors that do not decrease with
// support (a fitted v0 ≤ 0).
var ErrFit = errors.New("scorer: cannot fit constants")

// SupportSample is one answered query used to calibrate the support model:
// the supports of the edges of the path it used (one entry for a direct
// answer, m+1 for a chain of m bridges) and the realised squared error
// Σ_v (p̂_v − p_v)² against the truth.
type SupportSample struct {
	Supports []uint64
	SqErr    float64
}

// SupportFit is the result of FitSupport.
type SupportFit struct {
	V0, N0, Beta float64
	// RMSE is the root mean squared residual of the fitted error model.
	RMSE float64
	// N is the number of samples used.
	N int
}

// Options returns the fit as options for NewSupport.
func (f SupportFit) Options() []Option {
	return []Option{WithV0(f.V0), WithN0(f.N0), WithBeta(f.Beta)}
}

// Fit grid for n0: log-spaced from fitN0Min to fitN0Max, then refined by
// golden-section search on log n0 around the best grid point.
const (
	fitN0Min   = 1e-2
	fitN0Max   = 1e5
	fitN0Steps = 71
)

// FitSupport fits the support model's constants by least squares,
//
//	minimise Σ_i (v0·Σ_e 1/(s_ie + n0) + β·m_i − SqErr_i)²  over v0 > 0, n0 > 0, β ≥ 0,
//
// where m_i = len(Supports_i) − 1. For fixed n0 the model is linear in
// (v0, β), solved exactly by 2×2 normal equations with the β ≥ 0 constraint
// (non-negative least squares in two variables, common practice); n0 is
// searched on a log grid over [0.01, 10⁵] and refined by golden-section search
// on log n0. The residual is not assumed unimodal in n0, which is why the
// grid comes first. Cost O(G·Σ_i len(Supports_i)) for G ≈ 110 evaluations.
//
// Errors (ErrFit): no samples, a sample without supports, a NaN, infinite or
// negative SqErr, or data that support does not explain (best v0 ≤ 0, or
// best n0 at the upper search bound, where the model is a constant). Samples of
// direct answers only (all m_i = 0) fit β = 0.
func FitSupport(samples []SupportSample) (SupportFit, error) {
	if len(samples) == 0 {
		return SupportFit{}, fmt.Errorf("%w: no samples", ErrFit)
	}
	for i, s := range samples {
		if len(s.Supports) == 0 {
			return SupportFit{}, fmt.Errorf("%w: sample %d has no edge supports", ErrFit, i)
		}
		if !finite(s.SqErr) || s.SqErr < 0 {
			return SupportFit{}, fmt.Errorf("%w: sample %d has squared error %v", ErrFit, i, s.SqErr)
		}
	}
	eval := func(logN0 float64) (v0, beta, sse float64) {
		n0 := math.Exp(logN0)
		// Accumulate the normal equations for features f = Σ 1/(s+n0), g = m.
		var ff, fg, gg, fy, gy, yy float64
		for _, s := range samples {
			f := 0.0
			for _, sup := range s.Supports {
				f += 1 / (float64(sup) + n0)
			}
			g := float64(len(s.Supports) - 1)
			y := s.SqErr
			ff += f * f
			fg += f * g
			gg += g * g
			fy += f * y
			gy += g * y
			yy += y * y
		}
		sseOf := func(a, b float64) float64 {
			// Σ (a f + b g − y)² expanded; clamp rounding below zero.
			return max(0, a*a*ff+b*b*gg+2*a*b*fg-2*a*fy-2*b*gy+yy)
		}
		// Unconstrained solution, then the β = 0 boundary if β < 0.
		if det := ff*gg - fg*fg; gg > 0 && det > 1e-300*ff*gg {
			a := (fy*gg - gy*fg) / det
			b := (gy*ff - fy*fg) / det
			if b >= 0 {
				return a, b, sseOf(a, b)
			}
		}
		a := fy / ff
		return a, 0, sseOf(a, 0)
	}
	lo, hi := math.Log(fitN0Min), math.Log(fitN0Max)
	step := (hi - lo) / (fitN0Steps - 1)
	best, bestSSE := lo, math.Inf(1)
	for i := 0; i < fitN0Steps; i++ {
		x := lo + float64(i)*step
		if v0, _, sse := eval(x); v0 > 0 && sse < bestSSE {
			best, bestSSE = x, sse
		}
	}
	if math.IsInf(bestSSE, 1) || best >= hi-step/2 {
		// At n0 → ∞ the model degenerates to a constant error; landing
		// there means support does not explain the errors.
		return SupportFit{}, fmt.Errorf("%w: squared errors do not decrease with support (best n0 at the search bound %g)", ErrFit, fitN0Max)
	}
	// Golden-section refinement on [best−step, best+step] ∩ [lo, hi].
	a, b := max(lo, best-step), min(hi, best+step)
	const invPhi = 0.6180339887498949
	c, d := b-invPhi*(b-a), a+invPhi*(b-a)
	sseAt := func(x float64) float64 {
		v0, _, sse := eval(x)
		if v0 <= 0 {
			return math.Inf(1)
		}
		return sse
	}
	fc, fd := sseAt(c), sseAt(d)
	for range 40 {
		if fc < fd {
			b, d, fd = d, c, fc
			c = b - invPhi*(b-a)
			fc = sseAt(c)
		} else {
			a, c, fc = c, d, fd
			d = a + invPhi*(b-a)
			fd = sseAt(d)
		}
	}
	if x := (a + b) / 2; sseAt(x) < bestSSE {
		best = x
	}
	v0, beta, sse := eval(best)
	return SupportFit{
		V0: v0, N0: math.Exp(best), Beta: beta,
		RMSE: math.Sqrt(sse / float64(len(samples))), N: len(samples),
	}, nil
}

// ChainSample is one chained answer used to fit the Bayes model's β: its
// variance part (Estimate.Err − β·m of the model that produced it), its
// number of bridges and the realised squared error against the truth.
type ChainSample struct {
	Var   float64
	Hops  int
	SqErr float64
	// Signal is the chain's signal L = Π_k SignalBound(edge k) (used by
	// FitChainBias only).
	Signal float64
}

// FitHopBias fits β by least squares on the realised squared errors,
//
//	β = max(0, Σ_i m_i (SqErr_i − Var_i) / Σ_i m_i²),
//
// the minimiser of Σ_i (Var_i + β m_i − SqErr_i)² over β ≥ 0. Samples with
// m_i = 0 do not inform β. O(n). Errors (ErrFit): no sample with m_i > 0,
// negative hops, or a NaN, infinite or negative Var or SqErr.
func FitHopBias(samples []ChainSample) (float64, error) {
	var num, den float64
	for i, s := range samples {
		if s.Hops < 0 || !finite(s.Var) || s.Var < 0 || !finite(s.SqErr) || s.SqErr < 0 {
			return 0, fmt.Errorf("%w: sample %d: hops %d, var %v, squared error %v", ErrFit, i, s.Hops, s.Var, s.SqErr)
		}
		m := float64(s.Hops)
		num += m * (s.SqErr - s.Var)
		den += m * m
	}
	if den == 0 {
		return 0, fmt.Errorf("%w: no chained samples (all hops 0)", ErrFit)
	}
	return max(0, num/den), nil
}

// FitChainBias fits β and γ of the Bayes model's chain bias
// β·m + γ·(δ − L)₊² (δ given) by least squares on the realised squared
// errors,
//
//	minimise Σ_i (Var_i + β m_i + γ f_i − SqErr_i)²,  f_i = (δ − Signal_i)₊²,
//
// over β, γ ≥ 0: the 2×2 normal equations, and when a coefficient comes out
// negative the one-variable fit of the other with it held at 0 (non-negative
// least squares in two variables, common practice). O(n). Errors (ErrFit):
// no sample with m_i > 0, negative hops, a NaN, infinite or negative Var or
// SqErr, a Signal outside [0, 1], or δ outside [0, 1].
func FitChainBias(samples []ChainSample, delta float64) (beta, gamma float64, err error) {
	if !finite(delta) || delta < 0 || delta > 1 {
		return 0, 0, fmt.Errorf("%w: δ = %v", ErrFit, delta)
	}
	var mm, mf, ff, my, fy float64
	for i, s := range samples {
		if s.Hops < 0 || !finite(s.Var) || s.Var < 0 || !finite(s.SqErr) || s.SqErr < 0 || !(s.Signal >= 0 && s.Signal <= 1) {
			return 0, 0, fmt.Errorf("%w: sample %d: hops %d, var %v, squared error %v, signal %v", ErrFit, i, s.Hops, s.Var, s.SqErr, s.Signal)
		}
		m := float64(s.Hops)
		if m == 0 {
			continue
		}
		f := max(0, delta-s.Signal)
		f *= f
		y := s.SqErr - s.Var
		mm += m * m
		mf += m * f
		ff += f * f
		my += m * y
		fy += f * y
	}
	if mm == 0 {
		return 0, 0, fmt.Errorf("%w: no chained samples (all hops 0)", ErrFit)
	}
	if det := mm*ff - mf*mf; det > 1e-12*mm*ff {
		beta, gamma = (my*ff-fy*mf)/det, (fy*mm-my*mf)/det
		if beta >= 0 && gamma >= 0 {
			return beta, gamma, nil
		}
	}
	// One coefficient at 0: the better of the two one-variable fits.
	bOnly := max(0, my/mm)
	sseB := -2*bOnly*my + bOnly*bOnly*mm
	if ff > 0 {
		gOnly := max(0, fy/ff)
		if sseG := -2*gOnly*fy + gOnly*gOnly*ff; sseG < sseB {
			return 0, gOnly, nil
		}
	}
	return bOnly, 0, nil
}

// PriorSample is one unobserved pair's query used to fit the prior strength
// A of the Bayes model's direct estimate: the spread 1 − Σ_v m̂_v² of the
// target's smoothed marginal m̂ and the realised Σ_v (m̂_v − p_v)² of
// answering that marginal against the truth p.
type PriorSample struct {
	Spread float64
	SqErr  float64
	// Rarity is (1 − P̂(s = u))²·(1 − 1/K_t) of the query, the feature of
	// FitUnseenSpread.
	Rarity float64
}

// FitPriorStrength fits A of the empirical-Bayes prior Dirichlet(A·m̂) (see
// Bayes, "Direct estimate") so that its prior variance (1 − Σ_v m̂_v²)/(A+1)
// matches the realised squared distance of unobserved pairs' conditionals
// from their marginals, by least squares through the origin,
//
//	c = Σ_i Spread_i·SqErr_i / Σ_i Spread_i²,   A = 1/c − 1,
//
// the minimiser of Σ_i (c·Spread_i − SqErr_i)² (common practice). O(n).
// Errors (ErrFit): no sample with Spread > 0, a NaN, infinite or negative
// value, a Spread above 1, or data that give c ≥ 1 (A ≤ 0: the
// conditionals lie as far from the marginal as a uniform draw would, so no
// prior on the marginal helps) or c = 0.
func FitPriorStrength(samples []PriorSample) (float64, error) {
	c, err := originSlope(samples, "spread", func(s PriorSample) float64 { return s.Spread })
	if err != nil {
		return 0, err
	}
	if !(c > 0 && c < 1) {
		return 0, fmt.Errorf("%w: variance ratio %v outside (0, 1)", ErrFit, c)
	}
	return 1/c - 1, nil
}

// originSlope returns Σ_i x_i·SqErr_i / Σ_i x_i², x_i = feature(sample i),
// the least-squares slope through the origin. Errors (ErrFit): a feature
// outside [0, 1] or not finite, a NaN, infinite or negative SqErr, or no
// sample with a feature > 0. O(n).
func originSlope(samples []PriorSample, name string, feature func(PriorSample) float64) (float64, error) {
	var gg, gy float64
	for i, s := range samples {
		x := feature(s)
		if !finite(x) || x < 0 || x > 1 || !finite(s.SqErr) || s.SqErr < 0 {
			return 0, fmt.Errorf("%w: sample %d: %s %v, squared error %v", ErrFit, i, name, x, s.SqErr)
		}
		gg += x * x
		gy += x * s.SqErr
	}
	if gg == 0 {
		return 0, fmt.Errorf("%w: no sample with a %s > 0", ErrFit, name)
	}
	return gy / gg, nil
}

// FitUnseenSpread fits η of the unobserved-pair error E0 = η·Rarity (see
// Bayes, "Direct estimate") by least squares through the origin on the
// realised squared distances of unobserved pairs' conditionals from their
// marginals,
//
//	η = Σ_i Rarity_i·SqErr_i / Σ_i Rarity_i²,
//
// the minimiser of Σ_i (η·Rarity_i − SqErr_i)² (common practice). O(n).
// Errors (ErrFit): no sample with Rarity > 0, a NaN, infinite, negative or
// above-1 Rarity, or a NaN, infinite or negative SqErr.
func FitUnseenSpread(samples []PriorSample) (float64, error) {
	return originSlope(samples, "rarity", func(s PriorSample) float64 { return s.Rarity })
}
