package gw

import (
	"bytes"
	"context"
	"errors"
	"strings"
	"unicode"
	"unicode/utf8"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/router/plan"
)

// Pass-through reasons: why a request was forwarded untouched. They are
// recorded on the request's span (KeyPassReason) and in the route counter.
const (
	PassNoUserMessage = "no-user-message"   // no user message with text content
	PassNoMention     = "no-mention"        // the lexicon names nothing in it
	PassOneEntity     = "one-entity"        // one entity named: no question between two
	PassNoValue       = "no-value"          // no observed value stated for any named entity
	PassUnknown       = "unknown-name"      // the index does not know an entity or value
	PassBadText       = "bad-text"          // too long or not UTF-8 to link
	PassRoutingOff    = "routing-off"       // the gateway runs with routing turned off
	PassRender        = "render-failed"     // the plan could not be built or rendered (logged)
	PassTooMany       = "too-many-mentions" // more distinct entities than the router forms queries from
)

// Former forms the routing query from the text of the last user message.
// It returns ok = false and a pass-through reason (one of the Pass* codes)
// when the text asks nothing the router can decide. The gateway decides
// the query through otelx. It must be safe for concurrent use.
type Former interface {
	Form(ctx context.Context, text, unit string) (q router.Query, reason string, ok bool)
}

// Renderer turns a decision into the text the gateway adds to the request
// as a system message: the steps to reason through for a chain, the
// instruction to answer at once for a direct decision. It must be safe for
// concurrent use.
type Renderer interface {
	Render(ctx context.Context, q router.Query, d router.Decision) (string, error)
}

// TextFormer forms the query by the router's own text rules: it links the
// text, then takes the first query router.Router.FormQueries gives, which
// is the one router.Router.DecideMentions would decide first (evidence =
// mentions stating a value, targets = the entities mentioned without one,
// on a presence-only index the first mention is the evidence; the pair of
// least support first). It does not decide: the gateway decides the one
// query through otelx, so the traced decision is the real one. Mentions the
// lexicon links without a value get the value the text states right after
// them, when it is one of the entity's labels ("zone-2/thermometer
// reads-cool", "… is reads-cool", "… = reads-cool"), so a lexicon of bare
// entity names works too. Cost: Link, then FormQueries (O(E·T) pair
// look-ups for E evidence and T target entities).
type TextFormer struct {
	Lex    *graphidx.Lexicon
	Router *router.Router
	// Vocab gives the value labels that attachValues matches; nil attaches
	// none (the lexicon's own values still count).
	Vocab Vocabulary
}

// Form implements Former.
func (f TextFormer) Form(_ context.Context, text, _ string) (router.Query, string, bool) {
	ms, err := f.Lex.Link(text)
	if err != nil {
		return router.Query{}, PassBadText, false
	}
	if f.Vocab != nil {
		attachValues(ms, text, f.Vocab)
	}
	qs, _, err := f.Router.FormQueries(ms)
	switch {
	case errors.Is(err, router.ErrNoMentions):
		return router.Query{}, PassNoMention, false
	case errors.Is(err, router.ErrNoEvidence):
		return router.Query{}, PassNoValue, false
	case errors.Is(err, router.ErrNoTarget):
		return router.Query{}, PassOneEntity, false
	case errors.Is(err, router.ErrTooManyMentions):
		return router.Query{}, PassTooMany, false
	case err != nil: // ErrClosed: the gateway is shutting down, nothing is routed
		return router.Query{}, PassRoutingOff, false
	}
	return qs[0].Query, "", true
}

// attachValues gives each mention without a value the label of its entity
// that the text states right after it (before the next mention).
func attachValues(ms []graphidx.Mention, text string, vocab Vocabulary) {
	for i := range ms {
		m := &ms[i]
		if m.HasValue {
			continue
		}
		id, ok := vocab.Lookup(m.Entity)
		if !ok {
			continue
		}
		end := len(text)
		if i+1 < len(ms) {
			end = ms[i+1].Start
		}
		if v, ok := statedValue(text[m.End:end], vocab.Values(id)); ok {
			m.Value, m.HasValue = v, true
		}
	}
}

// PlanRenderer renders decisions with router/plan: the plan (one step per
// bridge with the value the chain expects there) through a plan.Renderer
// (its default chain and direct templates unless replaced).
type PlanRenderer struct {
	Router   *router.Router
	Namer    plan.Namer // display names; nil shows entity ids
	Renderer *plan.Renderer
	// Cache, when set, keeps the rendered instructions (see PlanCache);
	// it must serve this PlanRenderer only.
	Cache *PlanCache
}

// Render implements Renderer. Cost: a cache hit O(key); otherwise
// plan.Build (router.Router.ChainDists for a chain) and the template.
func (r PlanRenderer) Render(ctx context.Context, q router.Query, d router.Decision) (string, error) {
	build := func() (string, error) {
		p, err := plan.Build(ctx, r.Router, q, d, r.Namer)
		if err != nil {
			return "", err
		}
		return r.Renderer.Render(p)
	}
	if r.Cache == nil {
		return build()
	}
	return r.Cache.render(r.Router.ConfigGeneration(), q, &d, build)
}

// Vocabulary is what LexiconFormer reads from the index (*graphidx.Index
// satisfies it).
type Vocabulary interface {
	Lookup(name string) (graphidx.EntityID, bool)
	Values(id graphidx.EntityID) []string
}

// LexiconFormer forms one query from a text without a router (the
// simulated model reads questions with it): it links the text with a
// graphidx.Lexicon and forms the query from the mentions: the first entity whose value the text states right
// after it ("zone-2/thermometer reads-cool", "… is reads-cool", "… = reads-cool")
// is the observed one, the last other entity named is the target. Values
// are the index's labels, matched case-insensitively on word boundaries.
// Cost: the lexicon's O(|text|) scan plus O(mentions × values).
type LexiconFormer struct {
	Lex   *graphidx.Lexicon
	Vocab Vocabulary
}

// Form returns the query of text, or a Pass* reason.
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
