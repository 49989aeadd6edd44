package graphidx_test

import (
	"context"
	"fmt"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
)

// Compile counts a small greenhouse corpus; the bad last line is skipped
// and counted, not dropped silently.
func ExampleCompile() {
	corpus := `{"id":"c1","obs":{"vent3":"open","zone2":"humid"}}
{"id":"c2","obs":{"vent3":"closed","zone2":"humid"}}
{"id":"c3","obs":{"vent3":"open","zone2":"dry"}}
{"id":"c4","ents":["pump1","bed4"]}
not a context
`
	r := graphidx.NewJSONLReader(strings.NewReader(corpus), "greenhouse.jsonl")
	c, sum, err := graphidx.Compile(context.Background(), r)
	if err != nil {
		fmt.Println(err)
		return
	}
	defer c.Close()
	fmt.Println(sum.Contexts, "contexts,", sum.Entities, "entities,", sum.Pairs.After, "pairs, skipped", sum.Read.Skipped)
	ents := c.Entities()
	_ = c.Pairs(func(p graphidx.PairRecord) error {
		a, b := ents[p.A], ents[p.B]
		fmt.Printf("%s%v × %s%v: %v\n", a.Name, a.Values, b.Name, b.Values, p.Counts)
		return nil
	})
	// Output:
	// 4 contexts, 4 entities, 2 pairs, skipped map[bad-json:1]
	// bed4[present] × pump1[present]: [1]
	// vent3[closed open] × zone2[dry humid]: [0 1 1 1]
}

// Partials count shards of a corpus independently; merged in any order they
// compile to the same counts as one pass over the whole corpus.
func ExamplePartial() {
	day1, day2 := graphidx.NewPartial(), graphidx.NewPartial()
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
