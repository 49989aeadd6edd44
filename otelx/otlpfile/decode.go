package otlpfile

import (
	"bufio"
	"bytes"
	"encoding/base64"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"

	commonpb "go.opentelemetry.io/proto/otlp/common/v1"
	resourcepb "go.opentelemetry.io/proto/otlp/resource/v1"
	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
)

// ErrMalformed is wrapped by every decoding error: the line is not a valid
// OTLP/JSON TracesData object (bad JSON, truncated line, wrong id length,
// bad number, unknown enum name...).
var ErrMalformed = errors.New("otlpfile: malformed OTLP/JSON line")

// ErrNotJSONLines is wrapped when a file is not text at all: gzip or zstd
// compressed, or binary (OTLP protobuf). The message says which.
var ErrNotJSONLines = errors.New("otlpfile: not an OTLP JSON Lines file")

// MaxObjects is the most JSON objects one line may open (counted as '{'
// bytes, an upper bound that also counts braces inside strings). An export
// batch of 8 192 spans with 20 attributes each opens about 400 000; the
// limit bounds one line's decoded memory to well under a gigabyte, where
// 20 million empty objects in a 60 MB line took 3.5 GB.
const MaxObjects = 1 << 22

// ErrTooManyObjects is wrapped (with ErrMalformed) when a line opens more
// than MaxObjects JSON objects.
var ErrTooManyObjects = errors.New("otlpfile: too many objects in one line")

// ErrLineTooLong is wrapped when a line exceeds the scanner's limit.
var ErrLineTooLong = errors.New("otlpfile: line too long")

// LineError locates a decoding error: file name and 1-based line number.
type LineError struct {
	File string
	Line int
	Err  error
}

func (e *LineError) Error() string { return fmt.Sprintf("%s:%d: %v", e.File, e.Line, e.Err) }

// Unwrap returns the underlying error.
func (e *LineError) Unwrap() error { return e.Err }

// Decode parses one OTLP/JSON TracesData object. Trace and span ids are
// decoded from hex (16 and 8 bytes; an empty string means absent), 64-bit
// integers are accepted as strings or numbers, enums as integers or their
// proto names, doubles as numbers or "NaN"/"Infinity"/"-Infinity". Unknown
// keys are ignored, as the OTLP/JSON rules ask of receivers. Errors wrap
// ErrMalformed and name the JSON path of the offending field. Cost
// O(len(line)).
//
// A line with more than MaxObjects JSON objects is refused before
// decoding (ErrTooManyObjects): decoded, each object costs about 150–200
// bytes however short its text ("{}," is three bytes), so the limit bounds
// the memory one line can take whatever its length.
func Decode(line []byte) (*tracepb.TracesData, error) {
	if n := bytes.Count(line, []byte{'{'}); n > MaxObjects {
		return nil, fmt.Errorf("%w: %w: the line opens %d JSON objects, more than %d; split the export into smaller batches", ErrMalformed, ErrTooManyObjects, n, MaxObjects)
	}
	var j jTracesData
	dec := json.NewDecoder(bytes.NewReader(line))
	if err := dec.Decode(&j); err != nil {
		return nil, malformed(err)
	}
	if tok, err := dec.Token(); err != io.EOF {
		if err != nil {
			return nil, malformed(err)
		}
		return nil, fmt.Errorf("%w: trailing data after object (%v)", ErrMalformed, tok)
	}
	return j.convert()
}

func malformed(err error) error {
	var se *json.SyntaxError
	var te *json.UnmarshalTypeError
	switch {
	case errors.As(err, &se):
		return fmt.Errorf("%w: %v at byte %d", ErrMalformed, se, se.Offset)
	case errors.As(err, &te):
		return fmt.Errorf("%w: field %s: cannot use JSON %s as %s (byte %d)", ErrMalformed, te.Field, te.Value, te.Type, te.Offset)
	case errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF):
		return fmt.Errorf("%w: truncated object (unexpected end of input)", ErrMalformed)
	case errors.Is(err, ErrMalformed):
		return err
	}
	return fmt.Errorf("%w: %v", ErrMalformed, err)
}

// Scanner streams TracesData objects from an OTLP JSON Lines file. Blank
// lines are skipped. It stops at the first bad line; Err then returns a
// *LineError naming the file and line.
type Scanner struct {
	br      *bufio.Reader
	checked bool // the start of the input was checked by sniff
	sc      *bufio.Scanner
	name    string
	line    int
	td      *tracepb.TracesData
	err     error
}

