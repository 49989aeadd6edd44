package gw

import (
	"bytes"
	"errors"
	"fmt"
	"strings"
	"text/template"
	"unicode"
	"unicode/utf8"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// Pass-through reasons: why a request was forwarded untouched. They are
// recorded on the request's span (KeyPassReason) and in the route counter.
const (
	PassNoUserMessage = "no-user-message" // no user message with text content
	PassNoMention     = "no-mention"      // the lexicon names nothing in it
	PassOneEntity     = "one-entity"      // one entity named: no question between two
	PassNoValue       = "no-value"        // no observed value stated for any named entity
	PassUnknown       = "unknown-name"    // the index does not know an entity or value
	PassBadText       = "bad-text"        // too long or not UTF-8 to link
	PassRoutingOff    = "routing-off"     // the gateway runs with routing turned off
)

// Former forms a routing query from the text of the last user message. It
// returns ok = false and a pass-through reason (one of the Pass* codes) when
// the text asks nothing the router can decide. It must be safe for
// concurrent use.
type Former interface {
	Form(text string) (q router.Query, reason string, ok bool)
}

// Renderer turns a decision into the text the gateway adds to the request
// as a system message: the steps to reason through for a chain, the
// instruction to answer at once for a direct decision. It must be safe for
// concurrent use.
type Renderer interface {
	Render(q router.Query, d router.Decision) (string, error)
}

// Vocabulary is what LexiconFormer reads from the index (*graphidx.Index
// satisfies it).
type Vocabulary interface {
	Lookup(name string) (graphidx.EntityID, bool)
	Values(id graphidx.EntityID) []string
}

// LexiconFormer links the text with a graphidx.Lexicon and forms the query
// from the mentions: the first entity whose value the text states right
// after it ("zone-2/thermometer reads-cool", "… is reads-cool", "… = reads-cool")
// is the observed one, the last other entity named is the target. Values
// are the index's labels, matched case-insensitively on word boundaries.
// Cost: the lexicon's O(|text|) scan plus O(mentions × values).
type LexiconFormer struct {
	Lex   *graphidx.Lexicon
	Vocab Vocabulary
}

// Form implements Former.
func (f LexiconFormer) Form(text string) (router.Query, string, bool) {
	ms, err := f.Lex.Link(text)
	if err != nil {
		return router.Query{}, PassBadText, false
	}
	if len(ms) == 0 {
		return router.Query{}, PassNoMention, false
	}
	from, value := -1, ""
	for i, m := range ms {
		if m.HasValue {
			from, value = i, m.Value
			break
		}
		id, ok := f.Vocab.Lookup(m.Entity)
		if !ok {
			continue
		}
		end := len(text)
		if i+1 < len(ms) {
			end = ms[i+1].Start
		}
		if v, ok := statedValue(text[m.End:end], f.Vocab.Values(id)); ok {
			from, value = i, v
			break
		}
	}
	to := -1
	for i := len(ms) - 1; i >= 0; i-- {
		if from < 0 || ms[i].Entity != ms[from].Entity {
			to = i
			break
		}
	}
	switch {
	case to < 0 || (from < 0 && distinct(ms) < 2):
		return router.Query{}, PassOneEntity, false
	case from < 0:
		return router.Query{}, PassNoValue, false
	}
	q := router.Query{From: ms[from].Entity, Value: value, To: ms[to].Entity}
	if _, ok := f.Vocab.Lookup(q.To); !ok {
		return router.Query{}, PassUnknown, false
	}
	return q, "", true
}

func distinct(ms []graphidx.Mention) int {
	n := 0
	for i, m := range ms {
		if i == 0 || m.Entity != ms[0].Entity {
			n++
		}
		if n > 1 {
			return n
		}
	}
	return n
}

// statedValue finds the first of values named at the start of rest, after
// optional spaces, punctuation and one linking word (is, was, reads, =, :).
func statedValue(rest string, values []string) (string, bool) {
	s := strings.TrimLeftFunc(rest, func(r rune) bool { return unicode.IsSpace(r) || r == '=' || r == ':' || r == ',' })
	for _, w := range []string{"is ", "was ", "reads ", "shows ", "at "} {
		if len(s) >= len(w) && strings.EqualFold(s[:len(w)], w) {
			s = strings.TrimLeftFunc(s[len(w):], unicode.IsSpace)
			break
		}
	}
	best := ""
	for _, v := range values {
		if len(v) > len(best) && len(s) >= len(v) && strings.EqualFold(s[:len(v)], v) {
			if r, _ := utf8.DecodeRuneInString(s[len(v):]); len(s) == len(v) || !(r == '_' || r == '-' || unicode.IsLetter(r) || unicode.IsDigit(r)) {
				best = v
			}
		}
	}
	return best, best != ""
}

// planView is what the default templates see.
type planView struct {
	From, Value, To string
	Steps           []string // display names, from the observed entity to the target
	Values          string   // the target's labels, comma separated ("" when unknown)
}

// Default templates of TemplateRenderer. They say what to do in plain words;
// the chain template lists one line per step.
const (
	DefaultChainTemplate = `Answer by reasoning step by step through the greenhouse, one link at a time.
Known: {{.From}} is {{.Value}}.
{{range $i, $s := .Steps}}{{if $i}}Step {{$i}}: from that, work out {{$s}}.
{{end}}{{end}}State each intermediate conclusion, then give the final answer as "Answer: <value>" for {{.To}}{{if .Values}} (one of {{.Values}}){{end}}.`
	DefaultDirectTemplate = `Answer directly, without intermediate steps: given {{.From}} is {{.Value}}, give the most likely state of {{.To}} as "Answer: <value>"{{if .Values}} (one of {{.Values}}){{end}}.`
)

// TemplateRenderer renders decisions with text/template: Chain for chain
// decisions, Direct for direct ones. Names are shown by Display (for
// example graphidx.Lexicon.DisplayName), falling back to the entity id.
type TemplateRenderer struct {
	Chain, Direct *template.Template
	Display       func(entity string) string
	Vocab         Vocabulary
}

// NewTemplateRenderer parses the default templates.
func NewTemplateRenderer(lex *graphidx.Lexicon, vocab Vocabulary) *TemplateRenderer {
	r := &TemplateRenderer{
		Chain:  template.Must(template.New("chain").Parse(DefaultChainTemplate)),
		Direct: template.Must(template.New("direct").Parse(DefaultDirectTemplate)),
		Vocab:  vocab,
	}
	if lex != nil {
		r.Display = lex.DisplayName
	}
	return r
}

// Render implements Renderer.
func (r *TemplateRenderer) Render(q router.Query, d router.Decision) (string, error) {
	name := func(e string) string {
		if r.Display != nil {
			if s := r.Display(e); s != "" {
				return s
			}
		}
		return e
	}
	v := planView{From: name(q.From), Value: q.Value, To: name(q.To)}
	if r.Vocab != nil {
		if id, ok := r.Vocab.Lookup(q.To); ok {
			v.Values = strings.Join(r.Vocab.Values(id), ", ")
		}
	}
	t := r.Direct
	if d.Mode == router.ModeChain {
		t = r.Chain
		v.Steps = append(v.Steps, v.From)
		for _, b := range d.Bridges {
			v.Steps = append(v.Steps, name(b))
		}
		v.Steps = append(v.Steps, v.To)
	}
	if t == nil {
		return "", errors.New("gw: renderer has no template for this mode")
	}
	var b bytes.Buffer
	if err := t.Execute(&b, v); err != nil {
		return "", fmt.Errorf("gw: rendering the plan: %w", err)
	}
	return b.String(), nil
}

// Names lists entity names: *graphidx.Index satisfies it.
type Names interface {
	NumEntities() int
	Name(id graphidx.EntityID) string
}

// IndexLexicon builds a lexicon whose surface forms are the entity names
// themselves (each its own display name), for an index that ships no
// lexicon file. Names a lexicon line cannot hold (tabs, line breaks, a
// leading '#') are left out. Cost: O(Σ|name|).
func IndexLexicon(ix Names) (*graphidx.Lexicon, error) {
	var b bytes.Buffer
	for i := range ix.NumEntities() {
		n := ix.Name(graphidx.EntityID(i))
		if strings.TrimSpace(n) == "" || strings.ContainsAny(n, "\t\r\n") || strings.HasPrefix(strings.TrimSpace(n), "#") {
			continue
		}
		b.WriteString(n)
		b.WriteByte('\t')
		b.WriteString(n)
		b.WriteByte('\n')
	}
	return graphidx.ParseLexicon(&b, "index entity names")
}
