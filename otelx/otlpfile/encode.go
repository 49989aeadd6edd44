package otlpfile

import (
	"encoding/base64"
	"encoding/hex"
	"iter"
	"math"
	"strconv"
	"unicode/utf8"

	commonpb "go.opentelemetry.io/proto/otlp/common/v1"
	resourcepb "go.opentelemetry.io/proto/otlp/resource/v1"
	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
)

// AppendLine appends the OTLP/JSON encoding of a TracesData object holding
// rs to dst, followed by a newline, and returns the extended slice.
//
// The encoding follows the OTLP/JSON rules of the OpenTelemetry protocol
// specification: keys are the lowerCamelCase proto3 JSON names, trace and
// span ids are lowercase hex (not base64), enum values are integers,
// 64-bit integers (fixed64 times, intValue) are decimal strings, 32-bit
// integers are numbers, bytesValue is standard base64, and non-finite
// doubles are the strings "NaN", "Infinity" and "-Infinity". Fields holding
// their zero value are omitted, as proto3 JSON does, except the chosen
// member of an AnyValue, which is always written. Fields appear in proto
// field-number order. Invalid UTF-8 in strings is replaced by U+FFFD.
//
// Nil entries in rs and nil spans are skipped. Cost O(size of output), no
// allocation beyond growing dst.
func AppendLine(dst []byte, rs []*tracepb.ResourceSpans) []byte {
	dst = append(dst, `{"resourceSpans":[`...)
	first := true
	for _, r := range rs {
		if r == nil {
			continue
		}
		if !first {
			dst = append(dst, ',')
		}
		first = false
		dst = appendResourceSpans(dst, r)
	}
	return append(dst, "]}\n"...)
}

// fields writes the separators between the members of one JSON object.
type fields struct {
	b     []byte
	first bool
}

func newObject(b []byte) fields { return fields{b: append(b, '{'), first: true} }

func (f *fields) key(k string) {
	if !f.first {
		f.b = append(f.b, ',')
	}
	f.first = false
	f.b = append(f.b, '"')
	f.b = append(f.b, k...)
	f.b = append(f.b, `":`...)
}

func (f *fields) str(k, v string) {
	if v == "" {
		return
	}
	f.key(k)
	f.b = appendString(f.b, v)
}

func (f *fields) u32(k string, v uint32) {
	if v == 0 {
		return
	}
	f.key(k)
	f.b = strconv.AppendUint(f.b, uint64(v), 10)
}

func (f *fields) i32(k string, v int32) {
	if v == 0 {
		return
	}
	f.key(k)
	f.b = strconv.AppendInt(f.b, int64(v), 10)
}

// u64 writes a 64-bit integer as a decimal string (proto3 JSON mapping).
func (f *fields) u64(k string, v uint64) {
	if v == 0 {
		return
	}
	f.key(k)
	f.b = append(f.b, '"')
	f.b = strconv.AppendUint(f.b, v, 10)
	f.b = append(f.b, '"')
}

func (f *fields) id(k string, v []byte) {
	if len(v) == 0 {
		return
	}
	f.key(k)
	f.b = append(f.b, '"')
	f.b = hex.AppendEncode(f.b, v)
	f.b = append(f.b, '"')
}

// kvs writes a repeated KeyValue member, omitted when empty.
func (f *fields) kvs(k string, v []*commonpb.KeyValue) {
	if len(v) > 0 { // inlined guard: no call for the common empty list
		f.keyValues(k, v)
	}
}

func (f *fields) keyValues(k string, v []*commonpb.KeyValue) {
	for kv := range elems(f, k, v) {
		o := newObject(f.b)
		o.str("key", kv.Key)
		if kv.Value != nil {
			o.key("value")
			o.b = appendAnyValue(o.b, kv.Value)
		}
		o.i32("keyStrindex", kv.KeyStrindex)
		f.b = o.end()
	}
}

// strs writes a repeated string member, omitted when empty.
func (f *fields) strs(k string, v []string) {
	if len(v) == 0 {
		return
	}
	f.key(k)
	f.b = append(f.b, '[')
	for i, s := range v {
		if i > 0 {
			f.b = append(f.b, ',')
		}
		f.b = appendString(f.b, s)
	}
	f.b = append(f.b, ']')
}

func (f *fields) end() []byte { return append(f.b, '}') }

