package world_test

import (
	"context"
	"fmt"
	"os"

	"github.com/hopwise/hopwise/internal/world"
)

// Example builds the AIMA 3rd ed. §14.5 sprinkler network, asks an exact
// query, and writes a tiny corpus of full contexts.
func Example() {
	bern := func(p float64) []float64 { return []float64{1 - p, p} }
	rows := func(ps ...float64) []float64 {
		var out []float64
		for _, p := range ps {
			out = append(out, bern(p)...)
		}
		return out
	}
	tf := []string{"false", "true"}
	w, err := world.New([]world.Variable{
		{Name: "cloudy", Labels: tf, CPT: bern(0.5)},
		{Name: "sprinkler", Labels: tf, Parents: []int{0}, CPT: rows(0.5, 0.1)},
		{Name: "rain", Labels: tf, Parents: []int{0}, CPT: rows(0.2, 0.8)},
		{Name: "wet-grass", Labels: tf, Parents: []int{1, 2}, CPT: rows(0, 0.9, 0.9, 0.99)},
	})
	if err != nil {
		panic(err)
	}
	p, err := w.TrueConditional(1, 1, 2) // P(rain | sprinkler = true)
	if err != nil {
		panic(err)
	}
	fmt.Printf("P(rain | sprinkler) = %.3f\n", p[1])
	full, _ := world.ConditionByName(world.CondFull)
	if _, err := w.WriteCorpus(context.Background(), os.Stdout, 2, full, 1); err != nil {
		panic(err)
	}
	// Output:
	// P(rain | sprinkler) = 0.300
	// {"id":"c1","obs":{"cloudy":"false","rain":"false","sprinkler":"false","wet-grass":"false"}}
	// {"id":"c2","obs":{"cloudy":"true","rain":"true","sprinkler":"false","wet-grass":"true"}}
}

// ExampleGreenhouse shows the demo scenario's held-out pairs, the ideal
// bridges of the farthest one, and the exact answer it should give.
func ExampleGreenhouse() {
	w, err := world.Greenhouse(1)
	if err != nil {
		panic(err)
	}
	fmt.Println(w.NumVars(), "entities,", len(w.HeldOut()), "held-out pairs")
	var h [2]int
	var bridges []int
	for _, p := range w.HeldOut() {
		b, err := w.MinimalSeparatorPath(p[0], p[1])
		if err != nil {
			panic(err)
		}
		if len(b) > len(bridges) {
			h, bridges = p, b
		}
	}
	fmt.Print(w.Name(h[0]))
	for _, b := range bridges {
		fmt.Print(" → ", w.Name(b))
	}
	fmt.Println(" →", w.Name(h[1]))
	truth, err := w.TrueConditional(h[0], 0, h[1])
	if err != nil {
		panic(err)
	}
	chain, err := w.TrueChain(h[0], 0, bridges, h[1])
	if err != nil {
		panic(err)
	}
	fmt.Printf("P(%s=%s | %s=%s): exact %.3f, through the bridges %.3f\n",
		w.Name(h[1]), w.Labels(h[1])[0], w.Name(h[0]), w.Labels(h[0])[0], truth[0], chain[0])
	// Output:
	// 119 entities, 30 held-out pairs
	// zone-2/thermometer → zone-2/air-temp → zone-3/air-temp → zone-4/air-temp → zone-5/air-temp → zone-6/air-temp → zone-6/vent-a
	// P(zone-6/vent-a=closed | zone-2/thermometer=reads-cool): exact 0.570, through the bridges 0.570
}

// ExampleBurglary answers the query of AIMA 3rd ed. §14.4.1 on the
// burglary network: P(Burglary | JohnCalls = true, MaryCalls = true).
func ExampleBurglary() {
	w, err := world.Burglary()
	if err != nil {
		panic(err)
	}
	b, _ := w.Index("Burglary")
	j, _ := w.Index("JohnCalls")
	m, _ := w.Index("MaryCalls")
	p, err := w.Posterior(b, map[int]int{j: 1, m: 1})
	if err != nil {
		panic(err)
	}
	fmt.Printf("P(Burglary | j, m) = <%.3f, %.3f>\n", p[1], p[0])
	// Output: P(Burglary | j, m) = <0.284, 0.716>
}

// ExampleGenerate generates a network of 3-valued variables with at most 3
// parents each, after checking that the edges fit under the cap (0 + 1 + 2 +
// 3·37 = 114 for 40 variables) and that a variable with the most parents has
// a table of acceptable size (3⁴ cells).
func ExampleGenerate() {
	cfg := world.Config{Vars: 40, Edges: 60, Values: 3, MaxParents: 3, CPTAlpha: 0.5, CPTBeta: 0.5}
	fmt.Println("edges possible:", world.MaxEdges(cfg.Vars, cfg.MaxParents))
	fmt.Println("table fits:", world.CPTFits(cfg.Values, cfg.MaxParents))
	w, err := world.Generate(cfg, 1)
	if err != nil {
		panic(err)
	}
	most := 0
	for v := range w.NumVars() {
		most = max(most, len(w.Parents(v)))
	}
	fmt.Println("variables:", w.NumVars(), "values:", w.Card(0), "most parents:", most)
	// Output:
	// edges possible: 114
	// table fits: true
	// variables: 40 values: 3 most parents: 3
}
