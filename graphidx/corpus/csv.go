package corpus

import (
	"bufio"
	"bytes"
	"container/heap"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
	"slices"
	"strconv"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// CSVReader reads a long CSV table with one observation per row:
//
//	context,entity,value
//	c1,vent3,open
//	c2,pump1,on
//	c1,zone2.humidity,high
//
// The header is required and must be context,entity,value or, for
// presence-only data, context,entity (names compared case-insensitively,
// surrounding spaces ignored, a UTF-8 byte-order mark allowed). A wrong
// header is a fatal *graphidx.LineError (reason bad-header) in both policies. Fields
// follow RFC 4180: quoted fields may contain commas, doubled quotes and line
// breaks; unquoted fields are taken verbatim (no trimming).
//
// Rows of one context may be anywhere in the file. The reader groups them
// by context id before returning anything: rows are buffered in memory up to
// the memory budget (graphidx.WithMemBudget), then sorted by (context id, line) and
// spilled as a run to the temp dir (graphidx.WithTempDir); at the end of the input
// the runs and the buffer are k-way merged (container/heap) and each group of
// equal ids becomes one context. When anything was spilled the buffer is
// spilled too, so that while contexts are returned only the runs' read
// buffers (at most 64 KiB each, together at most half the budget) stay in
// memory. Memory is therefore O(budget) whatever the file size, and
// contexts come out in ascending byte order of their id. Close removes the
// runs.
//
// Row errors are reported at the row's first line: too-many-columns,
// too-few-columns, bad-quote, line-too-long, missing-id, empty-name,
// name-too-long, bad-utf8, control-char (a newline inside a quoted field is
// a control character in a name). A quote still open at the end of the
// input is one bad-quote error whose detail names the lines it swallowed.
// A context with more rows than graphidx.WithMaxContextEntities is skipped whole
// (too-many-entities, counted once per row, reported at its first row)
// without holding more than the limit of its rows. A second row for the same (context, entity) pair
// is a duplicate-entity error at the later row, whatever its value; in
// lenient mode the earlier row is kept. Duplicate errors surface during the
// merge, after the whole file has been read. A CSVReader is not safe for
// concurrent use.
type CSVReader struct {
	lr    *lineReader
	name  string
	cfg   config
	bl    badLines
	in    interner
	cols  int
	state int // 0 before header, 1 reading, 2 emitting, 3 done

	rec       []byte
	fields    [][]byte
	recErr    string // reason of the last record's framing error, or ""
	recDetail string // its detail, or ""

	rows    []csvRow
	ctxIntn map[string]string
	mem     int64
	tmpDir  string
	runs    []string

	merge     *csvMerger
	obs       []graphidx.Observation
	group     []csvRow
	groupLine int // first line of the context Next returned last
	fatal     error
	closed    bool
}

type csvRow struct {
	ctx, ent, val string
	line          int
}

func cmpRow(a, b *csvRow) int {
	if c := strings.Compare(a.ctx, b.ctx); c != 0 {
		return c
	}
	return a.line - b.line
}

// NewCSVReader returns a reader of a long CSV table from r. name is the
// file name used in errors. Close it to remove its temporary files.
func NewCSVReader(r io.Reader, name string, opts ...ReadOption) *CSVReader {
	cfg := newConfig(opts)
	cr := &CSVReader{lr: newLineReader(r, cfg.maxLine), name: name, cfg: cfg}
	cr.bl.init(cfg.Policy)
	return cr
}

// Stats returns the row accounting so far. Records are data rows; a row is
// counted OK when its context is returned.
func (r *CSVReader) Stats() graphidx.ReadStats { return r.bl.snapshot() }

// Skipped returns the counts of skipped rows by reason.
func (r *CSVReader) Skipped() map[string]int { return r.bl.Skipped() }

// BytesRead is the number of input bytes consumed so far.
func (r *CSVReader) BytesRead() int64 { return r.lr.bytes }

// Position returns the file name and the first line of the context Next
// returned last (graphidx.Positioner).
func (r *CSVReader) Position() (string, int) { return r.name, r.groupLine }

// SpillRuns is the number of sorted runs the reader wrote to group rows.
func (r *CSVReader) SpillRuns() int { return len(r.runs) }

// Close releases the runs and the temp dir. It is safe to call twice.
func (r *CSVReader) Close() error {
	if r.closed {
		return nil
	}
	r.closed = true
	var err error
	if r.merge != nil {
		err = r.merge.close()
	}
	if r.tmpDir != "" {
		err = errors.Join(err, os.RemoveAll(r.tmpDir))
	}
	return err
}

// Next returns the next context in ascending id order, or io.EOF.
func (r *CSVReader) Next() (graphidx.Context, error) {
	if r.fatal != nil {
		return graphidx.Context{}, r.fatal
	}
	if r.state < 2 {
		if err := r.readAll(); err != nil {
			r.fatal = err
			return graphidx.Context{}, err
		}
	}
	if r.state == 3 {
		return graphidx.Context{}, io.EOF
	}
	c, err := r.nextGroup()
	if err != nil && err != io.EOF {
		r.fatal = err
	}
	if err == io.EOF {
		r.state = 3
	}
	return c, err
}

func (r *CSVReader) header() error {
	for {
		line, err := r.lr.next()
		if err == io.EOF {
			return &graphidx.LineError{File: r.name, Line: 1, Reason: graphidx.ReasonBadHeader, Detail: "empty input, want context,entity,value"}
		}
		if err != nil {
			return fmt.Errorf("%s: %w", r.name, err)
		}
		r.bl.stats.Lines++
		line = trimBOM(line)
		if isBlank(line) && !r.lr.tooLong {
			continue
		}
		want := []string{"context", "entity", "value"}
		got := strings.Split(string(line), ",")
		if len(got) == 2 || len(got) == 3 {
			ok := true
			for i, g := range got {
				if !strings.EqualFold(strings.TrimSpace(g), want[i]) {
					ok = false
				}
			}
			if ok {
				r.cols = len(got)
				return nil
			}
		}
		shown := string(line)
		if len(shown) > 80 {
			shown = shown[:80] + "..."
		}
		return &graphidx.LineError{File: r.name, Line: r.lr.line, Reason: graphidx.ReasonBadHeader,
			Detail: fmt.Sprintf("got %q, want context,entity,value or context,entity", shown)}
	}
}

// readAll reads every row, buffering and spilling, then starts the merge.
func (r *CSVReader) readAll() error {
	if r.state == 0 {
		if err := r.header(); err != nil {
			return err
		}
		r.state = 1
	}
	for {
		first, err := r.record()
		if err == io.EOF {
			break
		}
		if err != nil {
			return err
		}
		if first == 0 {
			continue // blank line
		}
		r.bl.stats.Records++
		if le := r.row(first); le != nil {
			le.File, le.Line = r.name, first
			if e := r.bl.bad(le); e != nil {
				return e
			}
		}
		if r.mem > r.cfg.MemBudget {
			if err := r.spill(); err != nil {
				return err
			}
		}
	}
	if len(r.runs) > 0 {
		// The input did not fit: spill the rest too, so that while the
		// contexts are consumed (and counted) only the read buffers of
		// the runs stay in memory, not a budget's worth of rows.
		if err := r.spill(); err != nil {
			return err
		}
	}
	slices.SortFunc(r.rows, func(a, b csvRow) int { return cmpRow(&a, &b) })
	m := &csvMerger{}
	// Each run gets a read buffer of at most 64 KiB, fewer when there are
	// many runs, so the merge stays within the budget.
	bufSize := 64 << 10
	if len(r.runs) > 0 {
		bufSize = int(min(int64(bufSize), max(4<<10, r.cfg.MemBudget/int64(2*len(r.runs)))))
	}
	for _, p := range r.runs {
		rr, err := openCSVRun(p, bufSize, &r.in)
		if err != nil {
			m.close()
			return err
		}
		m.srcs = append(m.srcs, rr)
	}
	if len(r.rows) > 0 {
		m.srcs = append(m.srcs, &memCSVRun{rows: r.rows})
	}
	if err := m.init(); err != nil {
		m.close()
		return err
	}
	r.merge = m
	r.rows = nil
	r.state = 2
	return nil
}

// record reads one CSV record into r.fields. It returns the record's first
// line number (0 for a blank line) or a *graphidx.LineError-carrying nil fields with
// the reason in r.recErr.
func (r *CSVReader) record() (int, error) {
	line, err := r.lr.next()
	if err != nil {
		if err == io.EOF {
			return 0, io.EOF
		}
		return 0, fmt.Errorf("%s: %w", r.name, err)
	}
	r.bl.stats.Lines++
	first := r.lr.line
	if r.lr.tooLong {
		r.fields = nil
		r.recErr = graphidx.ReasonLineTooLong
		return first, nil
	}
	if isBlank(line) {
		return 0, nil
	}
	r.rec = append(r.rec[:0], line...)
	r.recDetail = ""
	for {
		var st int
		r.fields, st = splitCSV(r.rec, r.fields[:0])
		switch st {
		case csvOK:
			r.recErr = ""
			return first, nil
		case csvBadQuote:
			r.fields, r.recErr = nil, graphidx.ReasonBadQuote
			return first, nil
		}
		// Inside a quoted field at the end of the line: join the next one.
		next, err := r.lr.next()
		if err == io.EOF {
			r.fields, r.recErr = nil, graphidx.ReasonBadQuote
			if last := r.lr.line; last > first {
				// The open quote ran to the end of the input: say which
				// lines (and so which rows) it swallowed.
				r.recDetail = fmt.Sprintf("quote opened on line %d never closes; it swallowed lines %d-%d (%d lines, rows on them were not read)",
					first, first+1, last, last-first)
			}
			return first, nil
		}
		if err != nil {
			return 0, fmt.Errorf("%s: %w", r.name, err)
		}
		r.bl.stats.Lines++
		if r.lr.tooLong || len(r.rec)+1+len(next) > r.lr.max {
			r.fields, r.recErr = nil, graphidx.ReasonLineTooLong
			// Skip to the end of the quoted field to resynchronise.
			for r.lr.tooLong || bytes.Count(next, []byte{'"'})%2 == 0 {
				if next, err = r.lr.next(); err != nil {
					break
				}
				r.bl.stats.Lines++
			}
			return first, nil
		}
		r.rec = append(r.rec, '\n')
		r.rec = append(r.rec, next...)
	}
}

// row validates r.fields and buffers the row.
func (r *CSVReader) row(first int) *graphidx.LineError {
	if r.recErr != "" {
		return &graphidx.LineError{Reason: r.recErr, Detail: r.recDetail}
	}
	switch {
	case len(r.fields) > r.cols:
		return &graphidx.LineError{Reason: graphidx.ReasonTooManyColumns, Detail: fmt.Sprintf("%d fields, header has %d", len(r.fields), r.cols)}
	case len(r.fields) < r.cols:
		return &graphidx.LineError{Reason: graphidx.ReasonTooFewColumns, Detail: fmt.Sprintf("%d fields, header has %d", len(r.fields), r.cols)}
	}
	names := [3]string{"context", "entity", "value"}
	for i, f := range r.fields {
		if why := graphidx.CheckName(f); why != "" {
			if i == 0 && why == graphidx.ReasonEmptyName {
				why = graphidx.ReasonMissingID
			}
			return &graphidx.LineError{Field: names[i], Reason: why}
		}
	}
	if r.ctxIntn == nil {
		r.ctxIntn = map[string]string{}
	}
	ctx, ok := r.ctxIntn[string(r.fields[0])]
	if !ok {
		ctx = string(r.fields[0])
		r.ctxIntn[ctx] = ctx
		r.mem += int64(len(ctx)) + 48
	}
	row := csvRow{ctx: ctx, ent: r.in.get(r.fields[1]), val: graphidx.PresentValue, line: first}
	if r.cols == 3 {
		row.val = r.in.get(r.fields[2])
	}
	oldCap := cap(r.rows)
	r.rows = append(r.rows, row)
	// Count the slice by its capacity: append doubles it, and the old
	// array lives on until the collector frees it.
	r.mem += int64(cap(r.rows)-oldCap)*56 + int64(len(row.ent)+len(row.val))
	return nil
}

const (
	csvOK = iota
	csvMore
	csvBadQuote
)

// splitCSV splits one RFC 4180 record. It returns csvMore when a quoted
// field is still open at the end of rec.
func splitCSV(rec []byte, fields [][]byte) ([][]byte, int) {
	i := 0
	for {
		if i < len(rec) && rec[i] == '"' {
			// Quoted field: unescape "" in place into a fresh slice of rec.
			j := i + 1
			w := j
			for {
				if j >= len(rec) {
					return fields, csvMore
				}
				if rec[j] == '"' {
					if j+1 < len(rec) && rec[j+1] == '"' {
						rec[w] = '"'
						w++
						j += 2
						continue
					}
					break
				}
				rec[w] = rec[j]
				w++
				j++
			}
			fields = append(fields, rec[i+1:w])
			j++ // closing quote
			if j == len(rec) {
				return fields, csvOK
			}
			if rec[j] != ',' {
				return fields, csvBadQuote
			}
			i = j + 1
			continue
		}
		end := bytes.IndexByte(rec[i:], ',')
		var f []byte
		if end < 0 {
			f = rec[i:]
		} else {
			f = rec[i : i+end]
		}
		if bytes.IndexByte(f, '"') >= 0 {
			return fields, csvBadQuote
		}
		fields = append(fields, f)
		if end < 0 {
			return fields, csvOK
		}
		i += end + 1
	}
}

// spill sorts the buffered rows and writes them as a run.
func (r *CSVReader) spill() error {
	if len(r.rows) == 0 {
		return nil
	}
	if r.tmpDir == "" {
		d, err := fileio.MakeSpillDir(r.cfg.TempDir, fileio.CSVDirPrefix)
		if err != nil {
			return err
		}
		r.tmpDir = d
	}
	slices.SortFunc(r.rows, func(a, b csvRow) int { return cmpRow(&a, &b) })
	path := fmt.Sprintf("%s/run-%05d", r.tmpDir, len(r.runs))
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	w := bufio.NewWriterSize(f, 256<<10)
	var tmp [binary.MaxVarintLen64]byte
	put := func(s string) {
		w.Write(tmp[:binary.PutUvarint(tmp[:], uint64(len(s)))])
		w.WriteString(s)
	}
	for i := range r.rows {
		put(r.rows[i].ctx)
		put(r.rows[i].ent)
		put(r.rows[i].val)
		w.Write(tmp[:binary.PutUvarint(tmp[:], uint64(r.rows[i].line))])
	}
	err = w.Flush()
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("graphidx: spilling CSV rows: %w", err)
	}
	r.runs = append(r.runs, path)
	clear(r.rows)
	r.rows = r.rows[:0]
	r.ctxIntn = nil
	r.mem = int64(cap(r.rows)) * 56 // the array is kept for the next rows
	if r.mem > r.cfg.MemBudget/2 {
		r.rows, r.mem = nil, 0 // unless it would leave too little room
	}
	return nil
}

