package plan_test

import (
	"fmt"
	"os"

	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/router/plan"
)

// names is a Namer over a map (a *graphidx.Lexicon works the same way).
type names map[string]string

func (n names) DisplayName(entity string) string { return n[entity] }

var greenhouse = names{
	"bed-11/moisture-probe": "the moisture probe in bed 11",
	"bed-10/soil-moisture":  "the soil moisture of bed 10",
	"bed-10/leaf-wilt":      "leaf wilt in bed 10",
}

// A chain decision becomes a numbered plan: one step per bridge, with the
// value the chain expects there.
func ExampleRenderer_Render_chain() {
	q := router.Query{From: "bed-11/moisture-probe", Value: "reads-wet", To: "bed-10/leaf-wilt"}
	d := router.Decision{
		Mode:     router.ModeChain,
		Bridges:  []string{"bed-10/soil-moisture"},
		Values:   []string{"firm", "wilted"},
		Estimate: []float64{0.735, 0.265},
		Err:      0.00027,
		Chain:    &router.ChainResult{Bridges: []string{"bed-10/soil-moisture"}, MinSupport: 797},
		Reason:   router.Reason{Code: router.ReasonGainAbove},
	}
	// What (*router.Router).ChainDists returns for this decision.
	dists := []router.BridgeDist{{Entity: "bed-10/soil-moisture", Values: []string{"damp", "dry"}, Dist: []float64{0.81, 0.19}}}
	p, err := plan.FromDists(q, d, dists, router.MeasureSqErrorSum, greenhouse)
	if err != nil {
		fmt.Println(err)
		return
	}
	r, err := plan.NewRenderer()
	if err != nil {
		fmt.Println(err)
		return
	}
	if err := r.Execute(os.Stdout, p); err != nil {
		fmt.Println(err)
	}
	// Output:
	// Work this out in steps before answering.
	// Known: the moisture probe in bed 11: reads-wet.
	// Step 1: work out the state of the soil moisture of bed 10 (the records lean to "damp", 81%).
	// Finally, from those steps, say what leaf wilt in bed 10 is likely to be. Put the answer after the steps.
}

// A direct decision asks for the answer without step-by-step working; a
// replaced template sees the same Plan fields.
func ExampleRenderer_Render_direct() {
	q := router.Query{From: "zone-3/vent-a", Value: "open", To: "zone-3/humidity"}
	d := router.Decision{
		Mode:     router.ModeDirect,
		Values:   []string{"high", "low"},
		Estimate: []float64{0.22, 0.78},
		Err:      0.0004,
		Direct:   router.DirectResult{Support: 1200},
		Reason:   router.Reason{Code: router.ReasonGainBelow},
	}
	p, err := plan.FromDists(q, d, nil, router.MeasureSqErrorSum, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	def, _ := plan.NewRenderer()
	s, err := def.Render(p)
	fmt.Print(s, err, "\n")

	own, err := plan.NewRenderer(plan.WithDirectTemplate(
		"Reply in one line about {{.ToName}} ({{.Support}} records; likely {{.Answer.Value}}, {{percent .Answer.Prob}}).\n"))
	if err != nil {
		fmt.Println(err)
		return
	}
	s, err = own.Render(p)
	fmt.Print(s, err, "\n")
	// Output:
	// Answer directly (known: zone-3/vent-a: open; asked: zone-3/humidity). Skip step-by-step working: give the answer and at most one sentence of reason.
	// <nil>
	// Reply in one line about zone-3/humidity (1200 records; likely low, 78%).
	// <nil>
}