// elems writes member k of f as a JSON array of the non-nil entries of xs,
// omitted when xs is empty (proto3 JSON); a slice of only nil entries gives
// []. It yields each entry after writing the separator before it, so the
// loop body appends just the element. O(len(xs)) plus the elements.
func elems[T any](f *fields, k string, xs []*T) iter.Seq[*T] {
	return func(yield func(*T) bool) {
		if len(xs) == 0 {
			return
		}
		f.key(k)
		f.b = append(f.b, '[')
		n := 0
		for _, x := range xs {
			if x == nil {
				continue
			}
			if n > 0 {
				f.b = append(f.b, ',')
			}
			n++
			if !yield(x) {
				break
			}
		}
		f.b = append(f.b, ']')
	}
}

func appendResourceSpans(b []byte, r *tracepb.ResourceSpans) []byte {
	o := newObject(b)
	if r.Resource != nil {
		o.key("resource")
		o.b = appendResource(o.b, r.Resource)
	}
	for e := range elems(&o, "scopeSpans", r.ScopeSpans) {
		o.b = appendScopeSpans(o.b, e)
	}
	o.str("schemaUrl", r.SchemaUrl)
	return o.end()
}

func appendResource(b []byte, r *resourcepb.Resource) []byte {
	o := newObject(b)
	o.kvs("attributes", r.Attributes)
	o.u32("droppedAttributesCount", r.DroppedAttributesCount)
	for e := range elems(&o, "entityRefs", r.EntityRefs) {
		o.b = appendEntityRef(o.b, e)
	}
	return o.end()
}

func appendEntityRef(b []byte, e *commonpb.EntityRef) []byte {
	o := newObject(b)
	o.str("schemaUrl", e.SchemaUrl)
	o.str("type", e.Type)
	o.strs("idKeys", e.IdKeys)
	o.strs("descriptionKeys", e.DescriptionKeys)
	return o.end()
}

func appendScope(b []byte, s *commonpb.InstrumentationScope) []byte {
	o := newObject(b)
	o.str("name", s.Name)
	o.str("version", s.Version)
	o.kvs("attributes", s.Attributes)
	o.u32("droppedAttributesCount", s.DroppedAttributesCount)
	return o.end()
}

func appendScopeSpans(b []byte, ss *tracepb.ScopeSpans) []byte {
	o := newObject(b)
	if ss.Scope != nil {
		o.key("scope")
		o.b = appendScope(o.b, ss.Scope)
	}
	for e := range elems(&o, "spans", ss.Spans) {
		o.b = appendSpan(o.b, e)
	}
	o.str("schemaUrl", ss.SchemaUrl)
	return o.end()
}

func appendSpan(b []byte, s *tracepb.Span) []byte {
	o := newObject(b)
	o.id("traceId", s.TraceId)
	o.id("spanId", s.SpanId)
	o.str("traceState", s.TraceState)
	o.id("parentSpanId", s.ParentSpanId)
	o.u32("flags", s.Flags)
	o.str("name", s.Name)
	o.i32("kind", int32(s.Kind))
	o.u64("startTimeUnixNano", s.StartTimeUnixNano)
	o.u64("endTimeUnixNano", s.EndTimeUnixNano)
	o.kvs("attributes", s.Attributes)
	o.u32("droppedAttributesCount", s.DroppedAttributesCount)
	for e := range elems(&o, "events", s.Events) {
		o.b = appendEvent(o.b, e)
	}
	o.u32("droppedEventsCount", s.DroppedEventsCount)
	for e := range elems(&o, "links", s.Links) {
		o.b = appendLink(o.b, e)
	}
	o.u32("droppedLinksCount", s.DroppedLinksCount)
	if s.Status != nil {
		o.key("status")
		so := newObject(o.b)
		so.str("message", s.Status.Message)
		so.i32("code", int32(s.Status.Code))
		o.b = so.end()
	}
	return o.end()
}

func appendEvent(b []byte, e *tracepb.Span_Event) []byte {
	o := newObject(b)
	o.u64("timeUnixNano", e.TimeUnixNano)
	o.str("name", e.Name)
	o.kvs("attributes", e.Attributes)
	o.u32("droppedAttributesCount", e.DroppedAttributesCount)
	return o.end()
}

