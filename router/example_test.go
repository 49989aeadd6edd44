package router_test

import (
	"context"
	"fmt"
	"log"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// tableSource is a hand-filled graphidx.Source.
type tableSource struct {
	contexts uint64
	ents     []graphidx.EntityRecord
	pairs    []graphidx.PairRecord
}

func (s *tableSource) Contexts() uint64                  { return s.contexts }
func (s *tableSource) Entities() []graphidx.EntityRecord { return s.ents }
func (s *tableSource) Pairs(fn func(graphidx.PairRecord) error) error {
	for _, p := range s.pairs {
		if err := fn(p); err != nil {
			return err
		}
	}
	return nil
}

// greenhouseIndex writes and opens a small locality index: 400 simulated
// sensor logs that observe a vent with the zone humidity, or the zone
// humidity with a crop bed, but never the vent with the bed.
func greenhouseIndex(dir string) *graphidx.Index {
	rng := rand.New(rand.NewPCG(42, 7))
	// ids by name: 0 bed-tomato {dry, wet}, 1 humidity-zone1 {high, low},
	// 2 vent-north {closed, open}
	bedHum := make([]uint32, 4)  // [bed][hum]
	humVent := make([]uint32, 4) // [hum][vent]
	marg := [3][]uint64{make([]uint64, 2), make([]uint64, 2), make([]uint64, 2)}
	for i := 0; i < 400; i++ {
		vent := rng.IntN(2) // 1 = open
		hum := 0            // 0 = high
		if (vent == 1) != (rng.Float64() < 0.1) {
			hum = 1
		}
		bed := 1 // 1 = wet
		if (hum == 1) != (rng.Float64() < 0.1) {
			bed = 0
		}
		marg[1][hum]++
		if i%2 == 0 {
			humVent[hum*2+vent]++
			marg[2][vent]++
		} else {
			bedHum[bed*2+hum]++
			marg[0][bed]++
		}
	}
	src := &tableSource{
		contexts: 400,
		ents: []graphidx.EntityRecord{
			{Name: "bed-tomato", Values: []string{"dry", "wet"}, Marginal: marg[0]},
			{Name: "humidity-zone1", Values: []string{"high", "low"}, Marginal: marg[1]},
			{Name: "vent-north", Values: []string{"closed", "open"}, Marginal: marg[2]},
		},
		pairs: []graphidx.PairRecord{{A: 0, B: 1, Counts: bedHum}, {A: 1, B: 2, Counts: humVent}},
	}
	path := filepath.Join(dir, "greenhouse.hwx")
	if err := graphidx.WriteFile(path, src); err != nil {
		log.Fatal(err)
	}
	ix, err := graphidx.Open(path)
	if err != nil {
		log.Fatal(err)
	}
	return ix
}

func ExampleRouter_Decide() {
	dir, _ := os.MkdirTemp("", "hopwise-example")
	defer os.RemoveAll(dir)

	r, err := router.New(greenhouseIndex(dir)) // the router owns (and closes) the index
	if err != nil {
		log.Fatal(err)
	}
	defer r.Close()

	d, err := r.Decide(context.Background(), router.Query{From: "vent-north", Value: "open", To: "bed-tomato"})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println("mode:", d.Mode, "via", d.Bridges)
	fmt.Println("reason:", d.Reason.Code)
	fmt.Printf("direct support %d, error %.4f\n", d.Direct.Support, d.Direct.Err)
	fmt.Printf("chain error %.4f, gain %.4f\n", d.Chain.Err, d.Gain)
	for i, v := range d.Values {
		fmt.Printf("P(bed-tomato=%s) = %.3f\n", v, d.Estimate[i])
	}
	// Output:
	// mode: chain via [humidity-zone1]
	// reason: gain-above-threshold
	// direct support 0, error 0.0885
	// chain error 0.0029, gain 0.0856
	// P(bed-tomato=dry) = 0.773
	// P(bed-tomato=wet) = 0.227
}

func ExampleRouter_Decide_errors() {
	dir, _ := os.MkdirTemp("", "hopwise-example")
	defer os.RemoveAll(dir)
	r, err := router.New(greenhouseIndex(dir))
	if err != nil {
		log.Fatal(err)
	}
	defer r.Close()
	ctx := context.Background()

	_, err = r.Decide(ctx, router.Query{From: "vent-south", Value: "open", To: "bed-tomato"})
	fmt.Println(err)

	// With a fallback, unknown endpoints get a decision instead of an error.
	if err := r.Reconfigure(router.WithFallback(router.ModeDirect)); err != nil {
		log.Fatal(err)
	}
	d, _ := r.Decide(ctx, router.Query{From: "vent-south", Value: "open", To: "bed-tomato"})
	fmt.Println(d.Mode, d.Reason.Code)
	// Output:
	// router: unknown entity: "vent-south"
	// direct unknown-entity-fallback
}

func ExampleWithArms() {
	dir, _ := os.MkdirTemp("", "hopwise-example")
	defer os.RemoveAll(dir)
	r, err := router.New(greenhouseIndex(dir),
		router.WithArms(router.ArmWeight{Arm: router.ArmRouted, Weight: 1}, router.ArmWeight{Arm: router.ArmDirectOnly, Weight: 1}),
		router.WithExploration(0.1, "spring-trial"))
	if err != nil {
		log.Fatal(err)
	}
	defer r.Close()
	counts := map[string]int{}
	for i := 0; i < 1000; i++ {
		d, err := r.Decide(context.Background(), router.Query{
			From: "vent-north", Value: "open", To: "bed-tomato", Key: fmt.Sprint("grower-", i)})
		if err != nil {
			log.Fatal(err)
		}
		counts[d.Arm+"/"+d.Mode.String()]++
	}
	fmt.Println(counts)
	// Output:
	// map[direct-only/direct:501 routed/chain:449 routed/direct:50]
}

func ExampleParseConfig() {
	c, err := router.ParseConfig(strings.NewReader(`{
  "gain_threshold": 0.002,
  "max_bridges": 2,
  "unknown_entity": "direct",
  "arms": [{"arm": "routed", "weight": 0.9}, {"arm": "direct-only", "weight": 0.1}]
}`), "route.json")
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(c.GainThreshold, c.MaxBridges, c.Beam, c.Fallback, len(c.Arms))
	opts, err := c.Options() // for router.New or Router.Reconfigure
	fmt.Println(len(opts) > 0, err)

	_, err = router.ParseConfig(strings.NewReader(`{"beam": 0}`), "route.json")
	fmt.Println(err)
	// Output:
	// 0.002 2 64 direct 2
	// true <nil>
	// route.json: router: bad option: field "beam" (WithBeam): B must be in [1, 1048576], got 0
}

// ExampleWithFanOut sets the search bounds and reads what a decision says
// about them: on this three-entity index a beam and fan-out of 8 hold every
// neighbour, so no bound cut the search and the chain is the exact optimum
// over all chains of at most three bridges.
func ExampleWithFanOut() {
	dir, _ := os.MkdirTemp("", "hopwise-example")
	defer os.RemoveAll(dir)
	ix := greenhouseIndex(dir)
	r, err := router.New(ix, router.WithBeam(8), router.WithFanOut(8))
	if err != nil {
		log.Fatal(err)
	}
	defer r.Close()
	q := router.Query{From: "vent-north", Value: "open", To: "bed-tomato"}
	d, err := r.Decide(context.Background(), q)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("via %v, truncated %v, cut %q\n", d.Bridges, d.Truncated, d.Cut)
	// Output:
	// via [humidity-zone1], truncated false, cut ""
}
