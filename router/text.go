package router

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"strconv"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
)

// Query forming from text: the rules of DecideText (docs/PLANS.md has the
// user-facing version).
//
//  1. The text is linked against a lexicon (graphidx.Lexicon.Link): the
//     mentions, in text order.
//  2. Valued index. Evidence is every distinct (entity, value) a mention
//     states (HasValue); targets are the distinct entities mentioned
//     without a value, except entities that are also evidence (their value
//     is given, so there is nothing to ask). Both keep first-mention order.
//  3. Presence-only index (scorer.PresenceOnly). Mentions carry no values
//     the index could use (a value a mention states is ignored): the
//     first-mentioned entity is the evidence, observed present, and every
//     other distinct entity is a target.
//  4. One candidate query per evidence × target pair, ordered by ascending
//     support of the pair (contexts that observed both endpoints; 0 when
//     never together), then by the evidence's and the target's first
//     mention. Least support first: that is where a direct answer is
//     weakest and a chain matters most. At most MaxTextQueries (option)
//     are decided; the rest are counted in TextDecision.Dropped.
//  5. Each query is decided separately. Several evidence mentions give
//     several decisions, one per pair: they are never combined.

// ErrNoQuery is wrapped by every error that says no query can be formed
// from a text: ErrNoMentions, ErrNoEvidence and ErrNoTarget (test with
// errors.Is).
var ErrNoQuery = errors.New("router: no query can be formed from the text")

var (
	// ErrNoMentions: the text names no entity of the lexicon.
	ErrNoMentions error = &noQueryError{"router: no query: the text names no entity of the lexicon"}
	// ErrNoEvidence: on a valued index, no mention states a value, so
	// there is nothing observed to reason from.
	ErrNoEvidence error = &noQueryError{"router: no query: no mention states a value (no evidence)"}
	// ErrNoTarget: every entity mentioned is evidence (on a presence-only
	// index: only one entity is mentioned), so there is nothing to ask
	// about.
	ErrNoTarget error = &noQueryError{"router: no query: every entity mentioned is evidence (no target)"}
	// ErrTooManyMentions: the text names more distinct entities than
	// MaxTextEntities.
	ErrTooManyMentions = errors.New("router: the text names too many distinct entities")
)

type noQueryError struct{ msg string }

func (e *noQueryError) Error() string        { return e.msg }
func (e *noQueryError) Is(target error) bool { return target == ErrNoQuery }

// MaxTextEntities bounds the distinct evidence entities and, separately,
// the distinct targets of one text, so that forming queries costs at most
// MaxTextEntities² pair look-ups.
const MaxTextEntities = 256

// DefaultMaxTextQueries is how many queries DecideText decides by default.
const DefaultMaxTextQueries = 16

// TextQuery is one candidate query formed from a text.
type TextQuery struct {
	Query
	// Evidence and Target are the first mentions of From and To. On a
	// presence-only index Evidence.HasValue may be true (the lexicon's
	// value) although Query.Value is graphidx.PresentValue.
	Evidence, Target graphidx.Mention
	// Support is the number of contexts that observed both endpoints
	// (0 when never together, or when an endpoint is not in the index and
	// a fallback is configured).
	Support uint64
}

// TextDecision is what DecideText found in a text and decided.
type TextDecision struct {
	Mentions []graphidx.Mention // every mention, in text order
	// PresenceOnly reports that the index records presence only, so the
	// presence rule formed the queries.
	PresenceOnly bool
	Queries      []TextQuery // in the documented order, at most MaxQueries
	Decisions    []Decision  // Decisions[i] answers Queries[i]
	// Dropped is the number of candidate queries formed but not decided
	// (beyond MaxQueries).
	Dropped int
}

// TextOption configures DecideText and DecideMentions.
type TextOption func(*textConfig) error

type textConfig struct {
	maxQueries int
	key        string
}

// WithMaxQueries sets how many queries are decided (≥ 1, default
// DefaultMaxTextQueries).
func WithMaxQueries(n int) TextOption {
	return func(c *textConfig) error {
		if n < 1 {
			return badOpt("WithMaxQueries", "%d (want ≥ 1)", n)
		}
		c.maxQueries = n
		return nil
	}
}

// WithTextKey sets the unit key of every query decided (Query.Key: A/B
// assignment, exploration and outcome joins). Default: "", each query's
// From‖Value‖To.
func WithTextKey(key string) TextOption {
	return func(c *textConfig) error { c.key = key; return nil }
}

