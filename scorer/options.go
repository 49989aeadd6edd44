package scorer

import (
	"fmt"
	"math"
)

// Default parameter values.
//
// DefaultPriorStrength, DefaultBeta, DefaultMissingGamma, DefaultMissingDelta,
// DefaultNoiseK, DefaultSupportBeta, DefaultV0 and DefaultN0 are fitted on
// synthetic worlds (docs/DESIGN.md, Testbed) by
// `hopwise eval --fit --fit-seeds 101,102,103,104,105`:
// five local-geometric worlds of 100 binary variables, 100 edges, 30 held-out
// pairs and 50000 contexts, seeds disjoint from the evaluation seeds 1–5,
// answered by the router with the signal-loss proxy and the reference bias
// (router/search.go). The procedure is documented in package internal/eval
// (Fit). No constant was tuned on the evaluation seeds.
const (
	// DefaultAlpha is the Dirichlet pseudo-count α: the uniform (Bayes–Laplace)
	// prior, Gelman et al., BDA 3rd ed. §2.4.
	DefaultAlpha = 1.0
	// DefaultPriorStrength is A, the total pseudo-count of the
	// empirical-Bayes prior of a direct estimate, centred on the target's
	// marginal (WithPriorStrength): FitPriorStrength on the 600 held-out
	// (never co-observed) queries of the fit worlds gave A = 3.20, i.e. the
	// conditionals of those pairs lie, in squared distance summed over
	// values, 1/(A+1) = 0.24 of the marginal's spread 1 − Σ m̂² from it.
	DefaultPriorStrength = 3.2
	// DefaultUnseenSpread is η of the unobserved-pair error
	// E0 = η·(1 − P̂(s = u))²·(1 − 1/K_t) (WithUnseenSpread):
	// FitUnseenSpread on the same 600 held-out queries (0.693978).
	DefaultUnseenSpread = 0.694
	// DefaultBeta is the per-hop squared-bias term β of the Bayes model,
	// fitted jointly with γ by FitChainBias on the chains the router answers
	// with (560 chains at the chosen δ; fixed point β 2.5e-5 → 0 → … → 0).
	// The least-squares fit puts all of the residual bias on the
	// missing-signal term: the chains with real screening-off bias left
	// after the separation check are those whose signal L is near 0 (the
	// router's best chain misses the true path). With β = 0 the router
	// charges no constant per bridge, so its β·m pruning bounds are 0.
	DefaultBeta = 0.0
	// DefaultMissingGamma and DefaultMissingDelta are γ and δ of the Bayes
	// model's missing-signal bias γ·(δ − L)₊² (WithMissingSignal), fitted
	// with A = 3.2, η = 0.694 and the separation check on. δ is the grid
	// value (0.05 … 0.3) whose fixed point gave the largest mean Spearman ρ
	// of predicted against realised error on the fit worlds (0.666; δ = 0.1
	// gave 0.657, δ = 0.15 0.652); γ is the least-squares fit at that δ
	// (fixed point 1 → 4.001 → 5.355 → 5.578 → 5.714 → 5.881 → 5.881).
	DefaultMissingGamma = 5.881
	DefaultMissingDelta = 0.125
	// DefaultNoiseK is k of the gain margin k·√2·(Var_chain + Var_ref)
	// (WithNoiseK, Bayes.GainMargin): the grid value (0 … 4) with the
	// smallest routed MSE over all queries of the fit worlds (1.27922e-3;
	// k = 0 gave 1.29632e-3 and chained 0.30 % of the supported queries,
	// k = 0.5 0.05 %, every k ≥ 1 none; flat from 1 to 4, within 1e-8).
	DefaultNoiseK = 1.0
	// DefaultSeparation is λ of the separation bias (WithSeparation): 1
	// charges the estimated squared bias as derived (docs/QUALITY.md); it is
	// not fitted.
	DefaultSeparation = 1.0
	// DefaultSupportBeta is the support model's β from FitSupport on the
	// direct answers and best chains of the same worlds (5112 samples,
	// RMSE 0.157), fitted with earlier Bayes constants (β = 0.00236, no
	// missing-signal term, uniform direct prior); the current fit prints
	// v0 6.949, n0 70.47, β 0.0637 (RMSE 0.173), not installed.
	DefaultSupportBeta = 0.0319
	// DefaultV0 is the support model's error numerator v0 (same fit).
	DefaultV0 = 24.84
	// DefaultN0 is the support model's pseudo-support n0 (same fit).
	DefaultN0 = 132.0
)

// Option configures a model constructor. Options that do not apply to the
// model being built make the constructor fail with ErrBadOption, so a typo in
// a configuration does not pass unnoticed. A nil Option is ignored.
type Option interface {
	apply(*config) error
}

