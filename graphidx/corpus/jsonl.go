package corpus

import (
	"bytes"
	"fmt"
	"io"
	"strconv"
	"unicode/utf16"
	"unicode/utf8"
	"unsafe"

	"github.com/hopwise/hopwise/graphidx"
)

// JSONLReader reads JSON Lines contexts, one JSON object per line:
//
//	{"id":"c1","obs":{"vent3":"open","zone2.humidity":"high"}}
//	{"id":"c2","ents":["pump1","bed4"]}
//
// Rules (each violation is a *graphidx.LineError with the named reason):
//   - "id" is a non-empty string (missing-id, bad-field).
//   - "obs" is an object mapping entity names to value strings; "ents" is an
//     array of entity names observed with graphidx.PresentValue (bad-field for other
//     types). A line with both is rejected (mixed-forms); a line with
//     neither, or with an empty one, is rejected (empty-context).
//   - An entity repeated in one line is rejected (duplicate-entity), whether
//     the values differ or not; so is a repeated top-level key (bad-field).
//   - Names, values and ids are non-empty (empty-name), valid UTF-8 without
//     lone UTF-16 surrogate escapes such as "\ud800" (bad-utf8), free of
//     control characters (control-char) and at most graphidx.MaxNameBytes long
//     (name-too-long).
//   - A line names at most graphidx.WithMaxContextEntities entities
//     (too-many-entities); parsing stops at the first one over.
//   - Other top-level keys are ignored, so lines may carry metadata, except
//     keys that differ from "id", "obs" or "ents" only in case ("ID",
//     "Obs"), which are rejected (bad-field) rather than silently ignored.
//   - Blank lines are ignored and are not records.
//
// The parser is a hand-written scanner for this schema: it allocates one
// string per context id and none per repeated entity name or value. Lines
// longer than the limit (WithMaxLineBytes) are skipped in constant memory.
// A JSONLReader is not safe for concurrent use.
//
// Across lines, an entity listed in "ents" (present) on one line and given a
// value other than graphidx.PresentValue in "obs" on another would get "present" as
// a spurious extra value: the later of the two lines is rejected
// (mixed-forms), naming the entity and the first line of the other form
// (formTracker, corpus_jsonl_forms.go). JSONLLineParser, which sees one line
// at a time, cannot apply this rule.
type JSONLReader struct {
	lr   *lineReader
	name string
	bl   badLines
	in   interner
	obs  []graphidx.Observation
	p    jparser
	// forms enforces the cross-line mixed-forms rule; lineEnts says that
	// the line being parsed uses "ents" (set by parseEnts).
	forms    formTracker
	lineEnts bool
	// transient makes names views into the line buffer, valid only until
	// the next call to Next. Only graphidx.Build sets it, through SetTransient: it
	// copies what it keeps, and skipping the interner saves a map lookup
	// per observation.
	transient bool
	maxEnts   int // most entities per line (0: no limit)
}

// SetTransient turns views on or off (graphidx.TransientReader): with views
// on, the names and values of a returned context are views into the line
// buffer, valid only until the next call to Next. graphidx.Build turns them
// on while it reads, since it copies what it keeps; off by default.
func (r *JSONLReader) SetTransient(on bool) { r.transient = on }

// str returns the string of a just-parsed JSON string s.
func (r *JSONLReader) str(s []byte) string {
	if r.transient && !r.p.escaped {
		return unsafe.String(&s[0], len(s)) // s is non-empty: checkName ran
	}
	return r.in.get(s)
}

// NewJSONLReader returns a reader of JSONL contexts from r. name is the file
// name used in errors.
func NewJSONLReader(r io.Reader, name string, opts ...ReadOption) *JSONLReader {
	cfg := newConfig(opts)
	jr := &JSONLReader{lr: newLineReader(r, cfg.maxLine), name: name, maxEnts: cfg.MaxContextEntities}
	jr.bl.init(cfg.Policy)
	return jr
}