// DecideText links text against lex and decides the queries it forms (see
// the rules above and DecideMentions). Errors: the lexicon's
// (graphidx.ErrTextTooLong, graphidx.ErrInvalidText), then those of
// DecideMentions.
//
// Cost: Link (O(len(text)) plus the mentions), forming (O(n) for n
// mentions; with more than one candidate query also O(E+T) entity and
// O(E·T) pair look-ups for E evidence and T target entities, and a sort),
// then one Decide per query. BenchmarkDecideTextOverhead measures it
// against an uncached Decide.
func (r *Router) DecideText(ctx context.Context, lex *graphidx.Lexicon, text string, opts ...TextOption) (TextDecision, error) {
	if lex == nil {
		return TextDecision{}, badOpt("DecideText", "nil lexicon")
	}
	ms, err := lex.Link(text)
	if err != nil {
		return TextDecision{}, err
	}
	return r.DecideMentions(ctx, ms, opts...)
}

// DecideMentions forms queries from mentions already linked (for example
// with values a caller attached itself) and decides them, one Decision per
// query. Errors: ErrNoMentions, ErrNoEvidence, ErrNoTarget (all wrap
// ErrNoQuery), ErrTooManyMentions, ErrBadOption; with the error fallback
// (the default) ErrUnknownEntity for an entity the index does not hold and
// ErrUnknownValue for a value it does not know for that entity, whose
// message lists the entity's known values; then Decide's errors (the first
// one stops the call). With a fallback mode configured, unknown entities
// and values get Decide's fallback decisions instead.
//
// The queries are formed and decided on one index generation: when the
// index is swapped meanwhile (a decision, or the router, is on another
// generation), the call starts over, at most textAttempts times; the last
// attempt is returned as it is.
func (r *Router) DecideMentions(ctx context.Context, ms []graphidx.Mention, opts ...TextOption) (TextDecision, error) {
	cfg := textConfig{maxQueries: DefaultMaxTextQueries}
	if len(opts) > 0 { // only then does a configuration reach the heap
		var err error
		if cfg, err = textOptions(opts); err != nil {
			return TextDecision{}, err
		}
	}
	var td TextDecision
	var err error
	for range textAttempts {
		var gen uint64
		td, gen, err = r.decideMentionsOnce(ctx, ms, &cfg)
		if !swappedDuring(r, &td, gen) {
			break
		}
	}
	return td, err
}

// textOptions applies opts to the default configuration.
func textOptions(opts []TextOption) (textConfig, error) {
	cfg := textConfig{maxQueries: DefaultMaxTextQueries}
	for _, o := range opts {
		if o == nil {
			continue
		}
		if err := o(&cfg); err != nil {
			return textConfig{}, err
		}
	}
	return cfg, nil
}

// textAttempts bounds how often DecideMentions starts over because the
// index was swapped while it formed and decided queries.
const textAttempts = 3

// swappedDuring reports whether the queries of td were formed on
// generation gen but some decision, or the router now, is on another.
func swappedDuring(r *Router, td *TextDecision, gen uint64) bool {
	if r.Generation() != gen {
		return true
	}
	for _, d := range td.Decisions {
		if d.Generation != gen {
			return true
		}
	}
	return false
}

// decideMentionsOnce forms and decides once; it returns the generation the
// queries were formed on.
func (r *Router) decideMentionsOnce(ctx context.Context, ms []graphidx.Mention, cfg *textConfig) (TextDecision, uint64, error) {
	td := TextDecision{Mentions: ms}
	qs, presence, gen, err := r.formQueries(ms, false)
	td.PresenceOnly = presence
	if err != nil {
		return td, gen, err
	}
	if len(qs) > cfg.maxQueries {
		td.Dropped = len(qs) - cfg.maxQueries
		qs = qs[:cfg.maxQueries]
	}
	td.Queries = qs
	td.Decisions = make([]Decision, 0, len(qs))
	for i := range qs {
		qs[i].Key = cfg.key
		d, err := r.Decide(ctx, qs[i].Query)
		if err != nil {
			return td, gen, fmt.Errorf("router: query %d (%s = %s → %s): %w", i+1, qs[i].From, qs[i].Value, qs[i].To, r.explainTextErr(qs[i], err))
		}
		if len(qs) == 1 { // not looked up by formQueries
			qs[i].Support = d.Direct.Support
		}
		td.Decisions = append(td.Decisions, d)
	}
	return td, gen, nil
}

