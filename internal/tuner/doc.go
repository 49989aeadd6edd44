// Package tuner chooses the router's gain threshold τ and maximum number
// of bridges H from logged decisions: the analysis behind `hopwise tune`.
//
// Run takes decisions joined with outcomes (internal/traceset), keeps those
// that follow the routed policy (the tuned arm, or no arm; reasons
// gain-above/below-threshold, no-chain, explore), and evaluates every
// policy "chain when score ≥ τ and the chain has at most H bridges, else
// direct" of a grid by off-policy evaluation (internal/ope: IPS, SNIPS and
// cross-fitted doubly robust, each with a percentile bootstrap interval),
// each compared with the current setting on paired bootstrap replicates.
//
// The decision rule: the best supported policy by the chosen estimator is
// recommended only when its improvement over the current setting has an
// interval that excludes zero (Decision Change); otherwise the current
// setting is kept and the report says why (Decision Keep); when no policy
// has an estimate there is nothing to recommend (Decision None).
//
// The configuration to deploy (Report.Config) is the current one — the
// --base file, or, without one, the router defaults with the exploration
// rate ε and the A/B arms read off the logged decisions — with τ and H
// replaced. WriteConfig writes only the fields that differ from the router
// defaults (plus τ, H and ε), so that a default the router refits later is
// not frozen into the file, and a value the next tune needs (ε, arms) is
// never lost.
//
// Cost O(n log n + reps·(n + |τ|·|H|)) for n decisions (see ope.Sweep).
//
// Concurrency: the functions keep no state between calls and share only
// read-only tables, so concurrent calls are safe; WriteConfig writes its
// file atomically (a temporary file renamed into place), so two concurrent
// writes to one path leave one whole file, the last renamed.
package tuner
