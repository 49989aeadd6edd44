// Package plan turns a routing decision into a reasoning plan and renders
// it as prompt text.
//
// A Plan says how a model should answer one question: directly, or through
// the decision's bridges in order. For a chain each Step names one bridge
// (its entity id and a display name from a Namer) and, when the bridge has
// values, the value the chain expects there with its probability: the
// argmax of the intermediate distribution x_k = e_uᵀ M_1 … M_k that
// router.(*Router).ChainDists computes (a separate call, so the decision
// path stays as it is). Presence-only bridges and targets, whose single
// value is certain by construction, carry no value (HasValue false).
//
// A Renderer executes one of two text/template templates over the Plan: the
// chain template (work through the steps in order, then answer) or the
// direct template (answer without step-by-step working, which saves the
// tokens of the reasoning). Both defaults can be replaced; templates that do
// not parse are errors from NewRenderer, templates that fail to execute are
// errors from Render, and neither panics. docs/PLANS.md lists the fields
// and functions a template may use.
//
// # Concurrency
//
// Plans are plain values. A *Renderer is immutable after NewRenderer and
// safe for concurrent use (text/template's Execute is).
package plan
