// Package abstat holds the statistics behind `hopwise ab`: score intervals
// for proportions and their differences, Welch and bootstrap intervals for
// differences of means, the pooled two-proportion z-test, the
// sample-ratio-mismatch chi-square test and a sample-size / power helper.
//
// References:
//   - Wilson score interval: E. B. Wilson (1927) JASA 22:209; as method 3 of
//     R. G. Newcombe (1998) "Two-sided confidence intervals for the single
//     proportion", Stat Med 17:857–872.
//   - Hybrid score interval for a difference of independent proportions:
//     method 10 of R. G. Newcombe (1998) "Interval estimation for the
//     difference between independent proportions", Stat Med 17:873–890.
//   - Pooled two-proportion z statistic: NIST/SEMATECH e-Handbook of
//     Statistical Methods §7.3.3.
//   - Welch (1947) Biometrika 34:28 with the Welch–Satterthwaite degrees of
//     freedom.
//   - Percentile bootstrap: Efron & Tibshirani (1993) An Introduction to the
//     Bootstrap, ch. 13.
//   - Sample size and power for two proportions: the usual normal
//     approximation without continuity correction (common practice; the
//     formula is in Fleiss, Levin & Paik, Statistical Methods for Rates
//     and Proportions, 3rd ed. ch. 4 — chapter from memory).
//
// Quantiles and tail areas come from gonum stat/distuv. All functions are
// pure and safe for concurrent use; the bootstrap takes its own seeded
// *rand.Rand.
package abstat