// SplitMentions applies the evidence and target rules (2 and 3 above) to
// mentions in text order: it returns the first mention of each distinct
// evidence (entity, value) and of each distinct target entity, in
// first-mention order. presenceOnly selects rule 3. Errors: ErrNoMentions,
// ErrNoEvidence, ErrNoTarget. O(n·d) for n mentions and d distinct ones
// while d ≤ smallSet, O(n) expected beyond (hash sets).
func SplitMentions(ms []graphidx.Mention, presenceOnly bool) (evidence, targets []graphidx.Mention, err error) {
	evidence, targets, _, err = splitMentions(ms, presenceOnly, nil, nil)
	return evidence, targets, err
}

// splitMentions is SplitMentions appending to evidence and targets (so a
// caller can hand it buffers on its stack); it also returns the number of
// distinct evidence entities.
func splitMentions(ms []graphidx.Mention, presenceOnly bool, evidence, targets []graphidx.Mention) (_, _ []graphidx.Mention, evEntities int, err error) {
	if len(ms) == 0 {
		return nil, nil, 0, ErrNoMentions
	}
	var evEnt mentionSet // evidence entities
	if presenceOnly {
		evidence = append(evidence, ms[0])
		evEnt.add(ms[0].Entity, "")
	} else {
		var evPair mentionSet // evidence (entity, value) pairs
		for _, m := range ms {
			if !m.HasValue {
				continue
			}
			evEnt.add(m.Entity, "")
			if evPair.add(m.Entity, m.Value) {
				evidence = append(evidence, m)
			}
		}
		if len(evidence) == 0 {
			return nil, nil, 0, ErrNoEvidence
		}
	}
	var seenT mentionSet
	for _, m := range ms {
		if (!presenceOnly && m.HasValue) || evEnt.has(m.Entity, "") || !seenT.add(m.Entity, "") {
			continue
		}
		targets = append(targets, m)
	}
	if len(targets) == 0 {
		return evidence, nil, evEnt.len(), ErrNoTarget
	}
	return evidence, targets, evEnt.len(), nil
}

// smallSet is the size up to which mentionSet scans an array (no hashing,
// no allocation) before it switches to a map.
const smallSet = 16

// mentionSet is a set of (entity, value) keys: an array while small (no
// allocation), a map beyond smallSet entries.
type mentionSet struct {
	arr [smallSet][2]string
	n   int
	m   map[[2]string]struct{}
}

func (s *mentionSet) has(entity, value string) bool {
	k := [2]string{entity, value}
	if s.m != nil {
		_, ok := s.m[k]
		return ok
	}
	for _, x := range s.arr[:s.n] {
		if x == k {
			return true
		}
	}
	return false
}

// add inserts the key and reports whether it was new.
func (s *mentionSet) add(entity, value string) bool {
	if s.has(entity, value) {
		return false
	}
	k := [2]string{entity, value}
	switch {
	case s.m != nil:
		s.m[k] = struct{}{}
	case s.n < smallSet:
		s.arr[s.n] = k
		s.n++
	default:
		s.m = make(map[[2]string]struct{}, 2*smallSet)
		for _, x := range s.arr[:s.n] {
			s.m[x] = struct{}{}
		}
		s.m[k] = struct{}{}
	}
	return true
}

func (s *mentionSet) len() int {
	if s.m != nil {
		return len(s.m)
	}
	return s.n
}

// FormQueries forms the candidate queries of mentions (in text order, as
// Link returns them, possibly with values a caller attached) by the rules
// above on the router's current index, without deciding them: every query
// DecideMentions would decide, in the order it decides them (the first is
// the one it decides first), each with its pair support, and whether the
// index is presence-only (rule 3 formed them). An endpoint the index does
// not hold gets support 0; deciding that query gives ErrUnknownEntity.
// Errors: ErrNoMentions, ErrNoEvidence, ErrNoTarget (all wrap
// ErrNoQuery), ErrTooManyMentions, ErrClosed.
//
// Cost: O(n) for n mentions (SplitMentions), O(E+T) entity and O(E·T)
// pair look-ups for E evidence and T target entities, and a stable sort of
// the E·T queries.
func (r *Router) FormQueries(ms []graphidx.Mention) (queries []TextQuery, presenceOnly bool, err error) {
	qs, presence, _, err := r.formQueries(ms, true)
	return qs, presence, err
}

