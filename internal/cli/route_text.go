package cli

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"slices"
	"strconv"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/router/plan"
)

// textPlanner holds what `route --text` and text lines of --queries need:
// the lexicon (for linking and display names) and the plan renderer.
type textPlanner struct {
	lex  *graphidx.Lexicon
	rend *plan.Renderer
	cfg  router.Config // for the readable account
}

// newTextPlanner loads the lexicon and the plan templates (the defaults
// unless chainTmpl or directTmpl name a file).
func newTextPlanner(lexicon, chainTmpl, directTmpl string, cfg router.Config) (*textPlanner, error) {
	lex, err := graphidx.LoadLexicon(lexicon)
	if err != nil {
		return nil, fmt.Errorf("route: --lexicon: %w", err)
	}
	var opts []plan.RenderOption
	for _, t := range []struct {
		flag, path string
		opt        func(string) plan.RenderOption
	}{{"--chain-template", chainTmpl, plan.WithChainTemplate}, {"--direct-template", directTmpl, plan.WithDirectTemplate}} {
		if t.path == "" {
			continue
		}
		b, err := os.ReadFile(t.path)
		if err != nil {
			return nil, fmt.Errorf("route: %s: %w", t.flag, err)
		}
		// Checked alone first, so the error names the flag and the file.
		if _, err := plan.NewRenderer(t.opt(string(b))); err != nil {
			return nil, fmt.Errorf("route: %s %s: %w", t.flag, t.path, err)
		}
		opts = append(opts, t.opt(string(b)))
	}
	rend, err := plan.NewRenderer(opts...)
	if err != nil {
		return nil, fmt.Errorf("route: %w", err)
	}
	return &textPlanner{lex: lex, rend: rend, cfg: cfg}, nil
}

// mentionJSON is one linked mention in route's JSON.
type mentionJSON struct {
	Entity  string `json:"entity"`
	Value   string `json:"value,omitempty"`
	Surface string `json:"surface"`
	Start   int    `json:"start"`
	End     int    `json:"end"`
}

// textDecisionJSON is one decided query of a text: the decision view, the
// reasoning plan and the plan rendered as prompt text.
type textDecisionJSON struct {
	router.View
	Plan   plan.Plan `json:"plan"`
	Prompt string    `json:"prompt"`
}

// textLineJSON is the JSON of one text: `route --text --json`, or one text
// line of --queries (then with its id).
type textLineJSON struct {
	ID           *string            `json:"id,omitempty"`
	Text         string             `json:"text"`
	PresenceOnly bool               `json:"presence_only"`
	Mentions     []mentionJSON      `json:"mentions"`
	Decisions    []textDecisionJSON `json:"decisions"`
	Dropped      int                `json:"dropped"`
	Error        string             `json:"error,omitempty"`
}

// textResult is one text decided and planned.
type textResult struct {
	td    router.TextDecision
	plans []plan.Plan
	texts []string // rendered plans
}

// decide links, decides and plans text. On an error the result still
// holds the mentions found (td.Mentions), for the report.
// Linking, deciding and planning run inside the index's fault guard, like
// every other read of the mapped index (see guardedDecider).
func (tp *textPlanner) decide(ctx context.Context, gd guardedDecider, text, key string, o routeOptions) (res textResult, err error) {
	err = gd.ix.Guard(func() error {
		res, err = tp.decideUnguarded(ctx, gd.r, text, key, o)
		return err
	})
	return res, err
}

func (tp *textPlanner) decideUnguarded(ctx context.Context, r *router.Router, text, key string, o routeOptions) (textResult, error) {
	if o.timeout > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, o.timeout)
		defer cancel()
	}
	var res textResult
	td, err := r.DecideText(ctx, tp.lex, text, router.WithTextKey(key))
	res.td = td
	if errors.Is(err, router.ErrNoEvidence) && tp.lex.Stats().ValuedForms == 0 {
		err = fmt.Errorf("%w; the lexicon has no form that states a value (a third column, e.g. %s), so on this valued index no text can give evidence",
			err, valuedFormExample(r, td.Mentions))
	}
	if err != nil {
		return res, err
	}
	for i, d := range td.Decisions {
		p, err := plan.Build(ctx, r, td.Queries[i].Query, d, tp.lex)
		if err != nil {
			return res, fmt.Errorf("plan of query %d: %w", i+1, err)
		}
		s, err := tp.rend.Render(p)
		if err != nil {
			return res, err
		}
		res.plans = append(res.plans, p)
		res.texts = append(res.texts, s)
	}
	return res, nil
}