// DefaultMaxLine is the default limit on one line's length (256 MiB).
const DefaultMaxLine = 256 << 20

// NewScanner returns a scanner over r; name is used in error messages.
// maxLine bounds the length of one line (DefaultMaxLine if ≤ 0).
func NewScanner(r io.Reader, name string, maxLine int) *Scanner {
	if maxLine <= 0 {
		maxLine = DefaultMaxLine
	}
	br := bufio.NewReaderSize(r, 4096)
	sc := bufio.NewScanner(br)
	sc.Buffer(make([]byte, 0, min(64<<10, maxLine)), maxLine)
	return &Scanner{br: br, sc: sc, name: name}
}

// zstdMagic starts every zstd frame (RFC 8878 §3.1.1).
var zstdMagic = []byte{0x28, 0xb5, 0x2f, 0xfd}

// sniff looks at the first bytes of a file and says what it is when it is
// not text that could be OTLP JSON Lines: a compressed file (the
// collector's file exporter writes zstd with compression: zstd; gzip is
// the usual archive format) or a binary one (the file exporter's format:
// proto writes length-prefixed OTLP protobuf). "" when it may be JSON.
func sniff(head []byte) string {
	switch {
	case bytes.HasPrefix(head, []byte{0x1f, 0x8b}):
		return "the file is gzip-compressed; decompress it first (gunzip), as hopwise reads uncompressed OTLP JSON Lines"
	case bytes.HasPrefix(head, zstdMagic):
		return "the file is zstd-compressed; decompress it (zstd -d) or configure the exporter without compression"
	case len(head) >= 8 && bytes.Equal(head[4:8], zstdMagic):
		return "the file holds length-prefixed zstd-compressed messages (the collector file exporter's compression: zstd); configure the exporter without compression"
	}
	t := bytes.TrimLeft(head, " \t\r\n")
	if len(t) == 0 || t[0] == '{' {
		return ""
	}
	if i := bytes.IndexByte(t, '\n'); i >= 0 {
		t = t[:i]
	}
	for _, c := range t {
		if c < 0x20 && c != '\t' && c != '\r' {
			return fmt.Sprintf("the file is binary (first bytes % x), likely OTLP protobuf (the collector file exporter's format: proto); configure format: json", head[:min(len(head), 8)])
		}
	}
	return ""
}

// Scan advances to the next non-blank line and decodes it. It returns false
// at the end of input or on the first error.
func (s *Scanner) Scan() bool {
	if s.err != nil {
		return false
	}
	if !s.checked {
		s.checked = true
		head, _ := s.br.Peek(512) // a short or failing read is reported by the scan below
		if what := sniff(head); what != "" {
			s.err = &LineError{File: s.name, Line: 1, Err: fmt.Errorf("%w: %s", ErrNotJSONLines, what)}
			return false
		}
	}
	for s.sc.Scan() {
		s.line++
		b := bytes.TrimSpace(s.sc.Bytes())
		if len(b) == 0 {
			continue
		}
		td, err := Decode(b)
		if err != nil {
			s.err = &LineError{File: s.name, Line: s.line, Err: err}
			s.td = nil
			return false
		}
		s.td = td
		return true
	}
	if err := s.sc.Err(); err != nil {
		if errors.Is(err, bufio.ErrTooLong) {
			err = fmt.Errorf("%w (%v)", ErrLineTooLong, err)
		}
		s.err = &LineError{File: s.name, Line: s.line + 1, Err: err}
	}
	s.td = nil
	return false
}

// TracesData returns the object decoded by the last successful Scan.
func (s *Scanner) TracesData() *tracepb.TracesData { return s.td }

// Line returns the 1-based number of the line last read.
func (s *Scanner) Line() int { return s.line }

// Err returns the first error met, or nil at a clean end of input.
func (s *Scanner) Err() error { return s.err }

// ---- JSON mirror types -------------------------------------------------

type jTracesData struct {
	ResourceSpans []*jResourceSpans `json:"resourceSpans"`
}

type jResourceSpans struct {
	Resource   *jResource     `json:"resource"`
	ScopeSpans []*jScopeSpans `json:"scopeSpans"`
	SchemaURL  string         `json:"schemaUrl"`
}

