package graphidx

import (
	"errors"
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