// nextGroup merges the rows of the next context id.
func (r *CSVReader) nextGroup() (graphidx.Context, error) {
	m := r.merge
	for {
		if m.Len() == 0 {
			return graphidx.Context{}, io.EOF
		}
		head := m.items[0].cur
		r.group = r.group[:0]
		limit, rows := r.cfg.MaxContextEntities, 0
		for m.Len() > 0 && m.items[0].cur.ctx == head.ctx {
			// A context over the limit keeps no more rows than the limit:
			// the rest are only counted, so its memory stays O(limit).
			if rows++; limit <= 0 || rows <= limit {
				r.group = append(r.group, m.items[0].cur)
			}
			if err := m.advance(); err != nil {
				return graphidx.Context{}, err
			}
		}
		r.groupLine = r.group[0].line
		if limit > 0 && rows > limit {
			// Too wide: every row of the context is skipped, counted under
			// one reason; the error names the context's first row.
			le := &graphidx.LineError{File: r.name, Line: r.groupLine, Field: "context", Reason: graphidx.ReasonTooManyEntities,
				Detail: fmt.Sprintf("context %s has %d rows, more than %d entities in one context; all its rows were skipped",
					strconv.Quote(head.ctx), rows, limit)}
			if e := r.bl.bad(le); e != nil {
				return graphidx.Context{}, e
			}
			r.bl.stats.Skipped[graphidx.ReasonTooManyEntities] += int64(rows) - 1
			continue
		}
		// Rows are in line order; a stable sort by entity keeps the first.
		slices.SortStableFunc(r.group, func(a, b csvRow) int { return strings.Compare(a.ent, b.ent) })
		r.obs = r.obs[:0]
		for i, row := range r.group {
			if i > 0 && row.ent == r.group[i-1].ent {
				le := &graphidx.LineError{File: r.name, Line: row.line, Field: "entity", Reason: graphidx.ReasonDuplicateEntity,
					Detail: fmt.Sprintf("%s already observed in context %s at line %d", strconv.Quote(row.ent), strconv.Quote(row.ctx), r.group[i-1].line)}
				if e := r.bl.bad(le); e != nil {
					return graphidx.Context{}, e
				}
				continue
			}
			r.obs = append(r.obs, graphidx.Observation{Entity: row.ent, Value: row.val})
		}
		r.bl.stats.OK += int64(len(r.obs))
		r.bl.stats.Contexts++
		return graphidx.Context{ID: head.ctx, Obs: r.obs}, nil
	}
}

