package world

import (
	"bytes"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

func TestGreenhouseLexiconLinksQuestions(t *testing.T) {
	t.Parallel()
	w, err := Greenhouse(1)
	if err != nil {
		t.Fatal(err)
	}
	lines, err := GreenhouseLexicon(w)
	if err != nil {
		t.Fatal(err)
	}
	nValues := 0
	for v := range w.NumVars() {
		nValues += w.Card(v)
	}
	if len(lines) != w.NumVars()+nValues {
		t.Fatalf("%d lines, want %d", len(lines), w.NumVars()+nValues)
	}
	var buf bytes.Buffer
	if err := WriteLexicon(&buf, lines); err != nil {
		t.Fatal(err)
	}
	lex, err := graphidx.ParseLexicon(&buf, "greenhouse.tsv")
	if err != nil {
		t.Fatal(err)
	}
	if st := lex.Stats(); st.Collisions != 0 || st.Duplicates != 0 || st.Entities != w.NumVars() || st.ValuedForms != nValues {
		t.Fatalf("lexicon stats %+v (first collision %v)", st, st.FirstCollision)
	}
	for _, c := range []struct{ name, display string }{
		{"zone-3/vent-a", "zone 3 vent A"}, {"bed-11/moisture-probe", "bed 11 moisture probe"},
		{"pump-2", "pump 2"}, {"outside/weather", "the weather outside"},
	} {
		if got := lex.DisplayName(c.name); got != c.display {
			t.Errorf("DisplayName(%s) = %q, want %q", c.name, got, c.display)
		}
	}
	// Every question links to its facts (valued) and its target (not).
	tests := []struct {
		obs []Observation
		to  string
	}{
		{[]Observation{{"bed-11/moisture-probe", "reads-wet"}}, "bed-10/leaf-wilt"},
		{[]Observation{{"zone-1/vent-a", "open"}, {"pump-1", "running"}}, "bed-1/yield"},
		{[]Observation{{"outside/weather", "sunny"}}, "zone-6/air-temp"},
		{[]Observation{{"bed-1/leaf-wilt", "wilted"}}, "bed-18/soil-moisture"},
	}
	for style, tc := range tests {
		q, err := GreenhouseQuestion(tc.obs, tc.to, style)
		if err != nil {
			t.Fatal(err)
		}
		ms, err := lex.Link(q)
		if err != nil {
			t.Fatal(err)
		}
		var got []string
		for _, m := range ms {
			got = append(got, m.Entity+"="+m.Value)
		}
		var want []string
		for _, o := range tc.obs {
			want = append(want, o.Entity+"="+o.Value)
		}
		want = append(want, tc.to+"=")
		if strings.Join(got, " ") != strings.Join(want, " ") {
			t.Errorf("%q links to %v, want %v", q, got, want)
		}
	}
	for _, bad := range []string{"zone-3/door", "bed-x", "pump-2/motor", "outside", ""} {
		if _, err := GreenhouseDisplayName(bad); err == nil {
			t.Errorf("%q accepted", bad)
		}
	}
	if _, err := GreenhouseQuestion(nil, "pump-1", 0); err == nil {
		t.Error("question without facts accepted")
	}
	if err := WriteLexicon(&buf, []LexiconLine{{Surface: "a\tb", Entity: "x"}}); err == nil {
		t.Error("tab in a field accepted")
	}
}