type optionFunc func(*config) error

func (f optionFunc) apply(c *config) error { return f(c) }

type config struct {
	alpha, beta, v0, n0, signalZ       float64
	gamma, delta                       float64
	setMissing                         bool
	prior, separation, noiseK          float64
	setPrior, setSeparation, setNoiseK bool
	spread                             float64
	setSpread                          bool
	setV0, setN0, setSignalZ, setAlpha bool
	setBeta                            bool
	variance                           Variance
	setVariance                        bool
}

func defaultConfig() config {
	return config{alpha: DefaultAlpha, beta: DefaultBeta, v0: DefaultV0, n0: DefaultN0, signalZ: DefaultSignalZ,
		gamma: DefaultMissingGamma, delta: DefaultMissingDelta,
		prior: DefaultPriorStrength, separation: DefaultSeparation, noiseK: DefaultNoiseK, spread: DefaultUnseenSpread}
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// WithAlpha sets the Dirichlet pseudo-count α (finite, > 0). Default 1.
// For the Support model it only smooths the reported Dist.
func WithAlpha(alpha float64) Option {
	return optionFunc(func(c *config) error {
		if !finite(alpha) || alpha <= 0 {
			return fmt.Errorf("%w: WithAlpha(%v): α must be finite and > 0", ErrBadOption, alpha)
		}
		c.alpha, c.setAlpha = alpha, true
		return nil
	})
}

// WithBeta sets the per-hop squared-bias term β (finite, ≥ 0) added as β·m to
// the error of a chain with m bridges. Default DefaultBeta (Bayes) or
// DefaultSupportBeta (Support).
func WithBeta(beta float64) Option {
	return optionFunc(func(c *config) error {
		if !finite(beta) || beta < 0 {
			return fmt.Errorf("%w: WithBeta(%v): β must be finite and ≥ 0", ErrBadOption, beta)
		}
		c.beta, c.setBeta = beta, true
		return nil
	})
}

// WithV0 sets the support model's error numerator v0 (finite, > 0).
// Support model only.
func WithV0(v0 float64) Option {
	return optionFunc(func(c *config) error {
		if !finite(v0) || v0 <= 0 {
			return fmt.Errorf("%w: WithV0(%v): v0 must be finite and > 0", ErrBadOption, v0)
		}
		c.v0, c.setV0 = v0, true
		return nil
	})
}

// WithN0 sets the support model's pseudo-support n0 (finite, > 0, so that an
// edge of support 0 has the finite error v0/n0). Support model only.
func WithN0(n0 float64) Option {
	return optionFunc(func(c *config) error {
		if !finite(n0) || n0 <= 0 {
			return fmt.Errorf("%w: WithN0(%v): n0 must be finite and > 0", ErrBadOption, n0)
		}
		c.n0, c.setN0 = n0, true
		return nil
	})
}

// WithSignalZ sets z (finite, ≥ 0) of the Bayes model's candidate-generation
// proxy EdgeCost = −log max(ε, V̂ − z/√n): how many standard errors the
// edge association is discounted by. Default DefaultSignalZ; 0 ranks edges
// by the point estimate V̂. Bayes model only.
func WithSignalZ(z float64) Option {
	return optionFunc(func(c *config) error {
		if !finite(z) || z < 0 {
			return fmt.Errorf("%w: WithSignalZ(%v): z must be finite and ≥ 0", ErrBadOption, z)
		}
		c.signalZ, c.setSignalZ = z, true
		return nil
	})
}

// WithMissingSignal sets γ (finite, ≥ 0) and δ (finite, in [0, 1]) of the
// Bayes model's missing-signal bias γ·(δ − L)₊², L the product of the chain's
// edge association lower bounds (see Bayes). γ = 0 turns it off. Default
// DefaultMissingGamma, DefaultMissingDelta. Bayes model only.
func WithMissingSignal(gamma, delta float64) Option {
	return optionFunc(func(c *config) error {
		if !finite(gamma) || gamma < 0 {
			return fmt.Errorf("%w: WithMissingSignal(%v, %v): γ must be finite and ≥ 0", ErrBadOption, gamma, delta)
		}
		if !finite(delta) || delta < 0 || delta > 1 {
			return fmt.Errorf("%w: WithMissingSignal(%v, %v): δ must be in [0, 1]", ErrBadOption, gamma, delta)
		}
		c.gamma, c.delta, c.setMissing = gamma, delta, true
		return nil
	})
}

// WithPriorStrength sets A (finite, > 0), the total pseudo-count of the
// Bayes model's empirical-Bayes prior of a direct estimate: Dirichlet(A·m̂)
// with m̂ the target's smoothed marginal (see Bayes, "Direct estimate").
// Default DefaultPriorStrength. Without marginals in the statistics the
// prior is the symmetric Dirichlet(α) and A is not used. Bayes model only.
func WithPriorStrength(a float64) Option {
	return optionFunc(func(c *config) error {
		if !finite(a) || a <= 0 {
			return fmt.Errorf("%w: WithPriorStrength(%v): A must be finite and > 0", ErrBadOption, a)
		}
		c.prior, c.setPrior = a, true
		return nil
	})
}

// WithUnseenSpread sets η (finite, ≥ 0) of the Bayes model's
// unobserved-pair error E0 = η·(1 − P̂(s = u))²·(1 − 1/K_t) (see Bayes,
// "Direct estimate"). Default DefaultUnseenSpread. Bayes model only.
func WithUnseenSpread(eta float64) Option {
	return optionFunc(func(c *config) error {
		if !finite(eta) || eta < 0 {
			return fmt.Errorf("%w: WithUnseenSpread(%v): η must be finite and ≥ 0", ErrBadOption, eta)
		}
		c.spread, c.setSpread = eta, true
		return nil
	})
}

// WithSeparation sets λ (finite, ≥ 0), the weight of the Bayes model's
// separation bias: λ·Σ_k max(0, D_k − V_k) over the bridges whose two chain
// neighbours were observed together (see Bayes, "Separation check"). 0
// turns the check off. Default DefaultSeparation. Bayes model only.
func WithSeparation(lambda float64) Option {
	return optionFunc(func(c *config) error {
		if !finite(lambda) || lambda < 0 {
			return fmt.Errorf("%w: WithSeparation(%v): λ must be finite and ≥ 0", ErrBadOption, lambda)
		}
		c.separation, c.setSeparation = lambda, true
		return nil
	})
}

// WithNoiseK sets k (finite, ≥ 0) of the Bayes model's gain margin
// k·√2·(Var_chain + Var_ref) (see Bayes.GainMargin): a chain must beat
// the direct answer by more than k standard errors of its bias estimate.
// 0 turns the margin off. Default DefaultNoiseK. Bayes model only.
func WithNoiseK(k float64) Option {
	return optionFunc(func(c *config) error {
		if !finite(k) || k < 0 {
			return fmt.Errorf("%w: WithNoiseK(%v): k must be finite and ≥ 0", ErrBadOption, k)
		}
		c.noiseK, c.setNoiseK = k, true
		return nil
	})
}

// Variance selects how the Bayes model computes the variance of a chained
// estimate.
type Variance int

const (
	// DeltaMethod is the first-order (delta-method) variance (docs/DESIGN.md, Error model),
	// computed by a backward pass over suffix products. It is a lower bound
	// on the exact posterior variance, short by a relative O(1/n) for rows of
	// n counts. The default.
	DeltaMethod Variance = iota
	// ExactMoments propagates the covariance of the random row vector
	// x_k = x_(k−1) M_k exactly (rows independent a posteriori):
	//
	//	C_k = M̄_kᵀ (C_(k−1) − W_k) M̄_k + diag(M̄_kᵀ w_k),
	//	w_k[r] = (C_(k−1)[r,r] + x̄_(k−1)[r]²) / (n_r + K_k α + 1),  W_k = diag(w_k),
	//
	// from C_0 = 0, x̄_0 = e_u, and Err = trace(C_(m+1)) + β·m. Same O(m·K³)
	// cost as DeltaMethod (two K×K products per edge). Setting
	// C_(k−1)[r,r] to 0 in w_k gives back the delta method.
	ExactMoments
)

// String returns "delta" or "exact".
func (v Variance) String() string {
	switch v {
	case DeltaMethod:
		return "delta"
	case ExactMoments:
		return "exact"
	}
	return fmt.Sprintf("Variance(%d)", int(v))
}

// WithVariance selects the chain-variance method of the Bayes model
// (DeltaMethod by default). Bayes model only.
func WithVariance(v Variance) Option {
	return optionFunc(func(c *config) error {
		if v != DeltaMethod && v != ExactMoments {
			return fmt.Errorf("%w: WithVariance(%d): unknown method", ErrBadOption, int(v))
		}
		c.variance, c.setVariance = v, true
		return nil
	})
}

func buildConfig(opts []Option) (config, error) {
	c := defaultConfig()
	for _, o := range opts {
		if o == nil {
			continue
		}
		if err := o.apply(&c); err != nil {
			return config{}, err
		}
	}
	return c, nil
}