// Next returns the next valid context or io.EOF. In strict mode it returns
// the first bad line as a *graphidx.LineError; in lenient mode it skips and counts it.
func (r *JSONLReader) Next() (graphidx.Context, error) {
	for {
		line, err := r.lr.next()
		if err == io.EOF {
			return graphidx.Context{}, io.EOF
		}
		if err != nil {
			return graphidx.Context{}, fmt.Errorf("%s:%d: %w", r.name, r.lr.line+1, err)
		}
		r.bl.stats.Lines++
		if r.lr.line == 1 {
			line = trimBOM(line)
		}
		if r.lr.tooLong {
			r.bl.stats.Records++
			if e := r.bl.bad(&graphidx.LineError{File: r.name, Line: r.lr.line, Reason: graphidx.ReasonLineTooLong,
				Detail: fmt.Sprintf("longer than %d bytes", r.lr.max)}); e != nil {
				return graphidx.Context{}, e
			}
			continue
		}
		if isBlank(line) {
			continue
		}
		r.bl.stats.Records++
		r.lineEnts = false // set by parseEnts
		c, le := r.parse(line)
		if le == nil {
			le = r.forms.check(r.obs, r.lineEnts, r.lr.line)
		}
		if le != nil {
			le.File, le.Line = r.name, r.lr.line
			if e := r.bl.bad(le); e != nil {
				return graphidx.Context{}, e
			}
			continue
		}
		r.bl.stats.OK++
		r.bl.stats.Contexts++
		return c, nil
	}
}

// Position returns the file name and the line of the context Next returned
// last (graphidx.Positioner).
func (r *JSONLReader) Position() (string, int) { return r.name, r.lr.line }

// Stats returns the line accounting so far.
func (r *JSONLReader) Stats() graphidx.ReadStats { return r.bl.snapshot() }

// Skipped returns the counts of skipped lines by reason.
func (r *JSONLReader) Skipped() map[string]int { return r.bl.Skipped() }

// BytesRead is the number of input bytes consumed so far.
func (r *JSONLReader) BytesRead() int64 { return r.lr.bytes }

func isBlank(b []byte) bool {
	for _, c := range b {
		if c != ' ' && c != '\t' && c != '\r' {
			return false
		}
	}
	return true
}

func (r *JSONLReader) parse(line []byte) (graphidx.Context, *graphidx.LineError) {
	p := &r.p
	p.b, p.i, p.badSurrogate = line, 0, false
	r.obs = r.obs[:0]
	var (
		c                        graphidx.Context
		seenID, seenObs, seenEnt bool
	)
	p.ws()
	if !p.eat('{') {
		return c, p.syntax("want a JSON object")
	}
	p.ws()
	if !p.eat('}') {
		for {
			p.ws()
			key, ok := p.str()
			if !ok {
				return c, p.syntax("want a string key")
			}
			var k string
			switch string(key) { // no allocation: the compiler converts in place
			case "id":
				k = "id"
			case "obs":
				k = "obs"
			case "ents":
				k = "ents"
			default:
				if v := caseVariant(key); v != "" {
					return c, &graphidx.LineError{Field: graphidx.EscapeControl(string(key)), Reason: graphidx.ReasonBadField,
						Detail: fmt.Sprintf("key differs from %q only in case", v)}
				}
			}
			p.ws()
			if !p.eat(':') {
				return c, p.syntax("want ':'")
			}
			p.ws()
			switch k {
			case "id":
				if seenID {
					return c, &graphidx.LineError{Field: "id", Reason: graphidx.ReasonBadField, Detail: "repeated key"}
				}
				seenID = true
				if p.peek() != '"' {
					if !p.skip(0) {
						return c, p.syntax("bad value")
					}
					return c, &graphidx.LineError{Field: "id", Reason: graphidx.ReasonBadField, Detail: "want a string"}
				}
				s, ok := p.str()
				if !ok {
					return c, p.syntax("bad string")
				}
				if why := graphidx.CheckName(s); why != "" {
					if why == graphidx.ReasonEmptyName {
						why = graphidx.ReasonMissingID
					}
					return c, &graphidx.LineError{Field: "id", Reason: why}
				}
				if r.transient && !p.escaped {
					c.ID = unsafe.String(&s[0], len(s))
				} else {
					c.ID = string(s)
				}
			case "obs":
				if seenObs {
					return c, &graphidx.LineError{Field: "obs", Reason: graphidx.ReasonBadField, Detail: "repeated key"}
				}
				seenObs = true
				if le := r.parseObs(); le != nil {
					return c, le
				}
			case "ents":
				if seenEnt {
					return c, &graphidx.LineError{Field: "ents", Reason: graphidx.ReasonBadField, Detail: "repeated key"}
				}
				seenEnt = true
				if le := r.parseEnts(); le != nil {
					return c, le
				}
			default:
				if !p.skip(0) {
					return c, p.syntax("bad value")
				}
			}
			p.ws()
			if p.eat(',') {
				continue
			}
			if p.eat('}') {
				break
			}
			return c, p.syntax("want ',' or '}'")
		}
	}
	p.ws()
	if p.i != len(p.b) {
		return c, p.syntax("trailing data after the object")
	}
	switch {
	case !seenID:
		return c, &graphidx.LineError{Field: "id", Reason: graphidx.ReasonMissingID}
	case seenObs && seenEnt:
		return c, &graphidx.LineError{Reason: graphidx.ReasonMixedForms, Detail: `both "obs" and "ents"`}
	case len(r.obs) == 0:
		return c, &graphidx.LineError{Reason: graphidx.ReasonEmptyContext}
	}
	if name, dup := dupCheck(r.obs); dup {
		f := "ents"
		if seenObs {
			f = "obs." + name
		}
		return c, &graphidx.LineError{Field: f, Reason: graphidx.ReasonDuplicateEntity, Detail: strconv.Quote(name)}
	}
	c.Obs = r.obs
	return c, nil
}

