package graphidx_test

import (
	"fmt"
	"log"
	"os"
	"path/filepath"

	"github.com/hopwise/hopwise/graphidx"
)

// greenhouse is a tiny hand-counted Source over four contexts:
//
//	c1 pump.a=on  vent.east=open
//	c2 pump.a=on  vent.east=open
//	c3 pump.a=off vent.east=closed
//	c4 pump.a=on  vent.east=closed
type greenhouse struct{}

func (greenhouse) Contexts() uint64 { return 4 }

func (greenhouse) Entities() []graphidx.EntityRecord {
	return []graphidx.EntityRecord{
		{Name: "pump.a", Values: []string{"off", "on"}, Marginal: []uint64{1, 3}},
		{Name: "vent.east", Values: []string{"closed", "open"}, Marginal: []uint64{2, 2}},
	}
}

func (greenhouse) Pairs(fn func(graphidx.PairRecord) error) error {
	// Rows pump.a (off, on), columns vent.east (closed, open).
	return fn(graphidx.PairRecord{A: 0, B: 1, Counts: []uint32{1, 0, 1, 2}})
}

// ExampleOpen writes a locality index and reads a pair's counts back.
func ExampleOpen() {
	dir, err := os.MkdirTemp("", "hopwise-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "greenhouse.hwx")
	if err := graphidx.WriteFile(path, greenhouse{}); err != nil {
		log.Fatal(err)
	}

	x, err := graphidx.Open(path)
	if err != nil {
		log.Fatal(err)
	}
	defer x.Close()

	vent, _ := x.Lookup("vent.east")
	pump, _ := x.Lookup("pump.a")
	open, _ := x.ValueIndex(vent, "open")
	on, _ := x.ValueIndex(pump, "on")
	ps, _ := x.Pair(vent, pump) // stored as (pump, vent); read transposed
	fmt.Println("entities:", x.NumEntities(), "contexts:", x.NumContexts(), "pairs:", x.NumPairs())
	fmt.Println("vent.east=open with pump.a=on:", ps.Count(open, on))
	fmt.Println("vent.east=open with any pump.a:", ps.RowSum(open))
	fmt.Println("support:", ps.Support(), "marginal of pump.a:", x.Marginal(pump))
	// Output:
	// entities: 2 contexts: 4 pairs: 1
	// vent.east=open with pump.a=on: 2
	// vent.east=open with any pump.a: 2
	// support: 4 marginal of pump.a: [1 3]
}

// ExampleIsCorruption shows how a damaged file is reported.
func ExampleIsCorruption() {
	dir, err := os.MkdirTemp("", "hopwise-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "greenhouse.hwx")
	if err := graphidx.WriteFile(path, greenhouse{}); err != nil {
		log.Fatal(err)
	}
	b, _ := os.ReadFile(path)
	b[len(b)-1] ^= 0x10 // damage the last section
	if err := os.WriteFile(path, b, 0o644); err != nil {
		log.Fatal(err)
	}
	_, err = graphidx.Open(path)
	fmt.Println("corruption:", graphidx.IsCorruption(err))

	// A lazy open checks only the header; Verify finds the damage later.
	x, err := graphidx.Open(path, graphidx.WithLazyVerify())
	fmt.Println("lazy open error:", err)
	fmt.Println("verify corruption:", graphidx.IsCorruption(x.Verify()))
	x.Close()
	// Output:
	// corruption: true
	// lazy open error: <nil>
	// verify corruption: true
}

// ExampleIndex_PairBatchHinted looks up the pairs of an entity's ranked
// list with their stored positions, which spares each look-up its binary
// search; the answers are Pair's.
func ExampleIndex_PairBatchHinted() {
	x, done := openGreenhouse()
	defer done()

	vent, _ := x.Lookup("vent.east")
	ranked, hints := x.RankedNeighbors(vent), x.RankedPairHints(vent)
	from := make([]graphidx.EntityID, len(ranked))
	for i := range from {
		from[i] = vent
	}
	out, ok := make([]graphidx.PairStats, len(ranked)), make([]bool, len(ranked))
	x.PairBatchHinted(from, ranked, hints, out, ok)
	for i, nb := range ranked {
		fmt.Println(x.Name(nb), "hint", hints[i], "found", ok[i], "support", out[i].Support())
	}
	// Output:
	// pump.a hint 0 found true support 4
}

// ExampleIndex_PairBatchRanked looks up a pair named by its entry in an
// entity's ranked list (on an index checked at open the stored position is
// used as it is), and the same pair with an entry that does not hold it,
// which is searched instead: the answers are always Pair's.
func ExampleIndex_PairBatchRanked() {
	x, done := openGreenhouse()
	defer done()

	pump, _ := x.Lookup("pump.a")
	vent := x.RankedNeighbors(pump)[0]
	from := []graphidx.EntityID{pump, pump}
	to := []graphidx.EntityID{vent, vent}
	entry := []uint32{0, 5} // entry 5 is past the list
	out, ok := make([]graphidx.PairStats, 2), make([]bool, 2)
	x.PairBatchRanked(from, to, entry, out, ok)
	for i := range out {
		fmt.Println(x.Name(to[i]), "entry", entry[i], "found", ok[i], "support", out[i].Support(), "on", out[i].Count(1, 1))
	}
	// Output:
	// vent.east entry 0 found true support 4 on 2
	// vent.east entry 5 found true support 4 on 2
}

// openGreenhouse writes the greenhouse index to a temporary directory and
// opens it; done closes it and removes the directory.
func openGreenhouse() (x *graphidx.Index, done func()) {
	dir, err := os.MkdirTemp("", "hopwise-example")
	if err != nil {
		log.Fatal(err)
	}
	path := filepath.Join(dir, "greenhouse.hwx")
	if err := graphidx.WriteFile(path, greenhouse{}); err != nil {
		log.Fatal(err)
	}
	if x, err = graphidx.Open(path); err != nil {
		log.Fatal(err)
	}
	return x, func() { x.Close(); os.RemoveAll(dir) }
}