// formQueries applies the rules on the current index: split, pair and,
// with more than one pair, order by pair support. It reports whether the
// index is presence-only and its generation. A single pair needs no order,
// so unless lookupSingle is set it costs no index look-up here (the path
// of DecideMentions): its support is the decision's Direct.Support, and
// unknown entities and values surface as Decide's errors (see
// explainTextErr). All look-ups are on the one generation returned.
func (r *Router) formQueries(ms []graphidx.Mention, lookupSingle bool) ([]TextQuery, bool, uint64, error) {
	var h *handle
	if lookupSingle { // it will look up: hold the generation from the start
		var err error
		if h, err = r.acquire(); err != nil {
			return nil, false, 0, err
		}
		defer h.release()
	} else if h = r.cur.Load(); h == nil {
		return nil, false, 0, ErrClosed
	}
	presence, gen := h.presence, h.gen
	// Most prompts name a handful of entities: split into buffers on the
	// stack, so that only the queries are allocated.
	var evBuf, tgBuf [4]graphidx.Mention
	ev, tg, nev, err := splitMentions(ms, presence, evBuf[:0], tgBuf[:0])
	if err != nil {
		return nil, presence, gen, err
	}
	if n := max(nev, len(tg)); n > MaxTextEntities {
		return nil, presence, gen, fmt.Errorf("%w: %d distinct evidence or target entities, limit %d", ErrTooManyMentions, n, MaxTextEntities)
	}
	qs := make([]TextQuery, 0, len(ev)*len(tg))
	for _, e := range ev {
		v := e.Value
		if presence {
			v = graphidx.PresentValue
		}
		for _, t := range tg {
			qs = append(qs, TextQuery{Query: Query{From: e.Entity, Value: v, To: t.Entity}, Evidence: e, Target: t})
		}
	}
	if !lookupSingle {
		if len(qs) < 2 {
			return qs, presence, gen, nil
		}
		held, err := r.acquire()
		if err != nil {
			return nil, presence, gen, err
		}
		defer held.release()
		if held.gen != gen {
			return qs, presence, gen, nil // swapped: DecideMentions starts over
		}
		h = held
	}
	orderBySupport(h.g, qs)
	return qs, presence, gen, nil
}

// orderBySupport sets each query's pair support on g and sorts the
// queries by rule 4: ascending support, then the evidence's and the
// target's first mention (a stable sort).
func orderBySupport(g Graph, qs []TextQuery) {
	type end struct {
		id graphidx.EntityID
		ok bool
	}
	ids := make(map[string]end, 2*len(qs))
	resolve := func(name string) end {
		e, seen := ids[name]
		if !seen {
			e.id, e.ok = g.Lookup(name)
			ids[name] = e
		}
		return e
	}
	for i := range qs {
		a, b := resolve(qs[i].From), resolve(qs[i].To)
		if a.ok && b.ok {
			if ps, ok := g.Pair(a.id, b.id); ok {
				qs[i].Support = ps.Support()
			}
		}
	}
	slices.SortStableFunc(qs, func(a, b TextQuery) int {
		switch {
		case a.Support != b.Support:
			if a.Support < b.Support {
				return -1
			}
			return 1
		case a.Evidence.Start != b.Evidence.Start:
			return a.Evidence.Start - b.Evidence.Start
		}
		return a.Target.Start - b.Target.Start
	})
}

// explainTextErr adds to a Decide error of a text query the mention behind
// it and, for an unknown value, the values the index knows for the entity.
func (r *Router) explainTextErr(q TextQuery, err error) error {
	at := func(m graphidx.Mention) string {
		return fmt.Sprintf("mentioned as %q at bytes %d–%d", m.Surface, m.Start, m.End)
	}
	switch {
	case errors.Is(err, ErrUnknownValue):
		known := "no values"
		if vs, verr := r.EntityValues(q.From); verr == nil {
			known = quoteList(vs)
		}
		return fmt.Errorf("%w (%s); the index knows %s", err, at(q.Evidence), known)
	case errors.Is(err, ErrUnknownEntity):
		m := q.Target
		if _, verr := r.EntityValues(q.From); errors.Is(verr, ErrUnknownEntity) {
			m = q.Evidence
		}
		return fmt.Errorf("%w (%s)", err, at(m))
	}
	return err
}

// quoteList renders labels as "a", "b", "c" (at most 16, then a count).
func quoteList(vs []string) string {
	const show = 16
	var b strings.Builder
	for i, v := range vs {
		if i == show {
			fmt.Fprintf(&b, " and %d more", len(vs)-show)
			break
		}
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(strconv.Quote(v))
	}
	if len(vs) == 0 {
		return "no values"
	}
	return b.String()
}
