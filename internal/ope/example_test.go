package ope_test

import (
	"fmt"

	"github.com/hopwise/hopwise/internal/ope"
)

// A logger that explored with ε = 0.5 on four greenhouse queries; the
// candidate policy chains when the score reaches 0.01.
func ExampleEvaluate() {
	samples := []ope.Sample{
		{ID: "bed-1", Logged: ope.Chain, HasChain: true, Score: 0.02, Hops: 1, Propensity: 0.5, Weight: 1, Reward: 1},
		{ID: "bed-2", Logged: ope.Direct, HasChain: true, Score: 0.02, Hops: 1, Propensity: 0.5, Weight: 1, Reward: 0},
		{ID: "bed-3", Logged: ope.Direct, HasChain: true, Score: 0.00, Hops: 2, Propensity: 0.5, Weight: 1, Reward: 1},
		{ID: "bed-4", Logged: ope.Direct, HasChain: false, Propensity: 1, Weight: 1, Reward: 1},
	}
	r, err := ope.Evaluate(samples, 0.01, 3, ope.WithMinESS(1), ope.WithBootstrap(0, 0))
	if err != nil {
		fmt.Println(err)
		return
	}
	// IPS: (1/0.5 + 1/0.5 + 1/1) / 4 = 1.25 (IPS can exceed the reward range);
	// SNIPS: 5 / (2 + 2 + 1) = 1.
	fmt.Printf("IPS %.2f, SNIPS %.2f, ESS %.2f\n", r.IPS.Value.Est, r.SNIPS.Value.Est, r.ESS)
	// Output: IPS 1.25, SNIPS 1.00, ESS 2.78
}
