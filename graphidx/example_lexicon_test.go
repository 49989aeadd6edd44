package graphidx_test

import (
	"fmt"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
)

// A lexicon maps surface forms to entity ids; a third column states a value
// of the entity. Link finds the mentions in a prompt: case-insensitive, on
// word boundaries, leftmost-longest ("zone 2 vent" wins over "zone 2"). The
// colliding last line is counted, and the first listed target kept.
func ExampleLexicon_Link() {
	lex, err := graphidx.ParseLexicon(strings.NewReader(`# surface form	entity id	value
moisture probe	bed-11/moisture-probe
probe reads wet	bed-11/moisture-probe	reads-wet
leaf wilt	bed-10/leaf-wilt
Zone 2	zone-2
zone 2 vent	zone-2/vent
Zone 2 Vent	zone-2/vent-motor
`), "lexicon.tsv")
	if err != nil {
		fmt.Println(err)
		return
	}
	prompt := "If the probe reads wet, will leaf wilt follow near the ZONE 2 VENT?"
	mentions, err := lex.Link(prompt)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, m := range mentions {
		fmt.Printf("%d-%d %q %s", m.Start, m.End, m.Surface, m.Entity)
		if m.HasValue {
			fmt.Printf(" = %s", m.Value)
		}
		fmt.Println()
	}
	st := lex.Stats()
	fmt.Printf("%d forms, %d entities, %d collision: %v\n", st.Forms, st.Entities, st.Collisions, st.FirstCollision)
	fmt.Println(lex.DisplayName("zone-2"))
	// Output:
	// 7-22 "probe reads wet" bed-11/moisture-probe = reads-wet
	// 29-38 "leaf wilt" bed-10/leaf-wilt
	// 55-66 "ZONE 2 VENT" zone-2/vent
	// 5 forms, 4 entities, 1 collision: lexicon.tsv:7: surface: duplicate-surface: "Zone 2 Vent" names "zone-2/vent-motor" here but was listed earlier for "zone-2/vent", which is kept
	// Zone 2
}

// A Matcher links many texts against one lexicon, reusing its memory, and
// reports entities and values by number, as the text corpus reader
// aggregates them; EntityName and ValueName give the names back.
func ExampleLexicon_NewMatcher() {
	lex, err := graphidx.ParseLexicon(strings.NewReader("moisture probe\tprobe\nprobe reads wet\tprobe\treads-wet\nvent 3\tvent3\n"), "lexicon.tsv")
	if err != nil {
		fmt.Println(err)
		return
	}
	m := lex.NewMatcher()
	for _, text := range []string{"The probe reads wet near vent 3.", "Vent 3 and the moisture probe."} {
		for _, f := range m.Find([]byte(text)) {
			fmt.Printf("%q entity %d %s valued=%t", text[f.Start:f.End], f.Entity, lex.EntityName(f.Entity), lex.Valued(f.Entity))
			if f.HasValue {
				fmt.Printf(" value %s", lex.ValueName(f.Value))
			}
			fmt.Println()
		}
	}
	// Output:
	// "probe reads wet" entity 0 probe valued=true value reads-wet
	// "vent 3" entity 1 vent3 valued=false
	// "Vent 3" entity 1 vent3 valued=false
	// "moisture probe" entity 0 probe valued=true
}
