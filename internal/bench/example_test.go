package bench_test

import (
	"fmt"

	"github.com/hopwise/hopwise/internal/bench"
)

// A seeded Chung–Lu locality graph: the same seed always gives the same
// pairs and count tables.
func ExampleNewGraph() {
	g, err := bench.NewGraph(bench.GraphConfig{Entities: 2000, AvgDegree: 8, Seed: 1})
	if err != nil {
		fmt.Println(err)
		return
	}
	hub, deg := g.MaxDegree()
	fmt.Printf("%d entities, %d pairs, mean degree %.1f\n", g.NumEntities(), g.NumPairs(), g.MeanDegree())
	fmt.Printf("hub %s has %d neighbours; values %v\n", g.Name(hub), deg, g.Values(hub))
	// Output:
	// 2000 entities, 7967 pairs, mean degree 8.0
	// hub e0000 has 794 neighbours; values [off on]
}
