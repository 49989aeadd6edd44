package corpus

import (
	"bytes"
	"fmt"
	"io"
	"slices"
	"strconv"

	"github.com/hopwise/hopwise/graphidx"
)

// TextReader reads plain text, one context per paragraph (paragraphs are
// separated by blank lines), and observes the lexicon entities mentioned in
// the paragraph (see graphidx.Lexicon.Link for the matching rules). A paragraph's
// context id is "<name>#p<N>", N counting paragraphs from 1.
//
// Values. An entity none of whose lexicon forms carries a value is observed
// with graphidx.PresentValue. An entity with at least one valued form (a valued
// entity) is observed with the value its mentions state, and never with
// graphidx.PresentValue:
//   - mentions stating one value (once or more) give entity=value, also
//     when the paragraph names the entity by value-less forms as well;
//   - mentions that state no value only (a valued entity named by a
//     value-less form) leave the entity out of that context, counted in
//     graphidx.ReadStats.Unvalued: its value is unknown there, and a made-up
//     "present" would become a value beside the real ones;
//   - mentions stating two or more different values make the paragraph a
//     bad record with reason conflicting-values (skipped and counted in
//     lenient mode, the error in strict mode), naming the line of the
//     mention that states the second value.
//
// A paragraph linking more entities than graphidx.WithMaxContextEntities is a bad
// record with reason too-many-entities at its first line.
//
// Paragraphs left without an observation are counted in graphidx.ReadStats.Empty and
// skipped; they are not errors. A paragraph longer than the line limit is a
// line-too-long error at its first line. A TextReader is not safe for
// concurrent use.
type TextReader struct {
	lr    *lineReader
	name  string
	lex   *graphidx.Lexicon
	bl    badLines
	para  []byte
	n     int
	m     *graphidx.Matcher // nil until the first paragraph
	found []graphidx.Found  // the mentions of the current paragraph
	agg   []mentionRef
	obs   []graphidx.Observation
	atEOF bool
	// maxEnts is graphidx.WithMaxContextEntities (0: no limit).
	maxEnts int
}

// mentionRef is one mention of a paragraph: the lexicon's entity number, its
// value number + 1 (0: the form states no value) and the byte offset in the
// paragraph (see graphidx.Found).
type mentionRef struct {
	ent, val uint32
	at       int
}

// NewTextReader returns a reader of paragraphs from r matched against lex.
// name is the file name used in ids and errors.
func NewTextReader(r io.Reader, name string, lex *graphidx.Lexicon, opts ...ReadOption) *TextReader {
	cfg := newConfig(opts)
	tr := &TextReader{lr: newLineReader(r, cfg.maxLine), name: name, lex: lex, maxEnts: cfg.MaxContextEntities}
	tr.bl.init(cfg.Policy)
	return tr
}

// Stats returns the paragraph accounting so far.
func (r *TextReader) Stats() graphidx.ReadStats { return r.bl.snapshot() }

// Skipped returns the counts of skipped paragraphs by reason.
func (r *TextReader) Skipped() map[string]int { return r.bl.Skipped() }

// BytesRead is the number of input bytes consumed so far.
func (r *TextReader) BytesRead() int64 { return r.lr.bytes }