// csvSource yields rows in (ctx, line) order.
type csvSource interface {
	next() (csvRow, bool, error)
	close() error
}

type memCSVRun struct {
	rows []csvRow
	i    int
}

func (m *memCSVRun) next() (csvRow, bool, error) {
	if m.i >= len(m.rows) {
		return csvRow{}, false, nil
	}
	m.i++
	return m.rows[m.i-1], true, nil
}
func (m *memCSVRun) close() error { m.rows = nil; return nil }

type fileCSVRun struct {
	f       *os.File
	br      *bufio.Reader
	in      *interner // shared by the runs of one reader
	buf     []byte
	lastCtx string // rows of one context are consecutive: reuse its id
}

func openCSVRun(path string, bufSize int, in *interner) (*fileCSVRun, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	return &fileCSVRun{f: f, br: bufio.NewReaderSize(f, bufSize), in: in, buf: make([]byte, graphidx.MaxNameBytes)}, nil
}

func (f *fileCSVRun) str(buf []byte) ([]byte, error) {
	n, err := binary.ReadUvarint(f.br)
	if err != nil {
		return nil, err
	}
	if n > graphidx.MaxNameBytes {
		return nil, fmt.Errorf("graphidx: corrupt CSV spill run %s", f.f.Name())
	}
	buf = buf[:n]
	_, err = io.ReadFull(f.br, buf)
	return buf, err
}

