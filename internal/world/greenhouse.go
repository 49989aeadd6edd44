package world

import (
	"fmt"
	"math"
)

// Sizes of the greenhouse scenario.
const (
	GreenhouseZones       = 6  // zone-1 … zone-6
	GreenhouseBedsPerZone = 3  // bed-1 … bed-18, three per zone in order
	GreenhousePumps       = 4  // pump-1 … pump-4
	GreenhouseHeldOut     = 30 // held-out pairs chosen by Greenhouse
)

// greenhouseJitter is the half-width of the seeded uniform perturbation of
// every CPT entry of the greenhouse.
const greenhouseJitter = 0.06

// Greenhouse returns the invented greenhouse of the demo: 119 binary
// variables with human labels, a sparse DAG with locality, CPT entries
// perturbed by ±0.06 from the base values below (seeded), and
// GreenhouseHeldOut held-out pairs chosen by PickHeldOut (MI ≥ 0.01 nats).
//
// Structure (child ← parents; P(second label | parents) in brackets):
//
//	outside/weather        cloudy|sunny             root [0.55]
//	zone-1/air-temp        cool|hot                 ← outside/weather [cloudy .20, sunny .85]
//	zone-z/air-temp, z>1   cool|hot                 ← zone-(z−1)/air-temp [cool .15, hot .85]
//	zone-z/thermometer     reads-cool|reads-hot     ← air-temp [cool .05, hot .95]
//	zone-z/vent-a          closed|open              ← air-temp [cool .10, hot .90]
//	zone-z/vent-b          closed|open              ← air-temp [cool .15, hot .80]
//	zone-z/humidity        high|low                 ← vent-a, vent-b [none open .10, one .60, both .90]
//	zone-z/hygrometer      reads-high|reads-low     ← humidity [high .06, low .93]
//	zone-z/heater          idle|running             ← air-temp [cool .85, hot .05]
//	pump-p                 idle|running             ← air-temp of its home zone [cool .25, hot .85]
//	bed-b/soil-moisture    dry|wet                  ← its pump, its zone's humidity
//	                                                  [idle&low .10, idle&high .35, running&low .80, running&high .95]
//	bed-b/moisture-probe   reads-dry|reads-wet      ← soil-moisture [dry .07, wet .92]
//	bed-b/leaf-wilt        firm|wilted              ← soil-moisture, its zone's air-temp
//	                                                  [wet&cool .05, wet&hot .20, dry&cool .50, dry&hot .90]
//	bed-b/yield            high|low                 ← leaf-wilt [firm .15, wilted .85]
//
// Zone z holds beds 3z−2 … 3z. Warm air drifts down the house, so each
// zone's air depends on the previous zone's. Pumps feed contiguous runs of
// beds that cross zone borders: pump-1 (home zone 1) feeds beds 1–5, pump-2
// (zone 2) beds 6–9, pump-3 (zone 4) beds 10–14, pump-4 (zone 5) beds 15–18.
// So a bed's moisture depends on its zone's air through the vents and on a
// pump shared with a neighbouring zone, while the sensors of one zone are
// many hops from the crop beds of a distant one. Every name and
// number here is invented for this package.
func Greenhouse(seed int64) (*World, error) {
	r := newRand(seed, streamCPT)
	jit := func(p float64) float64 {
		p += (2*r.Float64() - 1) * greenhouseJitter
		return math.Min(0.99, math.Max(0.01, p))
	}
	var vars []Variable
	add := func(name string, labels [2]string, parents []int, pSecond ...float64) int {
		cpt := make([]float64, 0, 2*len(pSecond))
		for _, p := range pSecond {
			q := jit(p)
			cpt = append(cpt, 1-q, q)
		}
		vars = append(vars, Variable{Name: name, Labels: labels[:], Parents: parents, CPT: cpt})
		return len(vars) - 1
	}
	weather := add("outside/weather", [2]string{"cloudy", "sunny"}, nil, 0.55)
	// Pump p is switched by the controller of the zone holding its first bed.
	pumpHome := [GreenhousePumps]int{1, 2, 4, 5}
	firstBed := [GreenhousePumps]int{1, 6, 10, 15}
	pumps := make([]int, GreenhousePumps)
	pumpOf := func(bed int) int { // bed is 1-based
		p := 0
		for p+1 < GreenhousePumps && bed >= firstBed[p+1] {
			p++
		}
		return pumps[p]
	}
	bed := 0
	prevTemp := weather
	for z := 1; z <= GreenhouseZones; z++ {
		zn := fmt.Sprintf("zone-%d/", z)
		var temp int
		if z == 1 {
			temp = add(zn+"air-temp", [2]string{"cool", "hot"}, []int{weather}, 0.20, 0.85)
		} else {
			temp = add(zn+"air-temp", [2]string{"cool", "hot"}, []int{prevTemp}, 0.15, 0.85)
		}
		prevTemp = temp
		for p, home := range pumpHome {
			if home == z {
				pumps[p] = add(fmt.Sprintf("pump-%d", p+1), [2]string{"idle", "running"}, []int{temp}, 0.25, 0.85)
			}
		}
		add(zn+"thermometer", [2]string{"reads-cool", "reads-hot"}, []int{temp}, 0.05, 0.95)
		ventA := add(zn+"vent-a", [2]string{"closed", "open"}, []int{temp}, 0.10, 0.90)
		ventB := add(zn+"vent-b", [2]string{"closed", "open"}, []int{temp}, 0.15, 0.80)
		// Rows (a, b): (closed, closed), (closed, open), (open, closed), (open, open).
		hum := add(zn+"humidity", [2]string{"high", "low"}, []int{ventA, ventB}, 0.10, 0.60, 0.60, 0.90)
		add(zn+"hygrometer", [2]string{"reads-high", "reads-low"}, []int{hum}, 0.06, 0.93)
		add(zn+"heater", [2]string{"idle", "running"}, []int{temp}, 0.85, 0.05)
		for range GreenhouseBedsPerZone {
			bed++
			bn := fmt.Sprintf("bed-%d/", bed)
			// Parents (pump, humidity); rows (idle, high), (idle, low),
			// (running, high), (running, low).
			soil := add(bn+"soil-moisture", [2]string{"dry", "wet"}, []int{pumpOf(bed), hum}, 0.35, 0.10, 0.95, 0.80)
			add(bn+"moisture-probe", [2]string{"reads-dry", "reads-wet"}, []int{soil}, 0.07, 0.92)
			// Parents (soil, temp); rows (dry, cool), (dry, hot), (wet, cool), (wet, hot).
			wilt := add(bn+"leaf-wilt", [2]string{"firm", "wilted"}, []int{soil, temp}, 0.50, 0.90, 0.05, 0.20)
			add(bn+"yield", [2]string{"high", "low"}, []int{wilt}, 0.15, 0.85)
		}
	}
	w, err := New(vars)
	if err != nil {
		return nil, fmt.Errorf("greenhouse: %w", err)
	}
	pairs, err := w.PickHeldOut(GreenhouseHeldOut, 0.01, seed)
	if err != nil {
		return nil, fmt.Errorf("greenhouse: %w", err)
	}
	return w.WithHeldOut(pairs)
}
