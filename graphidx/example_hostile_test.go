package graphidx_test

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
)

// A name with a terminal escape is printed escaped; clean names are
// returned as they are.
func ExampleEscapeControl() {
	fmt.Println(graphidx.EscapeControl("bed-4\x1b[2J"))
	fmt.Println(graphidx.EscapeControl("zone-1/air-temp"))
	// Output:
	// bed-4\x1b[2J
	// zone-1/air-temp
}

// A context wider than the limit is skipped and counted, naming its line;
// a build that is left with no valid context fails and writes nothing.
func ExampleWithMaxContextEntities() {
	text := `{"id":"c1","ents":["vent-1","bed-2"]}
{"id":"c2","ents":["vent-1","bed-2","pump-3","fan-4"]}
`
	dir, err := os.MkdirTemp("", "example-wide-")
	if err != nil {
		panic(err)
	}
	defer os.RemoveAll(dir)
	out := filepath.Join(dir, "greenhouse.hwx")
	r := corpus.NewJSONLReader(strings.NewReader(text), "greenhouse.jsonl", graphidx.WithMaxContextEntities(3))
	sum, err := graphidx.Build(context.Background(), r, out, graphidx.WithMinValidShare(0))
	fmt.Println(sum.Contexts, sum.Read.Skipped[graphidx.ReasonTooManyEntities], err)
	fmt.Println(sum.Read.FirstBad[graphidx.ReasonTooManyEntities])

	r = corpus.NewJSONLReader(strings.NewReader("\n"), "empty.jsonl")
	_, err = graphidx.Build(context.Background(), r, out)
	fmt.Println(errors.Is(err, graphidx.ErrNoContexts))
	// Output:
	// 1 1 <nil>
	// greenhouse.jsonl:2: ents: too-many-entities: more than 3 entities in one context
	// true
}
