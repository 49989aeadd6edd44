package otelx

import "github.com/hopwise/hopwise/internal/testgraph"

// The in-memory graphs of these tests are internal/testgraph's, shared with
// the router and scorer tests.

// greenhouseGraph: a north vent drives zone-1 humidity, which drives the
// tomato bed; the vent and the bed are never observed together, and a pump
// links them only weakly.
func greenhouseGraph() *testgraph.Graph {
	g := testgraph.NewBuilder(0xfeed)
	bed := g.Entity("bed-tomato", "dry", "wet")
	hum := g.Entity("humidity-zone1", "high", "low")
	pump := g.Entity("pump-2", "off", "on")
	vent := g.Entity("vent-north", "closed", "open")
	sensor := g.Entity("sensor-9", "ok", "fault")
	g.Pair(vent, hum, 90, 10, 12, 88)
	g.Pair(hum, bed, 8, 92, 85, 15)
	g.Pair(vent, pump, 2, 1, 1, 2)
	g.Pair(pump, bed, 1, 2, 2, 1)
	g.Pair(sensor, bed, 300, 310, 2, 3)
	g.Pair(sensor, hum, 280, 330, 3, 2)
	return g.Build()
}

// randomGraph: n crop beds with 2–3 values, each pair linked with
// probability p, random count tables (seeded).
func randomGraph(seed uint64, n int, p float64) *testgraph.Graph {
	return testgraph.Random(seed, n, p, "bed%03d")
}