// caseVariant returns the known key ("id", "obs", "ents") that key matches
// case-insensitively but not exactly, or "". Such a key is rejected rather
// than ignored as metadata: {"ID":"a","id":"b"} or {"Obs":{...}} is a
// mistake, and readers that fold case would take the other key.
func caseVariant(key []byte) string {
	for _, k := range [...]string{"id", "obs", "ents"} {
		if len(key) == len(k) && string(key) != k && bytes.EqualFold(key, []byte(k)) {
			return k
		}
	}
	return ""
}

// tooMany reports a line with more entities than the reader's limit; the
// caller stops parsing it, so a wide line costs O(limit) memory.
func (r *JSONLReader) tooMany(field string) *graphidx.LineError {
	if r.maxEnts > 0 && len(r.obs) > r.maxEnts {
		return &graphidx.LineError{Field: field, Reason: graphidx.ReasonTooManyEntities,
			Detail: fmt.Sprintf("more than %d entities in one context", r.maxEnts)}
	}
	return nil
}

func (r *JSONLReader) parseObs() *graphidx.LineError {
	p := &r.p
	if p.peek() != '{' {
		if !p.skip(0) {
			return p.syntax("bad value")
		}
		return &graphidx.LineError{Field: "obs", Reason: graphidx.ReasonBadField, Detail: "want an object of strings"}
	}
	p.i++
	p.ws()
	if p.eat('}') {
		return nil
	}
	for {
		p.ws()
		k, ok := p.str()
		if !ok {
			return p.syntax("want a string key in obs")
		}
		if why := graphidx.CheckName(k); why != "" {
			return &graphidx.LineError{Field: "obs", Reason: why, Detail: "entity name"}
		}
		ent := r.str(k)
		p.ws()
		if !p.eat(':') {
			return p.syntax("want ':'")
		}
		p.ws()
		if p.peek() != '"' {
			if !p.skip(0) {
				return p.syntax("bad value")
			}
			return &graphidx.LineError{Field: "obs." + ent, Reason: graphidx.ReasonBadField, Detail: "want a string value"}
		}
		v, ok := p.str()
		if !ok {
			return p.syntax("bad string")
		}
		if why := graphidx.CheckName(v); why != "" {
			return &graphidx.LineError{Field: "obs." + ent, Reason: why, Detail: "value"}
		}
		r.obs = append(r.obs, graphidx.Observation{Entity: ent, Value: r.str(v)})
		if le := r.tooMany("obs"); le != nil {
			return le
		}
		p.ws()
		if p.eat(',') {
			continue
		}
		if p.eat('}') {
			return nil
		}
		return p.syntax("want ',' or '}' in obs")
	}
}

