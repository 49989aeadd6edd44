package otelx

// Span names.
const (
	// SpanDecide is the name of the span of one routing decision.
	SpanDecide = "hopwise.decide"
	// SpanOutcome is the name of the span that reports a decision's outcome.
	SpanOutcome = "hopwise.outcome"
)

// Attribute keys of decision and outcome spans (namespace hopwise.).
// Entity names and values (Key*From, KeyQueryValue, KeyQueryTo,
// KeyChainBridges) are HMAC-SHA256 hashed when WithEntityHashKey is set.
const (
	KeyQueryKey   = "hopwise.query.key"   // string: the unit key (Decision.Key); joins outcomes
	KeyQueryFrom  = "hopwise.query.from"  // string: observed entity (maybe hashed)
	KeyQueryValue = "hopwise.query.value" // string: observed value (maybe hashed)
	KeyQueryTo    = "hopwise.query.to"    // string: target entity (maybe hashed)

	KeyRouteMode       = "hopwise.route.mode"       // string: "direct" or "chain"
	KeyRouteGain       = "hopwise.route.gain"       // double: err(direct) − err(chain)
	KeyRouteScore      = "hopwise.route.score"      // double: the quantity compared with τ; absent when equal to the gain
	KeyRouteReason     = "hopwise.route.reason"     // string: router reason code
	KeyRouteTruncated  = "hopwise.route.truncated"  // bool: a search bound cut the search
	KeyRoutePropensity = "hopwise.route.propensity" // double: probability of the chosen mode
	KeyRouteExplored   = "hopwise.route.explored"   // bool: exploration overrode the preference
	KeyRouteCached     = "hopwise.route.cached"     // bool: served from the decision cache

	KeyDirectErr     = "hopwise.direct.err"     // double
	KeyDirectSupport = "hopwise.direct.support" // int

	KeyChainErr     = "hopwise.chain.err"     // double; absent without a chain
	KeyChainHops    = "hopwise.chain.hops"    // int: number of bridges
	KeyChainBridges = "hopwise.chain.bridges" // string slice (maybe hashed)
	// KeyChainParallel marks a chain whose two bridges are read side by
	// side (router.ChainResult.Parallel); absent otherwise.
	KeyChainParallel = "hopwise.chain.parallel" // bool, true when present
	// KeyChainMidpoint marks a parallel chain whose estimate is the
	// midpoint with a one-bridge chain (router.ChainResult.Midpoint);
	// absent otherwise.
	KeyChainMidpoint = "hopwise.chain.midpoint" // bool, true when present

	KeyABArm           = "hopwise.ab.arm"           // string; absent without arms
	KeyIndexGeneration = "hopwise.index.generation" // string: 16 hex digits
	KeySamplingRatio   = "hopwise.sampling.ratio"   // double in (0,1]: trace sampling ratio in use
	KeyEntityHash      = "hopwise.entity.hash"      // string: "hmac-sha256" when entities are hashed

	KeyOutcomeScore        = "hopwise.outcome.score"         // double in [0,1]
	KeyOutcomeInputTokens  = "hopwise.outcome.input_tokens"  // int
	KeyOutcomeOutputTokens = "hopwise.outcome.output_tokens" // int
	KeyOutcomeLatencyMs    = "hopwise.outcome.latency_ms"    // double: milliseconds
)

// Metric names.
const (
	// MetricDecisionLatency is the time to decide, by mode, arm and
	// cache result (hopwise.cache.result). Its count is the decision
	// count: decisions by mode and arm, and the decision cache's hits and
	// misses, come from it rather than from counters of their own (one SDK
	// measurement per decision instead of three).
	MetricDecisionLatency = "hopwise.decision.duration" // histogram, seconds, by mode, arm and cache result
	MetricGain            = "hopwise.route.gain"        // histogram of gain, decisions with a chain
	MetricOutcomeScore    = "hopwise.outcome.score"     // histogram of outcome scores, by mode and arm

	// KeyCacheResult labels MetricDecisionLatency: "hit" or "miss"
	// (absent on failed decisions, mode "error").
	KeyCacheResult = "hopwise.cache.result"
)