func (f *fileCSVRun) next() (csvRow, bool, error) {
	buf := f.buf
	c, err := f.str(buf)
	if err == io.EOF {
		return csvRow{}, false, nil
	}
	if err != nil {
		return csvRow{}, false, err
	}
	if string(c) != f.lastCtx {
		f.lastCtx = string(c)
	}
	row := csvRow{ctx: f.lastCtx}
	e, err := f.str(buf)
	if err != nil {
		return csvRow{}, false, noEOF(err)
	}
	row.ent = f.in.get(e)
	v, err := f.str(buf)
	if err != nil {
		return csvRow{}, false, noEOF(err)
	}
	row.val = f.in.get(v)
	l, err := binary.ReadUvarint(f.br)
	if err != nil {
		return csvRow{}, false, noEOF(err)
	}
	row.line = int(l)
	return row, true, nil
}

func (f *fileCSVRun) close() error { return f.f.Close() }

func noEOF(err error) error {
	if err == io.EOF {
		return io.ErrUnexpectedEOF
	}
	return err
}

// csvMerger is a k-way merge of row sources (a min-heap on (ctx, line)).
type csvMerger struct {
	srcs  []csvSource
	items []csvItem
}

type csvItem struct {
	cur csvRow
	src csvSource
}

func (m *csvMerger) Len() int           { return len(m.items) }
func (m *csvMerger) Less(i, j int) bool { return cmpRow(&m.items[i].cur, &m.items[j].cur) < 0 }
func (m *csvMerger) Swap(i, j int)      { m.items[i], m.items[j] = m.items[j], m.items[i] }
func (m *csvMerger) Push(x any)         { m.items = append(m.items, x.(csvItem)) }
func (m *csvMerger) Pop() any {
	it := m.items[len(m.items)-1]
	m.items = m.items[:len(m.items)-1]
	return it
}

func (m *csvMerger) init() error {
	for _, s := range m.srcs {
		row, ok, err := s.next()
		if err != nil {
			return err
		}
		if ok {
			m.items = append(m.items, csvItem{cur: row, src: s})
		}
	}
	heap.Init(m)
	return nil
}

func (m *csvMerger) advance() error {
	row, ok, err := m.items[0].src.next()
	if err != nil {
		return err
	}
	if ok {
		m.items[0].cur = row
		heap.Fix(m, 0)
	} else {
		heap.Pop(m)
	}
	return nil
}

func (m *csvMerger) close() error {
	var errs []error
	for _, s := range m.srcs {
		errs = append(errs, s.close())
	}
	return errors.Join(errs...)
}
