package graphidx_test

import (
	"context"
	"fmt"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
)

// Compile counts a small greenhouse corpus; the bad last line is skipped
// and counted, not dropped silently.
func ExampleCompile() {
	text := `{"id":"c1","obs":{"vent3":"open","zone2":"humid"}}
{"id":"c2","obs":{"vent3":"closed","zone2":"humid"}}
{"id":"c3","obs":{"vent3":"open","zone2":"dry"}}
{"id":"c4","ents":["pump1","bed4"]}
not a context
`
	r := corpus.NewJSONLReader(strings.NewReader(text), "greenhouse.jsonl")
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