// valuedFormExample is a lexicon line stating a value, for the first
// mentioned entity with a value in the index, or a generic line.
func valuedFormExample(r *router.Router, ms []graphidx.Mention) string {
	for _, m := range ms {
		if vs, err := r.EntityValues(m.Entity); err == nil && len(vs) > 0 {
			return strconv.Quote(m.Surface + " is " + vs[0] + "<TAB>" + m.Entity + "<TAB>" + vs[0])
		}
	}
	return `"surface form<TAB>entity id<TAB>value"`
}

func (tp *textPlanner) toJSON(id *string, text string, res textResult, m router.ErrorMeasure, err error) textLineJSON {
	l := textLineJSON{ID: id, Text: text, PresenceOnly: res.td.PresenceOnly, Dropped: res.td.Dropped,
		Mentions: make([]mentionJSON, 0, len(res.td.Mentions)), Decisions: []textDecisionJSON{}}
	for _, mn := range res.td.Mentions {
		mj := mentionJSON{Entity: mn.Entity, Surface: mn.Surface, Start: mn.Start, End: mn.End}
		if mn.HasValue {
			mj.Value = mn.Value
		}
		l.Mentions = append(l.Mentions, mj)
	}
	if err != nil {
		l.Error = err.Error()
		return l
	}
	for i, d := range res.td.Decisions {
		l.Decisions = append(l.Decisions, textDecisionJSON{View: router.NewView(res.td.Queries[i].Query, d, m), Plan: res.plans[i], Prompt: res.texts[i]})
	}
	return l
}

// runSingle is `route --text`: the readable account, or with --json one
// JSON object.
func (tp *textPlanner) runSingle(ctx context.Context, gd guardedDecider, out io.Writer, o routeOptions) error {
	r := gd.r
	res, err := tp.decide(ctx, gd, o.text, o.key, o)
	if err == nil {
		err = gd.ix.CheckFile()
	}
	if o.json {
		b, merr := json.Marshal(tp.toJSON(nil, o.text, res, r.ErrorMeasure(), err))
		if merr != nil {
			return merr
		}
		if _, werr := out.Write(append(b, '\n')); werr != nil {
			return werr
		}
	} else if werr := tp.explain(out, r, res, o); werr != nil {
		return werr
	}
	if err != nil {
		if !o.json {
			fmt.Fprintf(out, "error      %v\n", err)
		}
		if errors.Is(err, graphidx.ErrFileChanged) {
			return err
		}
		return &ExitError{Code: 2, Err: err}
	}
	return nil
}

// batchLine decides one text line of --queries (line number line) and
// returns its JSON line. A failed text still gets a line, with the mentions
// found and the error (then err is set too, so the batch counts it); only
// a missing lexicon returns no line.
func (tp *textPlanner) batchLine(ctx context.Context, gd guardedDecider, q routeQuery, line int, o routeOptions) ([]byte, error) {
	r := gd.r
	if tp == nil {
		return nil, errors.New(`field "text": a text line needs --lexicon`)
	}
	res, err := tp.decide(ctx, gd, q.Text, q.Key, o)
	if err != nil {
		err = fmt.Errorf("line %d: %w", line, err)
	}
	id := q.ID
	b, merr := json.Marshal(tp.toJSON(&id, q.Text, res, r.ErrorMeasure(), err))
	if merr != nil {
		return nil, merr
	}
	return append(b, '\n'), err
}