type jResource struct {
	Attributes             []*jKeyValue  `json:"attributes"`
	DroppedAttributesCount uint32        `json:"droppedAttributesCount"`
	EntityRefs             []*jEntityRef `json:"entityRefs"`
}

type jEntityRef struct {
	SchemaURL       string   `json:"schemaUrl"`
	Type            string   `json:"type"`
	IDKeys          []string `json:"idKeys"`
	DescriptionKeys []string `json:"descriptionKeys"`
}

type jScope struct {
	Name                   string       `json:"name"`
	Version                string       `json:"version"`
	Attributes             []*jKeyValue `json:"attributes"`
	DroppedAttributesCount uint32       `json:"droppedAttributesCount"`
}

type jScopeSpans struct {
	Scope     *jScope  `json:"scope"`
	Spans     []*jSpan `json:"spans"`
	SchemaURL string   `json:"schemaUrl"`
}

type jSpan struct {
	TraceID                string       `json:"traceId"`
	SpanID                 string       `json:"spanId"`
	TraceState             string       `json:"traceState"`
	ParentSpanID           string       `json:"parentSpanId"`
	Flags                  uint32       `json:"flags"`
	Name                   string       `json:"name"`
	Kind                   jEnum        `json:"kind"`
	StartTimeUnixNano      jUint64      `json:"startTimeUnixNano"`
	EndTimeUnixNano        jUint64      `json:"endTimeUnixNano"`
	Attributes             []*jKeyValue `json:"attributes"`
	DroppedAttributesCount uint32       `json:"droppedAttributesCount"`
	Events                 []*jEvent    `json:"events"`
	DroppedEventsCount     uint32       `json:"droppedEventsCount"`
	Links                  []*jLink     `json:"links"`
	DroppedLinksCount      uint32       `json:"droppedLinksCount"`
	Status                 *jStatus     `json:"status"`
}

type jEvent struct {
	TimeUnixNano           jUint64      `json:"timeUnixNano"`
	Name                   string       `json:"name"`
	Attributes             []*jKeyValue `json:"attributes"`
	DroppedAttributesCount uint32       `json:"droppedAttributesCount"`
}

type jLink struct {
	TraceID                string       `json:"traceId"`
	SpanID                 string       `json:"spanId"`
	TraceState             string       `json:"traceState"`
	Attributes             []*jKeyValue `json:"attributes"`
	DroppedAttributesCount uint32       `json:"droppedAttributesCount"`
	Flags                  uint32       `json:"flags"`
}

type jStatus struct {
	Message string `json:"message"`
	Code    jEnum  `json:"code"`
}

type jKeyValue struct {
	Key         string     `json:"key"`
	Value       *jAnyValue `json:"value"`
	KeyStrindex int32      `json:"keyStrindex"`
}

type jAnyValue struct {
	StringValue         *string  `json:"stringValue"`
	BoolValue           *bool    `json:"boolValue"`
	IntValue            *jInt64  `json:"intValue"`
	DoubleValue         *jFloat  `json:"doubleValue"`
	ArrayValue          *jArray  `json:"arrayValue"`
	KvlistValue         *jKvList `json:"kvlistValue"`
	BytesValue          *string  `json:"bytesValue"`
	StringValueStrindex *int32   `json:"stringValueStrindex"`
}

type jArray struct {
	Values []*jAnyValue `json:"values"`
}

type jKvList struct {
	Values []*jKeyValue `json:"values"`
}

// jUint64 accepts a 64-bit unsigned integer as a decimal string or number.
type jUint64 uint64

func (u *jUint64) UnmarshalJSON(b []byte) error {
	s, ok := unquoteNumber(b)
	if !ok {
		return nil // null
	}
	v, err := strconv.ParseUint(s, 10, 64)
	if err != nil {
		return fmt.Errorf("%w: bad 64-bit unsigned integer %s", ErrMalformed, b)
	}
	*u = jUint64(v)
	return nil
}

// jInt64 accepts a 64-bit signed integer as a decimal string or number.
type jInt64 int64

