package router_test

import (
	"context"
	"fmt"
	"log"
	"os"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/router/plan"
)

// From a prompt to decisions and a plan: link the text (a three-column
// lexicon line states a value), decide each evidence → target pair, and
// render the plan of each decision.
func ExampleRouter_DecideText() {
	dir, _ := os.MkdirTemp("", "hopwise-example")
	defer os.RemoveAll(dir)
	r, err := router.New(greenhouseIndex(dir))
	if err != nil {
		log.Fatal(err)
	}
	defer r.Close()
	lex, err := graphidx.ParseLexicon(strings.NewReader(
		"north vent\tvent-north\n"+
			"north vent is open\tvent-north\topen\n"+
			"north vent is shut\tvent-north\tclosed\n"+
			"zone 1 humidity\thumidity-zone1\n"+
			"tomato bed\tbed-tomato\n"), "lexicon.tsv")
	if err != nil {
		log.Fatal(err)
	}
	ctx := context.Background()
	td, err := r.DecideText(ctx, lex, "The north vent is open since noon. How is the tomato bed doing?")
	if err != nil {
		log.Fatal(err)
	}
	for _, m := range td.Mentions {
		fmt.Printf("mention %q → %s %q\n", m.Surface, m.Entity, m.Value)
	}
	rend, err := plan.NewRenderer()
	if err != nil {
		log.Fatal(err)
	}
	for i, d := range td.Decisions {
		q := td.Queries[i]
		fmt.Printf("%s=%s → %s (pair support %d): %s via %v\n", q.From, q.Value, q.To, q.Support, d.Mode, d.Bridges)
		p, err := plan.Build(ctx, r, q.Query, d, lex)
		if err != nil {
			log.Fatal(err)
		}
		s, err := rend.Render(p)
		if err != nil {
			log.Fatal(err)
		}
		fmt.Print(s)
	}

	// A lexicon value the index does not know is an error listing the
	// values it knows.
	lex2, _ := graphidx.ParseLexicon(strings.NewReader("north vent is ajar\tvent-north\tajar\ntomato bed\tbed-tomato\n"), "l2.tsv")
	_, err = r.DecideText(ctx, lex2, "north vent is ajar; tomato bed?")
	fmt.Println(err)
	// Output:
	// mention "north vent is open" → vent-north "open"
	// mention "tomato bed" → bed-tomato ""
	// vent-north=open → bed-tomato (pair support 0): chain via [humidity-zone1]
	// Work this out in steps before answering.
	// Known: north vent: open.
	// Step 1: work out the state of zone 1 humidity (the records lean to "low", 88%).
	// Finally, from those steps, say what tomato bed is likely to be. Put the answer after the steps.
	// router: query 1 (vent-north = ajar → bed-tomato): router: unknown value: "ajar" for entity "vent-north" (mentioned as "north vent is ajar" at bytes 0–18); the index knows "closed", "open"
}