// explain prints the mentions, then each query's decision and plan.
func (tp *textPlanner) explain(w io.Writer, r *router.Router, res textResult, o routeOptions) error {
	var b strings.Builder
	fmt.Fprintf(&b, "text       %s\n", strconv.Quote(o.text))
	if len(res.td.Mentions) == 0 {
		b.WriteString("mentions   none\n")
	}
	for i, mn := range res.td.Mentions {
		lead := "mentions  "
		if i > 0 {
			lead = "          "
		}
		fmt.Fprintf(&b, "%s %s → %s", lead, strconv.Quote(mn.Surface), mn.Entity)
		if mn.HasValue {
			fmt.Fprintf(&b, " = %s", mn.Value)
		}
		fmt.Fprintf(&b, "   (bytes %d–%d)\n", mn.Start, mn.End)
	}
	if res.td.PresenceOnly {
		b.WriteString("rule       presence-only index: the first entity mentioned is the evidence (present), the others are targets\n")
	}
	if n := len(res.td.Queries); n > 0 {
		fmt.Fprintf(&b, "queries    %d decided, least pair support first", n)
		if res.td.Dropped > 0 {
			fmt.Fprintf(&b, "; %d more formed and not decided (at most %d are decided per text)", res.td.Dropped, router.DefaultMaxTextQueries)
		}
		b.WriteString("\n")
	}
	if _, err := io.WriteString(w, b.String()); err != nil {
		return err
	}
	for i, d := range res.td.Decisions {
		if i >= len(res.plans) {
			break
		}
		q := res.td.Queries[i]
		fmt.Fprintf(w, "\n── query %d of %d (pair support %d)\n", i+1, len(res.td.Decisions), q.Support)
		rq := routeQuery{From: q.From, Value: q.Value, To: q.To, Key: q.Key}
		if err := explain(w, rq, d, tp.cfg, r.ErrorMeasure()); err != nil {
			return err
		}
		fmt.Fprintf(w, "plan       %s template\n", plan.Template(res.plans[i]))
		for _, line := range strings.Split(strings.TrimRight(res.texts[i], "\n"), "\n") {
			fmt.Fprintf(w, "         │ %s\n", line)
		}
	}
	return nil
}

// knownValues lists the values of entity for an error message.
func knownValues(r *router.Router, entity string) string {
	vs, err := r.EntityValues(entity)
	if err != nil {
		return "no values (" + err.Error() + ")"
	}
	q := make([]string, len(vs))
	for i, v := range vs {
		q[i] = strconv.Quote(v)
	}
	return "values " + strings.Join(q, ", ")
}

func btoi(b bool) int {
	if b {
		return 1
	}
	return 0
}

// decideSingle decides the query of `route --from/--value/--to`. An empty
// value means "present" on a presence-only index (q.Value is set to it)
// and is an error listing the entity's values on a valued one (the caller
// adds them to an unknown value's error, see decideErrorHint).
func decideSingle(ctx context.Context, gd guardedDecider, q *routeQuery) (router.Decision, error) {
	r := gd.r
	if q.Value == "" {
		if !r.PresenceOnly() {
			return router.Decision{}, fmt.Errorf("no value given for %q; it has %s", q.From, knownValues(r, q.From))
		}
		q.Value = graphidx.PresentValue
	}
	return gd.decide(ctx, *q) // an unknown value's error gets the values from decideErrorHint
}

// textKeys are the keys of a text line of --queries.
var textKeys = [...]string{"id", "text", "key"}

// parseRouteLine parses one --queries line: a text line (it has a "text"
// key: {"id","text"} and optionally "key") here, any other line by
// parseQueryLine. A text line is decoded strictly: every key once, string
// values, no other key (a "from", "value" or "to" beside "text" is named),
// nothing after the object, and a non-empty text.
func parseRouteLine(b []byte, line int) (routeQuery, bool, error) {
	var q routeQuery
	if !bytes.Contains(b, []byte(`"text"`)) {
		return parseQueryLine(b, line)
	}
	var raw map[string]json.RawMessage
	if err := json.Unmarshal(b, &raw); err != nil {
		return parseQueryLine(b, line) // it reports the syntax error
	}
	if _, ok := raw["text"]; !ok {
		return parseQueryLine(b, line)
	}
	_, idSet := raw["id"]
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.Token() // '{', checked by Unmarshal above
	seen := map[string]bool{}
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return q, idSet, fmt.Errorf("line %d: %v", line, err)
		}
		key, _ := tok.(string)
		i := slices.Index(textKeys[:], key)
		switch {
		case key == "from" || key == "value" || key == "to":
			return q, idSet, fmt.Errorf(`line %d: field %q: a line has either "text" or "from"/"value"/"to"`, line, key)
		case i < 0:
			return q, idSet, fmt.Errorf("line %d: unknown field %s", line, strconv.Quote(key))
		case seen[key]:
			return q, idSet, fmt.Errorf("line %d: field %q appears twice", line, key)
		}
		seen[key] = true
		var v string
		if err := dec.Decode(&v); err != nil {
			return q, idSet, fmt.Errorf("line %d: field %q: want a string", line, key)
		}
		*[...]*string{&q.ID, &q.Text, &q.Key}[i] = v
	}
	if !seen["id"] {
		return q, idSet, fmt.Errorf(`line %d: missing field "id"`, line)
	}
	if q.Text == "" {
		return q, idSet, fmt.Errorf(`line %d: field "text" is empty`, line)
	}
	return q, idSet, nil
}