// Next returns the context of the next paragraph with at least one match.
func (r *TextReader) Next() (graphidx.Context, error) {
	if r.lex == nil {
		return graphidx.Context{}, fmt.Errorf("%s: %w", r.name, ErrLexiconRequired)
	}
	for !r.atEOF {
		// Collect one paragraph.
		r.para = r.para[:0]
		first, tooLong := 0, false
		for {
			line, err := r.lr.next()
			if err == io.EOF {
				r.atEOF = true
				break
			}
			if err != nil {
				return graphidx.Context{}, fmt.Errorf("%s:%d: %w", r.name, r.lr.line+1, err)
			}
			r.bl.stats.Lines++
			if !r.lr.tooLong && isBlank(line) {
				if first == 0 {
					continue // leading blank lines
				}
				break
			}
			if first == 0 {
				first = r.lr.line
			}
			if tooLong || r.lr.tooLong || len(r.para)+1+len(line) > r.lr.max {
				tooLong = true
				r.para = r.para[:0]
				continue
			}
			if len(r.para) > 0 {
				r.para = append(r.para, '\n')
			}
			r.para = append(r.para, line...)
		}
		if first == 0 {
			continue
		}
		r.n++
		r.bl.stats.Records++
		if tooLong {
			if e := r.bl.bad(&graphidx.LineError{File: r.name, Line: first, Reason: graphidx.ReasonLineTooLong,
				Detail: fmt.Sprintf("paragraph %d longer than %d bytes", r.n, r.lr.max)}); e != nil {
				return graphidx.Context{}, e
			}
			continue
		}
		obs, le := r.observe(first)
		if le == nil && r.maxEnts > 0 && len(obs) > r.maxEnts {
			le = &graphidx.LineError{File: r.name, Line: first, Reason: graphidx.ReasonTooManyEntities,
				Detail: fmt.Sprintf("paragraph %d links %d entities, more than %d in one context", r.n, len(obs), r.maxEnts)}
		}
		if le != nil {
			if e := r.bl.bad(le); e != nil {
				return graphidx.Context{}, e
			}
			continue
		}
		if len(obs) == 0 {
			r.bl.stats.Empty++
			continue
		}
		r.bl.stats.OK++
		r.bl.stats.Contexts++
		return graphidx.Context{ID: r.name + "#p" + strconv.Itoa(r.n), Obs: obs}, nil
	}
	return graphidx.Context{}, io.EOF
}

// observe links the current paragraph (whose first line is first) and turns
// its mentions into observations by the value rules of TextReader. It
// returns a conflicting-values error for a paragraph stating two values of
// one entity. O(mentions·log mentions) beyond the linking.
func (r *TextReader) observe(first int) ([]graphidx.Observation, *graphidx.LineError) {
	lex := r.lex
	if r.m == nil {
		r.m = lex.NewMatcher()
	}
	r.found = r.m.Find(r.para)
	r.agg = r.agg[:0]
	for _, f := range r.found {
		val := uint32(0)
		if f.HasValue {
			val = f.Value + 1
		}
		r.agg = append(r.agg, mentionRef{f.Entity, val, f.Start})
	}
	slices.SortFunc(r.agg, func(a, b mentionRef) int {
		if a.ent != b.ent {
			return int(a.ent) - int(b.ent)
		}
		if a.val != b.val {
			return int(a.val) - int(b.val)
		}
		return a.at - b.at
	})
	r.obs = r.obs[:0]
	unvalued := int64(0)
	for i := 0; i < len(r.agg); {
		g := r.agg[i]
		j := i + 1
		for j < len(r.agg) && r.agg[j].ent == g.ent {
			j++
		}
		grp := r.agg[i:j]
		i = j
		ent := lex.EntityName(g.ent)
		if !lex.Valued(g.ent) {
			r.obs = append(r.obs, graphidx.Observation{Entity: ent, Value: graphidx.PresentValue})
			continue
		}
		// Sorted by value: value-less mentions (0) first, then by value.
		k := 0
		for k < len(grp) && grp[k].val == 0 {
			k++
		}
		switch {
		case k == len(grp):
			unvalued++
		case grp[k].val == grp[len(grp)-1].val:
			r.obs = append(r.obs, graphidx.Observation{Entity: ent, Value: lex.ValueName(grp[k].val - 1)})
		default:
			a := grp[k]
			b := grp[k+1]
			for b.val == a.val {
				k++
				b = grp[k+1]
			}
			return nil, r.conflict(first, ent, a, b)
		}
	}
	r.bl.stats.Unvalued += unvalued
	return r.obs, nil
}

// conflict describes a paragraph stating two values of ent, at the line of
// the later of the two mentions.
func (r *TextReader) conflict(first int, ent string, a, b mentionRef) *graphidx.LineError {
	if b.at < a.at {
		a, b = b, a
	}
	quote := func(m mentionRef) string {
		end := m.at
		for _, f := range r.found {
			if f.Start == m.at {
				end = f.End
			}
		}
		return strconv.Quote(r.lex.ValueName(m.val-1)) + " (" + strconv.Quote(string(r.para[m.at:end])) + ")"
	}
	return &graphidx.LineError{File: r.name, Line: first + bytes.Count(r.para[:b.at], []byte{'\n'}), Reason: graphidx.ReasonConflictingValues,
		Detail: fmt.Sprintf("paragraph %d states %s = %s and %s", r.n, strconv.Quote(ent), quote(a), quote(b))}
}
