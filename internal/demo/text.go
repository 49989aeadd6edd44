package demo

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/router/plan"
	"github.com/hopwise/hopwise/scorer"
)

// File names of the text stage in Config.Dir.
const (
	LexiconFile   = "lexicon.tsv"
	QuestionsFile = "questions.jsonl"
)

// shownTexts is how many questions the demo takes from text to a plan.
const shownTexts = 2

// TextExample is one free-text question taken through the whole path:
// linked mentions, the queries formed, one decision per query, and the
// reasoning plan of each, rendered.
type TextExample struct {
	ID, Question string
	Mentions     []graphidx.Mention
	PresenceOnly bool
	Queries      []router.TextQuery
	Decisions    []router.Decision
	Plans        []plan.Plan
	Prompts      []string // Plans rendered by the default templates
	Dropped      int
}

// question is one line of QuestionsFile, in the `hopwise route --queries`
// form of a text line.
type question struct {
	ID   string `json:"id"`
	Text string `json:"text"`
}

// greenhouseQuestions writes one question per explained decision (its
// observation and target), plus one that states two observations about
// the first explained target, so that the file shows one decision per
// evidence → target pair.
func greenhouseQuestions(ex []Explained) ([]question, error) {
	var qs []question
	add := func(obs []world.Observation, to string) error {
		text, err := world.GreenhouseQuestion(obs, to, len(qs))
		if err != nil {
			return err
		}
		qs = append(qs, question{ID: fmt.Sprintf("t%d", len(qs)+1), Text: text})
		return nil
	}
	for _, e := range ex {
		if err := add([]world.Observation{{Entity: e.From, Value: e.Value}}, e.To); err != nil {
			return nil, err
		}
	}
	if len(ex) >= 2 {
		for _, e := range ex[1:] {
			if e.From != ex[0].From && e.From != ex[0].To {
				obs := []world.Observation{{Entity: ex[0].From, Value: ex[0].Value}, {Entity: e.From, Value: e.Value}}
				if err := add(obs, ex[0].To); err != nil {
					return nil, err
				}
				break
			}
		}
	}
	return qs, nil
}

// textPass writes the lexicon and the questions next to the index, then
// takes shownTexts of them (a chained and a direct one when there are)
// through DecideText and the plan renderer of a router configured as the
// traced pass's.
func textPass(ctx context.Context, cfg Config, w *world.World, rep *Report) error {
	lines, err := world.GreenhouseLexicon(w)
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	if err := writeFile(rep.Files.Lexicon, func(out io.Writer) error { return world.WriteLexicon(out, lines) }); err != nil {
		return err
	}
	qs, err := greenhouseQuestions(rep.Explained)
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	if err := writeFile(rep.Files.Questions, func(out io.Writer) error {
		enc := json.NewEncoder(out)
		for _, q := range qs {
			if err := enc.Encode(q); err != nil {
				return err
			}
		}
		return nil
	}); err != nil {
		return err
	}

	lex, err := graphidx.LoadLexicon(rep.Files.Lexicon)
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	r, err := openRouter(cfg, rep)
	if err != nil {
		return err
	}
	defer r.Close() // closes the index
	rend, err := plan.NewRenderer()
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	var all []TextExample
	for _, q := range qs {
		td, err := r.DecideText(ctx, lex, q.Text)
		if err != nil {
			return fmt.Errorf("demo: question %s %q: %w", q.ID, q.Text, err)
		}
		ex := TextExample{ID: q.ID, Question: q.Text, Mentions: td.Mentions, PresenceOnly: td.PresenceOnly,
			Queries: td.Queries, Decisions: td.Decisions, Dropped: td.Dropped}
		for i, d := range td.Decisions {
			p, err := plan.Build(ctx, r, td.Queries[i].Query, d, lex)
			if err != nil {
				return fmt.Errorf("demo: plan of question %s: %w", q.ID, err)
			}
			s, err := rend.Render(p)
			if err != nil {
				return fmt.Errorf("demo: %w", err)
			}
			ex.Plans, ex.Prompts = append(ex.Plans, p), append(ex.Prompts, s)
		}
		all = append(all, ex)
	}
	rep.Texts = pickTexts(all)
	return nil
}