func (u *jInt64) UnmarshalJSON(b []byte) error {
	s, ok := unquoteNumber(b)
	if !ok {
		return nil
	}
	v, err := strconv.ParseInt(s, 10, 64)
	if err != nil {
		return fmt.Errorf("%w: bad 64-bit integer %s", ErrMalformed, b)
	}
	*u = jInt64(v)
	return nil
}

// jFloat accepts a JSON number, a numeric string, or NaN/Infinity/-Infinity.
type jFloat float64

func (f *jFloat) UnmarshalJSON(b []byte) error {
	s, ok := unquoteNumber(b)
	if !ok {
		return nil
	}
	switch s {
	case "NaN":
		*f = jFloat(math.NaN())
		return nil
	case "Infinity":
		*f = jFloat(math.Inf(1))
		return nil
	case "-Infinity":
		*f = jFloat(math.Inf(-1))
		return nil
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return fmt.Errorf("%w: bad double %s", ErrMalformed, b)
	}
	*f = jFloat(v)
	return nil
}

// jEnum accepts an enum as an integer (the OTLP/JSON form) or, leniently,
// as its proto name; names are resolved by the caller.
type jEnum struct {
	num  int32
	name string
}

func (e *jEnum) UnmarshalJSON(b []byte) error {
	if len(b) > 0 && b[0] == '"' {
		return json.Unmarshal(b, &e.name)
	}
	if string(b) == "null" {
		return nil
	}
	v, err := strconv.ParseInt(string(b), 10, 32)
	if err != nil {
		return fmt.Errorf("%w: bad enum value %s", ErrMalformed, b)
	}
	e.num = int32(v)
	return nil
}

func (e jEnum) resolve(names map[string]int32, p *path) (int32, error) {
	if e.name == "" {
		return e.num, nil
	}
	v, ok := names[e.name]
	if !ok {
		return 0, badf(p, "unknown enum name %q", e.name)
	}
	return v, nil
}

// unquoteNumber strips the quotes of a JSON string holding a number; ok is
// false for null.
func unquoteNumber(b []byte) (string, bool) {
	if string(b) == "null" {
		return "", false
	}
	if len(b) >= 2 && b[0] == '"' && b[len(b)-1] == '"' {
		return string(b[1 : len(b)-1]), true
	}
	return string(b), true
}

// ---- conversion --------------------------------------------------------

// path is a JSON path built only when an error is reported: each node
// names a field, optionally indexed, optionally with an attribute key.
type path struct {
	parent *path
	name   string
	idx    int // −1: no index
	key    string
}

func (p *path) String() string {
	if p == nil {
		return ""
	}
	s := p.parent.String()
	if p.name != "" {
		if s != "" {
			s += "."
		}
		s += p.name
	}
	if p.idx >= 0 {
		s += "[" + strconv.Itoa(p.idx) + "]"
	}
	if p.key != "" {
		s += "(" + p.key + ")"
	}
	return s
}

func field(parent *path, name string) path       { return path{parent: parent, name: name, idx: -1} }
func elem(parent *path, name string, i int) path { return path{parent: parent, name: name, idx: i} }

func badf(p *path, format string, args ...any) error {
	return fmt.Errorf("%w: %s: %s", ErrMalformed, p, fmt.Sprintf(format, args...))
}

func decodeID(s string, n int, p *path) ([]byte, error) {
	if s == "" {
		return nil, nil
	}
	if len(s) != 2*n {
		return nil, badf(p, "want %d hex digits, got %d (%q)", 2*n, len(s), s)
	}
	b, err := hex.DecodeString(s)
	if err != nil {
		return nil, badf(p, "not hex: %q", s)
	}
	return b, nil
}

