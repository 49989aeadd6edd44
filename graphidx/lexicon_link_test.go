package graphidx

import (
	"errors"
	"fmt"
	"strings"
	"testing"
)

func TestLinkSpansAndDisplay(t *testing.T) {
	t.Parallel()
	lex, err := ParseLexicon(strings.NewReader("Zone 2\tzone-2\nzone 2 vent\tzone-2/vent\nPump\tpump-a\n"), "lex.tsv")
	if err != nil {
		t.Fatal(err)
	}
	text := "Is the ZONE 2 VENT open when the pump runs in zone 2?"
	ms, err := lex.Link(text)
	if err != nil {
		t.Fatal(err)
	}
	want := []struct{ ent, surface string }{{"zone-2/vent", "ZONE 2 VENT"}, {"pump-a", "pump"}, {"zone-2", "zone 2"}}
	if len(ms) != len(want) {
		t.Fatalf("got %d mentions %+v, want %d", len(ms), ms, len(want))
	}
	for i, w := range want {
		m := ms[i]
		if m.Entity != w.ent || m.Surface != w.surface || text[m.Start:m.End] != m.Surface || m.HasValue {
			t.Errorf("mention %d = %+v, want %s %q", i, m, w.ent, w.surface)
		}
	}
	if got := lex.DisplayName("zone-2"); got != "Zone 2" {
		t.Errorf("DisplayName(zone-2) = %q, want the first form as written", got)
	}
	if got := lex.DisplayName("nope"); got != "" {
		t.Errorf("DisplayName(nope) = %q, want empty", got)
	}
	if _, err := lex.Link("bad \xff byte"); !errors.Is(err, ErrInvalidText) {
		t.Errorf("invalid UTF-8: err = %v, want ErrInvalidText", err)
	}
	if _, err := lex.Link(strings.Repeat("x", MaxLinkBytes+1)); !errors.Is(err, ErrTextTooLong) {
		t.Errorf("long text: err = %v, want ErrTextTooLong", err)
	}
}

// TestMatcherAgreesWithLink: a Matcher reused over many prompts reports,
// by number, exactly the mentions Link reports by name (spans, entities,
// values), and an entity is Valued exactly when the generated lexicon gives
// it a valued form (every tenth entity).
func TestMatcherAgreesWithLink(t *testing.T) {
	t.Parallel()
	lex, err := ParseLexicon(newGreenhouseLexicon(4000, 10), "gh.tsv")
	if err != nil {
		t.Fatal(err)
	}
	m := lex.NewMatcher()
	total := 0
	for seed := range uint64(40) {
		prompt := greenhousePrompt(seed, 300+int(seed)*97, 100)
		want, err := lex.Link(prompt)
		if err != nil {
			t.Fatal(err)
		}
		got := m.Find([]byte(prompt))
		if len(got) != len(want) {
			t.Fatalf("seed %d: Find %d mentions, Link %d", seed, len(got), len(want))
		}
		for i, f := range got {
			w := want[i]
			name := lex.EntityName(f.Entity)
			val := ""
			if f.HasValue {
				val = lex.ValueName(f.Value)
			} else if f.Value != 0 {
				t.Errorf("seed %d: mention %d has no value but Value %d", seed, i, f.Value)
			}
			if f.Start != w.Start || f.End != w.End || name != w.Entity || f.HasValue != w.HasValue || val != w.Value {
				t.Fatalf("seed %d mention %d: Find %+v (%s=%s), Link %+v", seed, i, f, name, val, w)
			}
			var e, kind int
			if _, err := fmt.Sscanf(name, "bed-%d/", &e); err != nil {
				t.Fatalf("entity %q: %v", name, err)
			}
			for k, kk := range greenhouseKinds {
				if strings.HasSuffix(name, "/"+strings.ReplaceAll(kk, " ", "-")) {
					kind = k
				}
			}
			if idx := e*len(greenhouseKinds) + kind; lex.Valued(f.Entity) != (idx%10 == 0) {
				t.Errorf("%s (entity %d of the generator): Valued %t", name, idx, lex.Valued(f.Entity))
			}
		}
		total += len(got)
	}
	if total < 100 {
		t.Fatalf("only %d mentions in 40 prompts: the check saw too little", total)
	}
}
