package counts_test

import (
	"fmt"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/counts"
)

// Partials count shards of a corpus independently; merged in any order they
// compile to the same counts as one pass over the whole corpus.
func ExamplePartial() {
	day1, day2 := counts.NewPartial(), counts.NewPartial()
	_ = day1.Add(graphidx.Context{ID: "a", Obs: []graphidx.Observation{{Entity: "vent3", Value: "open"}, {Entity: "zone2", Value: "dry"}}})
	_ = day2.Add(graphidx.Context{ID: "b", Obs: []graphidx.Observation{{Entity: "vent3", Value: "open"}, {Entity: "zone2", Value: "dry"}}})
	_ = day2.Add(graphidx.Context{ID: "c", Obs: []graphidx.Observation{{Entity: "vent3", Value: "closed"}}})
	day1.Merge(day2)
	src, st, err := day1.Compile(graphidx.WithMinSupport(2))
	if err != nil {
		fmt.Println(err)
		return
	}
	ents := src.Entities()
	fmt.Println(src.Contexts(), "contexts; pairs kept", st.After, "of", st.Before)
	fmt.Println(ents[0].Name, ents[0].Values, ents[0].Marginal)
	_ = src.Pairs(func(p graphidx.PairRecord) error {
		fmt.Println(ents[p.A].Name, ents[p.B].Name, p.Counts)
		return nil
	})
	// Output:
	// 3 contexts; pairs kept 1 of 1
	// vent3 [closed open] [1 2]
	// vent3 zone2 [0 2]
}
