package scorer

import "fmt"

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
	// DefaultHopAlpha is the Dirichlet pseudo-count of the rows of a
	// chain's hop tables (WithHopAlpha): Jeffreys' prior Dirichlet(1/2)
	// (Jeffreys 1946; the reference prior of a multinomial, Bernardo &
	// Smith, Bayesian Theory, §5.4), which pulls a thin row of a strongly
	// dependent edge less toward the uniform than Bayes–Laplace. Not
	// fitted; on the forty fit worlds (seeds 101–140) the held-out routed
	// MSE falls monotonically from α = 1 to 1/4 (local-geometric 7.53e-4,
	// 7.44e-4, 7.39e-4, 7.38e-4 at 1, 3/4, 1/2, 1/4), while the published
	// networks' distance ≥ 2 figure rises below 1/2 (docs/QUALITY.md §4f).
	DefaultHopAlpha = 0.5
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
	// DefaultInfluence is κ of the influence bound (WithInfluence): 1 uses
	// the bound as derived (docs/QUALITY.md); it is not fitted.
	DefaultInfluence = 1.0
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

// Option configures a model constructor: each option is a setter of one or
// two fields of BayesConfig and/or SupportConfig, and the constructor
// validates the result once (BayesConfig.Validate, SupportConfig.Validate).
// An option that does not apply to the model being built (WithV0 on the
// Bayes model, WithSignalZ on the Support model, ...) makes the constructor
// fail with ErrBadOption, so a typo in a configuration does not pass
// unnoticed. A nil Option is ignored.
type Option interface {
	bayes(*BayesConfig) error
	support(*SupportConfig) error
}

// option sets fields of either configuration; a nil setter means the option
// does not apply to that model.
type option struct {
	name string
	b    func(*BayesConfig)
	s    func(*SupportConfig)
}

func (o option) bayes(c *BayesConfig) error {
	if o.b == nil {
		return errNotFor(o.name, ModelBayes)
	}
	o.b(c)
	return nil
}

func (o option) support(c *SupportConfig) error {
	if o.s == nil {
		return errNotFor(o.name, ModelSupport)
	}
	o.s(c)
	return nil
}

// WithAlpha sets Alpha, the Dirichlet pseudo-count α (finite, > 0), of
// either model. Default 1. For the Support model it only smooths the
// reported Dist.
func WithAlpha(alpha float64) Option {
	return option{"WithAlpha", func(c *BayesConfig) { c.Alpha = alpha }, func(c *SupportConfig) { c.Alpha = alpha }}
}

// WithBeta sets Beta, the per-hop squared-bias term β (finite, ≥ 0) added as
// β·m to the error of a chain with m bridges, of either model. Default
// DefaultBeta (Bayes) or DefaultSupportBeta (Support).
func WithBeta(beta float64) Option {
	return option{"WithBeta", func(c *BayesConfig) { c.Beta = beta }, func(c *SupportConfig) { c.Beta = beta }}
}

// WithV0 sets SupportConfig.V0, the support model's error numerator v0
// (finite, > 0). Support model only.
func WithV0(v0 float64) Option {
	return option{"WithV0", nil, func(c *SupportConfig) { c.V0 = v0 }}
}

// WithN0 sets SupportConfig.N0, the support model's pseudo-support n0
// (finite, > 0, so that an edge of support 0 has the finite error v0/n0).
// Support model only.
func WithN0(n0 float64) Option {
	return option{"WithN0", nil, func(c *SupportConfig) { c.N0 = n0 }}
}

// WithSignalZ sets BayesConfig.SignalZ, z (finite, ≥ 0) of the Bayes model's
// candidate-generation proxy EdgeCost = −log max(ε, ρ̂ − z/√n): how many
// standard errors the edge association is discounted by. Default
// DefaultSignalZ; 0 ranks edges by the point estimate ρ̂. Bayes model only.
func WithSignalZ(z float64) Option {
	return option{"WithSignalZ", func(c *BayesConfig) { c.SignalZ = z }, nil}
}

// WithMissingSignal sets BayesConfig.MissingGamma and MissingDelta, γ
// (finite, ≥ 0) and δ (finite, in [0, 1]) of the Bayes model's
// missing-signal bias γ·(δ − L)₊², L the product of the chain's edge
// association lower bounds (see Bayes). γ = 0 turns it off. Default
// DefaultMissingGamma, DefaultMissingDelta. Bayes model only.
func WithMissingSignal(gamma, delta float64) Option {
	return option{"WithMissingSignal", func(c *BayesConfig) { c.MissingGamma, c.MissingDelta = gamma, delta }, nil}
}

