package corpus

import (
	"strconv"

	"github.com/hopwise/hopwise/graphidx"
)

// JSONLLineParser parses one JSONL context line at a time with exactly the
// rules of JSONLReader (see its documentation). It is the entry point for
// callers that receive lines already split, such as a distributed pipeline
// reading corpus shards in parallel ranges: they see each line alone, without
// a file position, so a graphidx.LineError from Parse names the file but has Line 0.
//
// The line must not contain its terminator; a trailing "\r" is allowed. The
// returned Context's Obs slice is reused by the next call to Parse. A
// JSONLLineParser is not safe for concurrent use; use one per goroutine.
type JSONLLineParser struct {
	r    JSONLReader
	name string
	max  int
}

// NewJSONLLineParser returns a parser whose errors name the file name.
// Only WithMaxLineBytes and graphidx.WithMaxContextEntities are used from opts; the bad-line policy belongs to
// the caller, who decides whether to stop or to count and skip.
func NewJSONLLineParser(name string, opts ...ReadOption) *JSONLLineParser {
	cfg := newConfig(opts)
	return &JSONLLineParser{name: name, max: cfg.maxLine, r: JSONLReader{maxEnts: cfg.MaxContextEntities}}
}

// Parse parses one line. blank is true for a blank line, which is not a
// record and gives neither a context nor an error. Otherwise it returns the
// context or a *graphidx.LineError (File set, Line 0) with one of the Reason* codes.
// O(len(line)).
func (p *JSONLLineParser) Parse(line []byte) (c graphidx.Context, blank bool, err error) {
	if n := len(line); n > 0 && line[n-1] == '\r' {
		line = line[:n-1]
	}
	if len(line) > p.max {
		return graphidx.Context{}, false, &graphidx.LineError{File: p.name, Reason: graphidx.ReasonLineTooLong,
			Detail: "longer than " + strconv.Itoa(p.max) + " bytes"}
	}
	if isBlank(line) {
		return graphidx.Context{}, true, nil
	}
	c, le := p.r.parse(line)
	if le != nil {
		le.File = p.name
		return graphidx.Context{}, false, le
	}
	return c, false, nil
}
