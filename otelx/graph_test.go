package otelx

import (
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/testgraph"
)

// The in-memory graphs of these tests are internal/testgraph's, shared with
// the router and scorer tests.

// greenhouseGraph: testgraph's greenhouse (a north vent drives zone-1
// humidity, which drives the tomato bed; the vent and the bed are never
// observed together, and a pump links them only weakly) with a sensor that
// is observed often with the bed and the humidity but says little.
func greenhouseGraph() *testgraph.Graph {
	g := testgraph.GreenhouseBuilder(0xfeed)
	bed, hum := graphidx.EntityID(0), graphidx.EntityID(1)
	sensor := g.Entity("sensor-9", "ok", "fault")
	g.Pair(sensor, bed, 300, 310, 2, 3)
	g.Pair(sensor, hum, 280, 330, 3, 2)
	return g.Build()
}

// randomGraph: n crop beds with 2–3 values, each pair linked with
// probability p, random count tables (seeded).
func randomGraph(seed uint64, n int, p float64) *testgraph.Graph {
	return testgraph.Random(seed, n, p, "bed%03d")
}
