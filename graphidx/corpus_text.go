package graphidx

import (
	"bytes"
	"fmt"
	"io"
	"slices"
	"strconv"
)

// ReasonConflictingValues: a text paragraph states two different values of
// one entity (through two lexicon forms with values). The paragraph is a bad
// record: skipped and counted in lenient mode, an error in strict mode.
const ReasonConflictingValues = "conflicting-values"

// TextReader reads plain text, one context per paragraph (paragraphs are
// separated by blank lines), and observes the lexicon entities mentioned in
// the paragraph (see Lexicon.Link for the matching rules). A paragraph's
// context id is "<name>#p<N>", N counting paragraphs from 1.
//
// Values. An entity none of whose lexicon forms carries a value is observed
// with PresentValue. An entity with at least one valued form (a valued
// entity) is observed with the value its mentions state, and never with
// PresentValue:
//   - mentions stating one value (once or more) give entity=value, also
//     when the paragraph names the entity by value-less forms as well;
//   - mentions that state no value only (a valued entity named by a
//     value-less form) leave the entity out of that context, counted in
//     ReadStats.Unvalued: its value is unknown there, and a made-up
//     "present" would become a value beside the real ones;
//   - mentions stating two or more different values make the paragraph a
//     bad record with reason conflicting-values (skipped and counted in
//     lenient mode, the error in strict mode), naming the line of the
//     mention that states the second value.
//
// A paragraph linking more entities than WithMaxContextEntities is a bad
// record with reason too-many-entities at its first line.
//
// Paragraphs left without an observation are counted in ReadStats.Empty and
// skipped; they are not errors. A paragraph longer than the line limit is a
// line-too-long error at its first line. A TextReader is not safe for
// concurrent use.
type TextReader struct {
	lr    *lineReader
	name  string
	lex   *Lexicon
	bl    badLines
	para  []byte
	n     int
	m     linker
	agg   []mentionRef
	obs   []Observation
	atEOF bool
	// maxEnts is WithMaxContextEntities (0: no limit).
	maxEnts int
}

// mentionRef is one mention of a paragraph: entity and value indexes of the
// lexicon (val 0: no value) and the byte offset in the paragraph.
type mentionRef struct {
	ent, val uint32
	at       int
}

// NewTextReader returns a reader of paragraphs from r matched against lex.
// name is the file name used in ids and errors.
func NewTextReader(r io.Reader, name string, lex *Lexicon, opts ...ReadOption) *TextReader {
	cfg := newReadConfig(opts)
	tr := &TextReader{lr: newLineReader(r, cfg.maxLine), name: name, lex: lex, maxEnts: cfg.maxCtxEnts}
	tr.bl.init(cfg.policy)
	return tr
}

// Stats returns the paragraph accounting so far.
func (r *TextReader) Stats() ReadStats { return r.bl.snapshot() }

// Skipped returns the counts of skipped paragraphs by reason.
func (r *TextReader) Skipped() map[string]int { return r.bl.Skipped() }

// BytesRead is the number of input bytes consumed so far.
func (r *TextReader) BytesRead() int64 { return r.lr.bytes }

// Next returns the context of the next paragraph with at least one match.
func (r *TextReader) Next() (Context, error) {
	if r.lex == nil {
		return Context{}, fmt.Errorf("%s: %w", r.name, ErrLexiconRequired)
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
				return Context{}, fmt.Errorf("%s:%d: %w", r.name, r.lr.line+1, err)
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
			if e := r.bl.bad(&LineError{File: r.name, Line: first, Reason: ReasonLineTooLong,
				Detail: fmt.Sprintf("paragraph %d longer than %d bytes", r.n, r.lr.max)}); e != nil {
				return Context{}, e
			}
			continue
		}
		obs, le := r.observe(first)
		if le == nil && r.maxEnts > 0 && len(obs) > r.maxEnts {
			le = &LineError{File: r.name, Line: first, Reason: ReasonTooManyEntities,
				Detail: fmt.Sprintf("paragraph %d links %d entities, more than %d in one context", r.n, len(obs), r.maxEnts)}
		}
		if le != nil {
			if e := r.bl.bad(le); e != nil {
				return Context{}, e
			}
			continue
		}
		if len(obs) == 0 {
			r.bl.stats.Empty++
			continue
		}
		r.bl.stats.OK++
		r.bl.stats.Contexts++
		return Context{ID: r.name + "#p" + strconv.Itoa(r.n), Obs: obs}, nil
	}
	return Context{}, io.EOF
}

// observe links the current paragraph (whose first line is first) and turns
// its mentions into observations by the value rules of TextReader. It
// returns a conflicting-values error for a paragraph stating two values of
// one entity. O(mentions·log mentions) beyond the linking.
func (r *TextReader) observe(first int) ([]Observation, *LineError) {
	lex := r.lex
	r.m.run(lex, r.para, false)
	r.agg = r.agg[:0]
	for _, f := range r.m.found {
		r.agg = append(r.agg, mentionRef{lex.pent[f.pat], lex.pval[f.pat], f.start})
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
		ent := lex.ents.str(g.ent)
		if !lex.valued[g.ent] {
			r.obs = append(r.obs, Observation{Entity: ent, Value: PresentValue})
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
			r.obs = append(r.obs, Observation{Entity: ent, Value: lex.values.str(grp[k].val - 1)})
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
func (r *TextReader) conflict(first int, ent string, a, b mentionRef) *LineError {
	if b.at < a.at {
		a, b = b, a
	}
	quote := func(m mentionRef) string {
		end := m.at
		for _, f := range r.m.found {
			if f.start == m.at {
				end = f.end
			}
		}
		return strconv.Quote(r.lex.values.str(m.val-1)) + " (" + strconv.Quote(string(r.para[m.at:end])) + ")"
	}
	return &LineError{File: r.name, Line: first + bytes.Count(r.para[:b.at], []byte{'\n'}), Reason: ReasonConflictingValues,
		Detail: fmt.Sprintf("paragraph %d states %s = %s and %s", r.n, strconv.Quote(ent), quote(a), quote(b))}
}