func (r *JSONLReader) parseEnts() *graphidx.LineError {
	p := &r.p
	r.lineEnts = true
	if p.peek() != '[' {
		if !p.skip(0) {
			return p.syntax("bad value")
		}
		return &graphidx.LineError{Field: "ents", Reason: graphidx.ReasonBadField, Detail: "want an array of strings"}
	}
	p.i++
	p.ws()
	if p.eat(']') {
		return nil
	}
	for n := 0; ; n++ {
		p.ws()
		if p.peek() != '"' {
			if !p.skip(0) {
				return p.syntax("bad value")
			}
			return &graphidx.LineError{Field: fmt.Sprintf("ents[%d]", n), Reason: graphidx.ReasonBadField, Detail: "want a string"}
		}
		s, ok := p.str()
		if !ok {
			return p.syntax("bad string")
		}
		if why := graphidx.CheckName(s); why != "" {
			return &graphidx.LineError{Field: fmt.Sprintf("ents[%d]", n), Reason: why}
		}
		r.obs = append(r.obs, graphidx.Observation{Entity: r.str(s), Value: graphidx.PresentValue})
		if le := r.tooMany("ents"); le != nil {
			return le
		}
		p.ws()
		if p.eat(',') {
			continue
		}
		if p.eat(']') {
			return nil
		}
		return p.syntax("want ',' or ']' in ents")
	}
}

// jparser is a minimal JSON scanner over one line (RFC 8259 grammar).
type jparser struct {
	b       []byte
	i       int
	scratch []byte
	escaped bool // the last string had escapes (decoded into scratch)
	// badSurrogate: the last string failed on a lone UTF-16 surrogate
	// escape; syntax reports it as bad-utf8 instead of bad-json.
	badSurrogate bool
}

const maxJSONDepth = 512

func (p *jparser) syntax(msg string) *graphidx.LineError {
	if p.badSurrogate {
		return &graphidx.LineError{Reason: graphidx.ReasonBadUTF8, Detail: fmt.Sprintf("column %d: lone UTF-16 surrogate escape", p.i+1)}
	}
	return &graphidx.LineError{Reason: graphidx.ReasonBadJSON, Detail: fmt.Sprintf("column %d: %s", p.i+1, msg)}
}

func (p *jparser) ws() {
	for p.i < len(p.b) {
		switch p.b[p.i] {
		case ' ', '\t', '\r', '\n':
			p.i++
		default:
			return
		}
	}
}

func (p *jparser) peek() byte {
	if p.i < len(p.b) {
		return p.b[p.i]
	}
	return 0
}

func (p *jparser) eat(c byte) bool {
	if p.i < len(p.b) && p.b[p.i] == c {
		p.i++
		return true
	}
	return false
}

// str parses a JSON string at p.i and returns its decoded bytes, which are
// valid until the next call. Invalid escapes and control characters fail.
func (p *jparser) str() ([]byte, bool) {
	if !p.eat('"') {
		return nil, false
	}
	p.escaped, p.badSurrogate = false, false
	start := p.i
	for p.i < len(p.b) {
		c := p.b[p.i]
		if c == '"' {
			s := p.b[start:p.i]
			p.i++
			return s, true
		}
		if c == '\\' {
			return p.strSlow(start)
		}
		if c < 0x20 {
			return nil, false
		}
		p.i++
	}
	return nil, false
}