func appendLink(b []byte, l *tracepb.Span_Link) []byte {
	o := newObject(b)
	o.id("traceId", l.TraceId)
	o.id("spanId", l.SpanId)
	o.str("traceState", l.TraceState)
	o.kvs("attributes", l.Attributes)
	o.u32("droppedAttributesCount", l.DroppedAttributesCount)
	o.u32("flags", l.Flags)
	return o.end()
}

func appendAnyValue(b []byte, v *commonpb.AnyValue) []byte {
	o := newObject(b)
	switch x := v.Value.(type) {
	case *commonpb.AnyValue_StringValue:
		o.key("stringValue")
		o.b = appendString(o.b, x.StringValue)
	case *commonpb.AnyValue_BoolValue:
		o.key("boolValue")
		o.b = strconv.AppendBool(o.b, x.BoolValue)
	case *commonpb.AnyValue_IntValue:
		o.key("intValue")
		o.b = append(o.b, '"')
		o.b = strconv.AppendInt(o.b, x.IntValue, 10)
		o.b = append(o.b, '"')
	case *commonpb.AnyValue_DoubleValue:
		o.key("doubleValue")
		o.b = appendFloat(o.b, x.DoubleValue)
	case *commonpb.AnyValue_ArrayValue:
		o.key("arrayValue")
		ao := newObject(o.b)
		if x.ArrayValue != nil {
			for e := range elems(&ao, "values", x.ArrayValue.Values) {
				ao.b = appendAnyValue(ao.b, e)
			}
		}
		o.b = ao.end()
	case *commonpb.AnyValue_KvlistValue:
		o.key("kvlistValue")
		ko := newObject(o.b)
		if x.KvlistValue != nil {
			ko.kvs("values", x.KvlistValue.Values)
		}
		o.b = ko.end()
	case *commonpb.AnyValue_BytesValue:
		o.key("bytesValue")
		o.b = append(o.b, '"')
		o.b = base64.StdEncoding.AppendEncode(o.b, x.BytesValue)
		o.b = append(o.b, '"')
	case *commonpb.AnyValue_StringValueStrindex:
		o.key("stringValueStrindex")
		o.b = strconv.AppendInt(o.b, int64(x.StringValueStrindex), 10)
	}
	return o.end()
}

// appendFloat writes a double the way proto3 JSON does: finite values as
// shortest round-trip JSON numbers, non-finite ones as quoted names.
func appendFloat(b []byte, f float64) []byte {
	switch {
	case math.IsNaN(f):
		return append(b, `"NaN"`...)
	case math.IsInf(f, 1):
		return append(b, `"Infinity"`...)
	case math.IsInf(f, -1):
		return append(b, `"-Infinity"`...)
	}
	// Same format choice as encoding/json (ES6 number-to-string).
	abs := math.Abs(f)
	fmtc := byte('f')
	if abs != 0 && (abs < 1e-6 || abs >= 1e21) {
		fmtc = 'e'
	}
	b = strconv.AppendFloat(b, f, fmtc, -1, 64)
	if fmtc == 'e' {
		// clean up e-09 to e-9
		n := len(b)
		if n >= 4 && b[n-4] == 'e' && b[n-3] == '-' && b[n-2] == '0' {
			b[n-2] = b[n-1]
			b = b[:n-1]
		}
	}
	return b
}

const hexDigits = "0123456789abcdef"

// appendString writes s as a JSON string. Control characters, quote and
// backslash are escaped; invalid UTF-8 becomes U+FFFD.
func appendString(b []byte, s string) []byte {
	b = append(b, '"')
	start := 0
	for i := 0; i < len(s); {
		c := s[i]
		if c < utf8.RuneSelf {
			if c >= 0x20 && c != '"' && c != '\\' {
				i++
				continue
			}
			b = append(b, s[start:i]...)
			switch c {
			case '"', '\\':
				b = append(b, '\\', c)
			case '\n':
				b = append(b, '\\', 'n')
			case '\r':
				b = append(b, '\\', 'r')
			case '\t':
				b = append(b, '\\', 't')
			default:
				b = append(b, '\\', 'u', '0', '0', hexDigits[c>>4], hexDigits[c&0xf])
			}
			i++
			start = i
			continue
		}
		r, size := utf8.DecodeRuneInString(s[i:])
		if r == utf8.RuneError && size == 1 {
			b = append(b, s[start:i]...)
			b = append(b, `\ufffd`...)
			i += size
			start = i
			continue
		}
		i += size
	}
	b = append(b, s[start:]...)
	return append(b, '"')
}