// pickTexts keeps the first question answered through a chain and the
// first answered directly, or else the first shownTexts questions.
func pickTexts(all []TextExample) []TextExample {
	var out []TextExample
	for _, mode := range []router.Mode{router.ModeChain, router.ModeDirect} {
		for _, ex := range all {
			if len(ex.Decisions) > 0 && ex.Decisions[0].Mode == mode {
				out = append(out, ex)
				break
			}
		}
	}
	for _, ex := range all {
		if len(out) >= shownTexts {
			break
		}
		if !containsID(out, ex.ID) {
			out = append(out, ex)
		}
	}
	return out
}

func containsID(xs []TextExample, id string) bool {
	for _, x := range xs {
		if x.ID == id {
			return true
		}
	}
	return false
}

// writeFile writes path through fill, buffered; a write or close error is
// returned with the path.
func writeFile(path string, fill func(io.Writer) error) error {
	f, err := os.Create(path)
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	bw := bufio.NewWriter(f)
	if err := fill(bw); err != nil {
		f.Close()
		return fmt.Errorf("demo: %s: %w", path, err)
	}
	if err := bw.Flush(); err != nil {
		f.Close()
		return fmt.Errorf("demo: %s: %w", path, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("demo: %s: %w", path, err)
	}
	return nil
}

// writeTexts prints each shown question's path from text to plan.
func (r *Report) writeTexts(b *strings.Builder) {
	if len(r.Texts) == 0 {
		return
	}
	fmt.Fprintf(b, "\nFrom a question to a plan (%s, %s):\n", r.Files.Lexicon, r.Files.Questions)
	for _, ex := range r.Texts {
		fmt.Fprintf(b, "\n%s. %q\n", ex.ID, ex.Question)
		for _, m := range ex.Mentions {
			fmt.Fprintf(b, "   mention  %q → %s", m.Surface, m.Entity)
			if m.HasValue {
				fmt.Fprintf(b, " = %s", m.Value)
			}
			b.WriteString("\n")
		}
		for i, d := range ex.Decisions {
			q := ex.Queries[i]
			fmt.Fprintf(b, "   query    %s = %s → %s (pair support %d)\n", q.From, q.Value, q.To, q.Support)
			mode := d.Mode.String()
			if d.Mode == router.ModeChain {
				mode += " via " + strings.Join(d.Bridges, " → ")
			}
			fmt.Fprintf(b, "   decision %s (%s; expected squared error %.4g, direct %.4g)\n", mode, d.Reason.Code, d.Err, d.Direct.Err)
			fmt.Fprintf(b, "   plan     %s template:\n", plan.Template(ex.Plans[i]))
			for _, line := range strings.Split(strings.TrimRight(ex.Prompts[i], "\n"), "\n") {
				fmt.Fprintf(b, "            │ %s\n", line)
			}
		}
	}
}

// openRouter opens the demo's index in a router configured as the eval
// harness's: the Bayes model with the fitted β, then cfg.RouterOptions. The
// router owns the index.
func openRouter(cfg Config, rep *Report) (*router.Router, error) {
	idx, err := graphidx.Open(rep.Files.Index)
	if err != nil {
		return nil, fmt.Errorf("demo: %w", err)
	}
	model, err := scorer.NewBayes(scorer.WithBeta(rep.Eval.Beta))
	if err != nil {
		idx.Close()
		return nil, fmt.Errorf("demo: %w", err)
	}
	r, err := router.New(idx, append([]router.Option{router.WithModel(model)}, cfg.RouterOptions...)...)
	if err != nil {
		idx.Close()
		return nil, fmt.Errorf("demo: %w", err)
	}
	return r, nil
}
