// Package ope estimates, from logged routing decisions, the value a
// different routing policy would have had: off-policy evaluation of
// threshold policies "chain when score ≥ τ and the chain has at most H
// bridges, else direct".
//
// Each logged sample i carries the logged mode a_i, the propensity
// p_i = π0(a_i | x_i) with which the logging policy chose it, a sampling
// weight w_i = 1/(trace sampling ratio), the reward r_i (outcome score, or
// score − cost) and the cost c_i. With the target mode t_i = π(x_i), the
// match m_i = 1[t_i = a_i] and the logging probability of the target mode
// π0(t_i | x_i) (p_i when they match, 1 − p_i otherwise, modes being
// binary):
//
//	IPS    V = Σ w_i m_i r_i / p_i  /  Σ w_i
//	SNIPS  V = Σ w_i m_i r_i / p_i  /  Σ w_i m_i / p_i
//	DR     V = Σ w_i [ q̂(x_i, t_i) + m_i (r_i − q̂(x_i, a_i)) / p_i ]  /  Σ w_i
//
// (Horvitz & Thompson 1952; Swaminathan & Joachims 2015 for SNIPS; Dudík,
// Langford & Li 2011 for DR). The outcome model q̂ is a weighted binned
// regression of the reward on the routing score, fitted per mode on the
// logs (see FitBinned) and cross-fitted over 5 interleaved folds by default,
// so that no sample's outcome enters its own correction (WithCrossFit). The effective sample size is Kish's
// (Σ v_i)² / Σ v_i² with v_i = w_i m_i / p_i.
//
// Intervals are percentile intervals of a Poisson bootstrap (each sample
// drawn Poisson(1) times per replicate, common practice; Hanley &
// MacGibbon 2006), the outcome model held fixed.
//
// With WithReference(τ0, H0) every result also carries Versus: its value
// minus the reference policy's, per estimator, with intervals from the
// paired differences over the same bootstrap replicates, so that the noise
// the two policies share cancels. `hopwise tune` recommends leaving the
// current setting only when that interval excludes zero.
//
// A policy is not estimated — its result says why — when some sample would
// need a mode the logging policy took with probability below the floor (a
// deterministic logger never supports the other mode), or when its
// effective sample size is below the minimum. Missing propensities make
// the whole evaluation fail with ErrMissingPropensity.
//
// Sweep evaluates a whole grid of (τ, H) in O(reps·(n + G·H)) time by
// bucketing each sample at the largest τ and smallest H for which the
// target policy chains, then taking 2-D suffix/prefix sums.
//
// Concurrency: the estimators keep no state between calls and share only
// read-only tables computed at package initialisation, so concurrent calls
// are safe as long as no caller mutates the samples another call reads.
package ope