// WithHopAlpha sets BayesConfig.HopAlpha (finite, > 0), the Dirichlet
// pseudo-count of the rows of the pair tables a chain is computed from
// (its hops, the tables its separation check compares them with, and the
// tables of the parallel answer): each row's posterior mean is
// (N[r][v] + a)/(n_r + K·a) and its covariance factor 1/(n_r + K·a + 1).
// The direct estimate, the marginals and the bounds keep α (WithAlpha).
// Default DefaultHopAlpha. Bayes model only.
func WithHopAlpha(a float64) Option {
	return option{"WithHopAlpha", func(c *BayesConfig) { c.HopAlpha = a }, nil}
}

// WithPriorStrength sets BayesConfig.PriorStrength, A (finite, > 0), the
// total pseudo-count of the Bayes model's empirical-Bayes prior of a direct
// estimate: Dirichlet(A·m̂) with m̂ the target's smoothed marginal (see
// Bayes, "Direct estimate"). Default DefaultPriorStrength. Without marginals
// in the statistics the prior is the symmetric Dirichlet(α) and A is not
// used. Bayes model only.
func WithPriorStrength(a float64) Option {
	return option{"WithPriorStrength", func(c *BayesConfig) { c.PriorStrength = a }, nil}
}

// WithUnseenSpread sets BayesConfig.UnseenSpread, η (finite, ≥ 0) of the
// Bayes model's unobserved-pair error E0 = η·(1 − P̂(s = u))²·(1 − 1/K_t)
// (see Bayes, "Direct estimate"). Default DefaultUnseenSpread. Bayes model
// only.
func WithUnseenSpread(eta float64) Option {
	return option{"WithUnseenSpread", func(c *BayesConfig) { c.UnseenSpread = eta }, nil}
}

// WithSeparation sets BayesConfig.Separation, λ (finite, ≥ 0), the weight of
// the Bayes model's separation bias: λ·Σ_k max(0, D_k − V_k) over the
// bridges whose two chain neighbours were observed together (see Bayes,
// "Separation check"). 0 turns the check off. Default DefaultSeparation.
// Bayes model only.
func WithSeparation(lambda float64) Option {
	return option{"WithSeparation", func(c *BayesConfig) { c.Separation = lambda }, nil}
}

// WithInfluence sets BayesConfig.Influence, κ (finite, ≥ 0) of the Bayes
// model's influence bound: the error of a pair never observed together is
// at most κ·2·B², B the two-hop influence of the observed value (see Bayes,
// "Influence bound"). 0 turns the bound off. Default DefaultInfluence. Bayes
// model only.
func WithInfluence(kappa float64) Option {
	return option{"WithInfluence", func(c *BayesConfig) { c.Influence = kappa }, nil}
}

// WithNoiseK sets BayesConfig.NoiseK, k (finite, ≥ 0) of the Bayes model's
// gain margin k·√2·(Var_chain + Var_ref) (see Bayes.GainMargin): a chain
// must beat the direct answer by more than k standard errors of its bias
// estimate. 0 turns the margin off. Default DefaultNoiseK. Bayes model only.
func WithNoiseK(k float64) Option {
	return option{"WithNoiseK", func(c *BayesConfig) { c.NoiseK = k }, nil}
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

// WithVariance sets BayesConfig.Variance, the chain-variance method of the
// Bayes model (DeltaMethod by default). Bayes model only.
func WithVariance(v Variance) Option {
	return option{"WithVariance", func(c *BayesConfig) { c.Variance = v }, nil}
}

// Apply sets the fields opts configure on a copy of c and validates the
// result. It fails with ErrBadOption on an option that does not apply to the
// Bayes model or on a value outside its domain.
func (c BayesConfig) Apply(opts ...Option) (BayesConfig, error) {
	for _, o := range opts {
		if o == nil {
			continue
		}
		if err := o.bayes(&c); err != nil {
			return BayesConfig{}, err
		}
	}
	return c, c.Validate()
}

// Apply sets the fields opts configure on a copy of c and validates the
// result. It fails with ErrBadOption on an option that does not apply to the
// Support model or on a value outside its domain.
func (c SupportConfig) Apply(opts ...Option) (SupportConfig, error) {
	for _, o := range opts {
		if o == nil {
			continue
		}
		if err := o.support(&c); err != nil {
			return SupportConfig{}, err
		}
	}
	return c, c.Validate()
}