func (j *jTracesData) convert() (*tracepb.TracesData, error) {
	td := &tracepb.TracesData{ResourceSpans: make([]*tracepb.ResourceSpans, 0, len(j.ResourceSpans))}
	for i, r := range j.ResourceSpans {
		if r == nil {
			continue
		}
		rp := elem(nil, "resourceSpans", i)
		rs := &tracepb.ResourceSpans{SchemaUrl: r.SchemaURL}
		if r.Resource != nil {
			resP := field(&rp, "resource")
			ap := field(&resP, "attributes")
			attrs, err := convertKVs(r.Resource.Attributes, &ap, 0)
			if err != nil {
				return nil, err
			}
			rs.Resource = &resourcepb.Resource{Attributes: attrs, DroppedAttributesCount: r.Resource.DroppedAttributesCount}
			for _, e := range r.Resource.EntityRefs {
				if e == nil {
					continue
				}
				rs.Resource.EntityRefs = append(rs.Resource.EntityRefs, &commonpb.EntityRef{
					SchemaUrl: e.SchemaURL, Type: e.Type, IdKeys: e.IDKeys, DescriptionKeys: e.DescriptionKeys,
				})
			}
		}
		rs.ScopeSpans = make([]*tracepb.ScopeSpans, 0, len(r.ScopeSpans))
		for k, ss := range r.ScopeSpans {
			if ss == nil {
				continue
			}
			sp := elem(&rp, "scopeSpans", k)
			out := &tracepb.ScopeSpans{SchemaUrl: ss.SchemaURL, Spans: make([]*tracepb.Span, 0, len(ss.Spans))}
			if ss.Scope != nil {
				scP := field(&sp, "scope")
				ap := field(&scP, "attributes")
				attrs, err := convertKVs(ss.Scope.Attributes, &ap, 0)
				if err != nil {
					return nil, err
				}
				out.Scope = &commonpb.InstrumentationScope{
					Name: ss.Scope.Name, Version: ss.Scope.Version,
					Attributes: attrs, DroppedAttributesCount: ss.Scope.DroppedAttributesCount,
				}
			}
			for m, s := range ss.Spans {
				if s == nil {
					continue
				}
				p := elem(&sp, "spans", m)
				span, err := s.convert(&p)
				if err != nil {
					return nil, err
				}
				out.Spans = append(out.Spans, span)
			}
			rs.ScopeSpans = append(rs.ScopeSpans, out)
		}
		td.ResourceSpans = append(td.ResourceSpans, rs)
	}
	return td, nil
}

func (s *jSpan) convert(p *path) (*tracepb.Span, error) {
	var err error
	out := &tracepb.Span{
		TraceState:             s.TraceState,
		Flags:                  s.Flags,
		Name:                   s.Name,
		StartTimeUnixNano:      uint64(s.StartTimeUnixNano),
		EndTimeUnixNano:        uint64(s.EndTimeUnixNano),
		DroppedAttributesCount: s.DroppedAttributesCount,
		DroppedEventsCount:     s.DroppedEventsCount,
		DroppedLinksCount:      s.DroppedLinksCount,
	}
	tp, sp, pp := field(p, "traceId"), field(p, "spanId"), field(p, "parentSpanId")
	if out.TraceId, err = decodeID(s.TraceID, 16, &tp); err != nil {
		return nil, err
	}
	if out.SpanId, err = decodeID(s.SpanID, 8, &sp); err != nil {
		return nil, err
	}
	if out.ParentSpanId, err = decodeID(s.ParentSpanID, 8, &pp); err != nil {
		return nil, err
	}
	kp := field(p, "kind")
	kind, err := s.Kind.resolve(tracepb.Span_SpanKind_value, &kp)
	if err != nil {
		return nil, err
	}
	out.Kind = tracepb.Span_SpanKind(kind)
	ap := field(p, "attributes")
	if out.Attributes, err = convertKVs(s.Attributes, &ap, 0); err != nil {
		return nil, err
	}
	for i, e := range s.Events {
		if e == nil {
			continue
		}
		ep := elem(p, "events", i)
		eap := field(&ep, "attributes")
		attrs, err := convertKVs(e.Attributes, &eap, 0)
		if err != nil {
			return nil, err
		}
		out.Events = append(out.Events, &tracepb.Span_Event{
			TimeUnixNano: uint64(e.TimeUnixNano), Name: e.Name,
			Attributes: attrs, DroppedAttributesCount: e.DroppedAttributesCount,
		})
	}
	for i, l := range s.Links {
		if l == nil {
			continue
		}
		lp := elem(p, "links", i)
		ltp, lsp, lap := field(&lp, "traceId"), field(&lp, "spanId"), field(&lp, "attributes")
		link := &tracepb.Span_Link{TraceState: l.TraceState, DroppedAttributesCount: l.DroppedAttributesCount, Flags: l.Flags}
		if link.TraceId, err = decodeID(l.TraceID, 16, &ltp); err != nil {
			return nil, err
		}
		if link.SpanId, err = decodeID(l.SpanID, 8, &lsp); err != nil {
			return nil, err
		}
		if link.Attributes, err = convertKVs(l.Attributes, &lap, 0); err != nil {
			return nil, err
		}
		out.Links = append(out.Links, link)
	}
	if s.Status != nil {
		stp := field(p, "status")
		cp := field(&stp, "code")
		code, err := s.Status.Code.resolve(tracepb.Status_StatusCode_value, &cp)
		if err != nil {
			return nil, err
		}
		out.Status = &tracepb.Status{Message: s.Status.Message, Code: tracepb.Status_StatusCode(code)}
	}
	return out, nil
}

