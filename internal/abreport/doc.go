// Package abreport compares the A/B arms of a router experiment from its
// traces: the analysis behind `hopwise ab`. Compare takes decisions joined
// with outcomes (internal/traceset) and, with the statistics of
// internal/abstat, reports:
//
//   - per arm: decisions, distinct units, mean outcome score, the success
//     proportion (score ≥ threshold) with its Wilson interval, mean cost and
//     the share answered through a chain;
//   - each arm against the control: the difference of success proportions
//     with the Newcombe hybrid score interval and the pooled two-proportion
//     z-test, the difference of mean scores with the Welch interval and a
//     percentile bootstrap interval (over whole units, with the design
//     effect, when a unit key carries several decisions), and the
//     difference of mean costs with the Welch interval;
//   - the sample-ratio-mismatch chi-square test of units per arm against
//     the configured allocation;
//   - optionally the decisions per arm needed to detect a given success
//     difference with a given power, at the test level 1 − confidence (the
//     level of every interval and of the "significant" verdict).
//
// Decisions are the unit of the Welch, Newcombe and z figures (treated as
// independent); units are what the allocation assigns and what the
// bootstrap resamples when they repeat. Cost O(n log n + reps·n) for n
// joined decisions.
//
// Concurrency: Compare keeps no state between calls and only reads the Set
// it is given, so concurrent calls are safe, also over one Set; the Report
// it returns belongs to the caller.
package abreport
