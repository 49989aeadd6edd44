package cli

import (
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// presenceSource is a presence-only greenhouse: tags observed together.
// ids by name: 0 bed-4, 1 pump-2, 2 vent-north.
type presenceSource struct{}

func (presenceSource) Contexts() uint64 { return 702 }
func (presenceSource) Entities() []graphidx.EntityRecord {
	p := []string{graphidx.PresentValue}
	return []graphidx.EntityRecord{
		{Name: "bed-4", Values: p, Marginal: []uint64{402}},
		{Name: "pump-2", Values: p, Marginal: []uint64{700}},
		{Name: "vent-north", Values: p, Marginal: []uint64{302}},
	}
}
func (presenceSource) Pairs(fn func(graphidx.PairRecord) error) error {
	for _, p := range []graphidx.PairRecord{
		{A: 0, B: 1, Counts: []uint32{400}},
		{A: 0, B: 2, Counts: []uint32{2}},
		{A: 1, B: 2, Counts: []uint32{300}},
	} {
		if err := fn(p); err != nil {
			return err
		}
	}
	return nil
}

func writeTextFixtures(t *testing.T) (valued, presence, lexicon string) {
	t.Helper()
	dir := t.TempDir()
	presence = filepath.Join(dir, "tags.hwx")
	if err := graphidx.WriteFile(presence, presenceSource{}); err != nil {
		t.Fatal(err)
	}
	lexicon = filepath.Join(dir, "lexicon.tsv")
	lx := "north vent\tvent-north\nbed four\tbed-4\npump two\tpump-2\ntomato bed\tbed-tomato\n"
	if err := os.WriteFile(lexicon, []byte(lx), 0o644); err != nil {
		t.Fatal(err)
	}
	return writeRouteIndex(t), presence, lexicon
}

func TestRouteTextPresenceOnly(t *testing.T) {
	t.Parallel()
	_, tags, lex := writeTextFixtures(t)
	text := "The north vent is running. Should we look at bed four, or at pump two first?"
	out, err := routeCLI(t, "route", "--index", tags, "--lexicon", lex, "--text", text)
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	for _, want := range []string{
		`"north vent" → vent-north`, `"bed four" → bed-4`, "rule       presence-only index",
		"queries    2 decided, least pair support first", "(pair support 2)", "decision   chain via pump-2",
		"no distribution: bed-4 records presence only", "error proxy", "not an error of any probability",
		"plan       chain template", "Step 1: work out the state of pump two.",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(out, "present 1.000") || strings.Contains(out, "expected error 0") {
		t.Errorf("presence-only output shows a fake distribution:\n%s", out)
	}
	js, err := routeCLI(t, "route", "--index", tags, "--lexicon", lex, "--text", text, "--json")
	if err != nil {
		t.Fatalf("%v\n%s", err, js)
	}
	var l textLineJSON
	if err := json.Unmarshal([]byte(js), &l); err != nil {
		t.Fatalf("%v: %s", err, js)
	}
	if !l.PresenceOnly || len(l.Mentions) != 3 || len(l.Decisions) != 2 {
		t.Fatalf("json: %s", js)
	}
	d := l.Decisions[0]
	if d.To != "bed-4" || d.Value != graphidx.PresentValue || d.Estimate != nil || d.ErrorProxy == nil || d.SqErrorSum != nil {
		t.Errorf("first decision: %s", js)
	}
	if len(d.Plan.Steps) != 1 || d.Plan.Steps[0].HasValue || d.Plan.Answer.HasValue || d.Plan.ErrorProxy == nil || !strings.Contains(d.Prompt, "pump two") {
		t.Errorf("plan: %+v / %q", d.Plan, d.Prompt)
	}

	// The single-query form no longer needs --value on this index.
	out, err = routeCLI(t, "route", "--index", tags, "--from", "vent-north", "--to", "bed-4")
	if err != nil || !strings.Contains(out, "query      vent-north = present") {
		t.Errorf("no --value: %v\n%s", err, out)
	}
}

func TestRouteTextErrors(t *testing.T) {
	t.Parallel()
	valued, _, lex := writeTextFixtures(t)
	var ee *ExitError
	// A two-column lexicon states no values: nothing observed to reason from.
	out, err := routeCLI(t, "route", "--index", valued, "--lexicon", lex, "--text", "the north vent and the tomato bed")
	if !errors.As(err, &ee) || ee.Code != 2 || !strings.Contains(out, "no mention states a value") || !strings.Contains(out, `"tomato bed" → bed-tomato`) {
		t.Errorf("no evidence: %v\n%s", err, out)
	}
	js, _ := routeCLI(t, "route", "--index", valued, "--lexicon", lex, "--text", "nothing known here", "--json")
	if !strings.Contains(js, `"mentions":[]`) || !strings.Contains(js, `"error":"router: no query: the text names no entity`) {
		t.Errorf("no mentions json: %s", js)
	}
	if _, err := routeCLI(t, "route", "--index", valued, "--text", "x"); err == nil || !strings.Contains(err.Error(), "--text needs --lexicon") {
		t.Errorf("no lexicon: %v", err)
	}
	if _, err := routeCLI(t, "route", "--index", valued, "--text", "x", "--lexicon", lex, "--from", "a", "--to", "b"); err == nil || !strings.Contains(err.Error(), "exactly one of") {
		t.Errorf("two modes: %v", err)
	}
	// A valued index still needs --value, and says which values exist.
	_, err = routeCLI(t, "route", "--index", valued, "--from", "vent-north", "--to", "bed-tomato")
	if !errors.As(err, &ee) || !strings.Contains(err.Error(), `it has values "closed", "open"`) {
		t.Errorf("missing value: %v", err)
	}
	// An unknown value's error lists the entity's values, once.
	_, err = routeCLI(t, "route", "--index", valued, "--from", "vent-north", "--value", "ajar", "--to", "bed-tomato")
	if !errors.As(err, &ee) || !strings.Contains(err.Error(), `has the values "closed" or "open"`) || strings.Count(err.Error(), `"closed"`) != 1 {
		t.Errorf("unknown value: %v", err)
	}
}

func TestRouteBatchTextLines(t *testing.T) {
	t.Parallel()
	valued, tags, lex := writeTextFixtures(t)
	qs := filepath.Join(t.TempDir(), "q.jsonl")
	input := strings.Join([]string{
		`{"id":"t1","text":"With the north vent on, what about bed four?"}`,
		`{"id":"t2","text":"only the north vent"}`,
		`{"id":"t3","text":"north vent","to":"bed-4"}`,
		`{"id":"q4","from":"vent-north","value":"present","to":"bed-4"}`,
		`{"id":"t5","text":"north vent","text":"bed four"}`,
		`{"id":"t6","text":7}`,
		`{"text":"north vent and bed four","key":"u1"}`,
	}, "\n") + "\n"
	if err := os.WriteFile(qs, []byte(input), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := routeCLI(t, "route", "--index", tags, "--lexicon", lex, "--queries", qs)
	var ee *ExitError
	if !errors.As(err, &ee) || ee.Code != 2 {
		t.Fatalf("want exit 2 (bad lines): %v\n%s", err, out)
	}
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	if len(lines) != 7 {
		t.Fatalf("%d lines:\n%s", len(lines), out)
	}
	var t1 textLineJSON
	if err := json.Unmarshal([]byte(lines[0]), &t1); err != nil || *t1.ID != "t1" || len(t1.Decisions) != 1 || t1.Decisions[0].Prompt == "" {
		t.Errorf("t1: %v %s", err, lines[0])
	}
	if !strings.Contains(lines[1], `"error":"line 2: router: no query: every entity mentioned is evidence`) || !strings.Contains(lines[1], `"entity":"vent-north"`) {
		t.Errorf("t2: %s", lines[1])
	}
	if !strings.Contains(lines[2], `line 3: field \"to\": a line has either`) {
		t.Errorf("t3: %s", lines[2])
	}
	if !strings.Contains(lines[3], `"id":"q4"`) || !strings.Contains(lines[3], `"error_proxy"`) {
		t.Errorf("q4 (presence-only index): %s", lines[3])
	}
	for i, want := range map[int]string{4: `field \"text\" appears twice`, 5: `field \"text\": want a string`, 6: `missing field \"id\"`} {
		if !strings.Contains(lines[i], want) {
			t.Errorf("line %d lacks %s: %s", i+1, want, lines[i])
		}
	}
	// Without --lexicon a text line is an error line; the others still run.
	out, _ = routeCLI(t, "route", "--index", valued, "--queries", qs)
	if !strings.Contains(out, `"error":"line 1: field \"text\": a text line needs --lexicon"`) {
		t.Errorf("no lexicon: %s", out)
	}
}

func TestRouteTextTemplates(t *testing.T) {
	t.Parallel()
	_, tags, lex := writeTextFixtures(t)
	dir := t.TempDir()
	chain := filepath.Join(dir, "chain.tmpl")
	os.WriteFile(chain, []byte("Plan for {{.ToName}}:{{range .Steps}} [{{.Name}}]{{end}}\n"), 0o644)
	text := "The north vent is running. What about bed four?"
	out, err := routeCLI(t, "route", "--index", tags, "--lexicon", lex, "--text", text, "--chain-template", chain)
	if err != nil || !strings.Contains(out, "│ Plan for bed four: [pump two]") {
		t.Errorf("own chain template: %v\n%s", err, out)
	}
	bad := filepath.Join(dir, "bad.tmpl")
	os.WriteFile(bad, []byte("{{range .Steps}"), 0o644)
	_, err = routeCLI(t, "route", "--index", tags, "--lexicon", lex, "--text", text, "--direct-template", bad)
	var ee *ExitError
	if err == nil || errors.As(err, &ee) || !strings.Contains(err.Error(), "direct template") || !strings.Contains(err.Error(), "bad.tmpl") {
		t.Errorf("unparsable template: %v", err)
	}
	// A template failing on every plan of a shape fails at load, naming
	// the flag, the file and the shape.
	sevenSteps := filepath.Join(dir, "seven.tmpl")
	os.WriteFile(sevenSteps, []byte("{{index .Steps 7}}"), 0o644)
	_, err = routeCLI(t, "route", "--index", tags, "--lexicon", lex, "--text", text, "--chain-template", sevenSteps)
	if err == nil || errors.As(err, &ee) || !strings.Contains(err.Error(), "route: --chain-template "+sevenSteps+": plan: template") ||
		!strings.Contains(err.Error(), "index out of range: 7 (on a sample valued chain of 1 step)") {
		t.Errorf("template failing on every chain: %v", err)
	}
	// One failing on this plan only fails when it is rendered.
	fails := filepath.Join(dir, "fails.tmpl")
	os.WriteFile(fails, []byte(`{{if eq .From "vent-north"}}{{index .Steps 7}}{{end}}`), 0o644)
	out, err = routeCLI(t, "route", "--index", tags, "--lexicon", lex, "--text", text, "--chain-template", fails)
	if !errors.As(err, &ee) || ee.Code != 2 || !strings.Contains(out, "plan: template") {
		t.Errorf("failing template: %v\n%s", err, out)
	}
	if _, err := routeCLI(t, "route", "--index", tags, "--from", "vent-north", "--to", "bed-4", "--chain-template", chain); err == nil {
		t.Error("--chain-template without --lexicon accepted")
	}
}

// TestRouteTextDroppedNamesTheLimit: the count of queries formed but not
// decided names the limit; it pointed at a "--queries limit", and
// --queries is the batch file flag, which sets no limit.
func TestRouteTextDroppedNamesTheLimit(t *testing.T) {
	t.Parallel()
	var res textResult
	res.td.Queries = make([]router.TextQuery, router.DefaultMaxTextQueries)
	res.td.Dropped = 4
	var b strings.Builder
	if err := (&textPlanner{}).explain(&b, nil, res, routeOptions{text: "t"}); err != nil {
		t.Fatal(err)
	}
	want := "queries    16 decided, least pair support first; 4 more formed and not decided (at most 16 are decided per text)\n"
	if !strings.Contains(b.String(), want) {
		t.Errorf("got\n%s\nwant %q", b.String(), want)
	}
}

// TestRouteTextNoValuedForms: on a valued index, a lexicon without a
// single form that states a value (no third column) can never give a text
// evidence; the error says so and how to fix it, where it only said "no
// mention states a value".
func TestRouteTextNoValuedForms(t *testing.T) {
	t.Parallel()
	valued, _, lex := writeTextFixtures(t)
	out, err := routeCLI(t, "route", "--index", valued, "--lexicon", lex, "--text", "The north vent is open. What about the tomato bed?")
	want := "the lexicon has no form that states a value (a third column, e.g. \"north vent is closed<TAB>vent-north<TAB>closed\"), so on this valued index no text can give evidence"
	if err == nil || !strings.Contains(err.Error(), want) || !strings.Contains(out, want) {
		t.Errorf("error %v\n%s\nwant %q", err, out, want)
	}
}