func (p *jparser) strSlow(start int) ([]byte, bool) {
	p.escaped = true
	out := append(p.scratch[:0], p.b[start:p.i]...)
	defer func() { p.scratch = out[:0] }()
	for p.i < len(p.b) {
		c := p.b[p.i]
		switch {
		case c == '"':
			p.i++
			return out, true
		case c < 0x20:
			return nil, false
		case c != '\\':
			out = append(out, c)
			p.i++
			continue
		}
		if p.i+1 >= len(p.b) {
			return nil, false
		}
		e := p.b[p.i+1]
		p.i += 2
		switch e {
		case '"', '\\', '/':
			out = append(out, e)
		case 'b':
			out = append(out, '\b')
		case 'f':
			out = append(out, '\f')
		case 'n':
			out = append(out, '\n')
		case 'r':
			out = append(out, '\r')
		case 't':
			out = append(out, '\t')
		case 'u':
			r, ok := p.hex4()
			if !ok {
				return nil, false
			}
			if utf16.IsSurrogate(r) {
				// A high surrogate followed by a low one is one rune. A lone
				// surrogate is rejected (encoding/json would decode it to
				// U+FFFD, merging distinct names): the string fails with
				// badSurrogate set, and the caller reports bad-utf8.
				if p.i+1 >= len(p.b) || p.b[p.i] != '\\' || p.b[p.i+1] != 'u' {
					p.badSurrogate = true
					return nil, false
				}
				p.i += 2
				r2, ok2 := p.hex4()
				if !ok2 {
					return nil, false
				}
				if r = utf16.DecodeRune(r, r2); r == utf8.RuneError {
					p.badSurrogate = true
					return nil, false
				}
			}
			out = utf8.AppendRune(out, r)
		default:
			return nil, false
		}
	}
	return nil, false
}

func (p *jparser) hex4() (rune, bool) {
	if p.i+4 > len(p.b) {
		return 0, false
	}
	var r rune
	for _, c := range p.b[p.i : p.i+4] {
		r <<= 4
		switch {
		case '0' <= c && c <= '9':
			r |= rune(c - '0')
		case 'a' <= c && c <= 'f':
			r |= rune(c - 'a' + 10)
		case 'A' <= c && c <= 'F':
			r |= rune(c - 'A' + 10)
		default:
			return 0, false
		}
	}
	p.i += 4
	return r, true
}

// skip parses and discards one JSON value.
func (p *jparser) skip(depth int) bool {
	if depth > maxJSONDepth {
		return false
	}
	p.ws()
	switch c := p.peek(); {
	case c == '"':
		_, ok := p.str()
		return ok
	case c == '{':
		p.i++
		p.ws()
		if p.eat('}') {
			return true
		}
		for {
			p.ws()
			if _, ok := p.str(); !ok {
				return false
			}
			p.ws()
			if !p.eat(':') || !p.skip(depth+1) {
				return false
			}
			p.ws()
			if p.eat(',') {
				continue
			}
			return p.eat('}')
		}
	case c == '[':
		p.i++
		p.ws()
		if p.eat(']') {
			return true
		}
		for {
			if !p.skip(depth + 1) {
				return false
			}
			p.ws()
			if p.eat(',') {
				continue
			}
			return p.eat(']')
		}
	case c == 't':
		return p.lit("true")
	case c == 'f':
		return p.lit("false")
	case c == 'n':
		return p.lit("null")
	case c == '-' || ('0' <= c && c <= '9'):
		return p.num()
	}
	return false
}

func (p *jparser) lit(s string) bool {
	if len(p.b)-p.i >= len(s) && string(p.b[p.i:p.i+len(s)]) == s {
		p.i += len(s)
		return true
	}
	return false
}

func (p *jparser) digits() int {
	n := 0
	for p.i < len(p.b) && '0' <= p.b[p.i] && p.b[p.i] <= '9' {
		p.i++
		n++
	}
	return n
}

func (p *jparser) num() bool {
	p.eat('-')
	if p.eat('0') {
		// no leading zeros
	} else if p.digits() == 0 {
		return false
	}
	if p.eat('.') && p.digits() == 0 {
		return false
	}
	if p.eat('e') || p.eat('E') {
		if !p.eat('+') {
			p.eat('-')
		}
		if p.digits() == 0 {
			return false
		}
	}
	return true
}