// maxDepth bounds the nesting of arrayValue/kvlistValue, so hostile input
// cannot exhaust the stack.
const maxDepth = 64

func convertKVs(kvs []*jKeyValue, p *path, depth int) ([]*commonpb.KeyValue, error) {
	if len(kvs) == 0 {
		return nil, nil
	}
	out := make([]*commonpb.KeyValue, 0, len(kvs))
	for i, kv := range kvs {
		if kv == nil {
			continue
		}
		o := &commonpb.KeyValue{Key: kv.Key, KeyStrindex: kv.KeyStrindex}
		if kv.Value != nil {
			vp := path{parent: p, idx: i, key: kv.Key}
			v, err := convertAny(kv.Value, &vp, depth+1)
			if err != nil {
				return nil, err
			}
			o.Value = v
		}
		out = append(out, o)
	}
	return out, nil
}

func convertAny(v *jAnyValue, p *path, depth int) (*commonpb.AnyValue, error) {
	if depth > maxDepth {
		return nil, badf(p, "values nested deeper than %d", maxDepth)
	}
	out := &commonpb.AnyValue{}
	n := 0
	if v.StringValue != nil {
		n++
		out.Value = &commonpb.AnyValue_StringValue{StringValue: *v.StringValue}
	}
	if v.BoolValue != nil {
		n++
		out.Value = &commonpb.AnyValue_BoolValue{BoolValue: *v.BoolValue}
	}
	if v.IntValue != nil {
		n++
		out.Value = &commonpb.AnyValue_IntValue{IntValue: int64(*v.IntValue)}
	}
	if v.DoubleValue != nil {
		n++
		out.Value = &commonpb.AnyValue_DoubleValue{DoubleValue: float64(*v.DoubleValue)}
	}
	if v.ArrayValue != nil {
		n++
		arr := &commonpb.ArrayValue{Values: make([]*commonpb.AnyValue, 0, len(v.ArrayValue.Values))}
		ap := field(p, "arrayValue")
		for i, e := range v.ArrayValue.Values {
			if e == nil {
				continue
			}
			ep := elem(&ap, "values", i)
			ev, err := convertAny(e, &ep, depth+1)
			if err != nil {
				return nil, err
			}
			arr.Values = append(arr.Values, ev)
		}
		out.Value = &commonpb.AnyValue_ArrayValue{ArrayValue: arr}
	}
	if v.KvlistValue != nil {
		n++
		kp := field(p, "kvlistValue")
		vp := field(&kp, "values")
		kvs, err := convertKVs(v.KvlistValue.Values, &vp, depth+1)
		if err != nil {
			return nil, err
		}
		out.Value = &commonpb.AnyValue_KvlistValue{KvlistValue: &commonpb.KeyValueList{Values: kvs}}
	}
	if v.BytesValue != nil {
		n++
		b, err := base64.StdEncoding.DecodeString(*v.BytesValue)
		if err != nil {
			// Tolerate the URL-safe alphabet and missing padding.
			b, err = base64.RawURLEncoding.DecodeString(trimPad(*v.BytesValue))
			if err != nil {
				bp := field(p, "bytesValue")
				return nil, badf(&bp, "not base64")
			}
		}
		out.Value = &commonpb.AnyValue_BytesValue{BytesValue: b}
	}
	if v.StringValueStrindex != nil {
		n++
		out.Value = &commonpb.AnyValue_StringValueStrindex{StringValueStrindex: *v.StringValueStrindex}
	}
	if n > 1 {
		return nil, badf(p, "AnyValue has %d members, want at most one", n)
	}
	return out, nil
}

func trimPad(s string) string {
	for len(s) > 0 && s[len(s)-1] == '=' {
		s = s[:len(s)-1]
	}
	return s
}
