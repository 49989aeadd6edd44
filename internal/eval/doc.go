// Package eval is the evaluation harness of hopwise: it measures the scorer
// and the router against exact truth on synthetic worlds (DESIGN.md §7,
// issue 3). The CLI's `hopwise eval` and the demo use it.
package eval
