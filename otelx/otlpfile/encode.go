package otlpfile

import (
	"encoding/base64"
	"encoding/hex"
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

func (f *fields) end() []byte { return append(f.b, '}') }

func appendResourceSpans(b []byte, r *tracepb.ResourceSpans) []byte {
	o := newObject(b)
	if r.Resource != nil {
		o.key("resource")
		o.b = appendResource(o.b, r.Resource)
	}
	if len(r.ScopeSpans) > 0 {
		o.key("scopeSpans")
		o.b = append(o.b, '[')
		n := 0
		for _, ss := range r.ScopeSpans {
			if ss == nil {
				continue
			}
			if n > 0 {
				o.b = append(o.b, ',')
			}
			n++
			o.b = appendScopeSpans(o.b, ss)
		}
		o.b = append(o.b, ']')
	}
	o.str("schemaUrl", r.SchemaUrl)
	return o.end()
}

func appendResource(b []byte, r *resourcepb.Resource) []byte {
	o := newObject(b)
	if len(r.Attributes) > 0 {
		o.key("attributes")
		o.b = appendKeyValues(o.b, r.Attributes)
	}
	o.u32("droppedAttributesCount", r.DroppedAttributesCount)
	if len(r.EntityRefs) > 0 {
		o.key("entityRefs")
		o.b = append(o.b, '[')
		n := 0
		for _, e := range r.EntityRefs {
			if e == nil {
				continue
			}
			if n > 0 {
				o.b = append(o.b, ',')
			}
			n++
			eo := newObject(o.b)
			eo.str("schemaUrl", e.SchemaUrl)
			eo.str("type", e.Type)
			if len(e.IdKeys) > 0 {
				eo.key("idKeys")
				eo.b = appendStrings(eo.b, e.IdKeys)
			}
			if len(e.DescriptionKeys) > 0 {
				eo.key("descriptionKeys")
				eo.b = appendStrings(eo.b, e.DescriptionKeys)
			}
			o.b = eo.end()
		}
		o.b = append(o.b, ']')
	}
	return o.end()
}

func appendStrings(b []byte, ss []string) []byte {
	b = append(b, '[')
	for i, s := range ss {
		if i > 0 {
			b = append(b, ',')
		}
		b = appendString(b, s)
	}
	return append(b, ']')
}

func appendScope(b []byte, s *commonpb.InstrumentationScope) []byte {
	o := newObject(b)
	o.str("name", s.Name)
	o.str("version", s.Version)
	if len(s.Attributes) > 0 {
		o.key("attributes")
		o.b = appendKeyValues(o.b, s.Attributes)
	}
	o.u32("droppedAttributesCount", s.DroppedAttributesCount)
	return o.end()
}

func appendScopeSpans(b []byte, ss *tracepb.ScopeSpans) []byte {
	o := newObject(b)
	if ss.Scope != nil {
		o.key("scope")
		o.b = appendScope(o.b, ss.Scope)
	}
	if len(ss.Spans) > 0 {
		o.key("spans")
		o.b = append(o.b, '[')
		n := 0
		for _, sp := range ss.Spans {
			if sp == nil {
				continue
			}
			if n > 0 {
				o.b = append(o.b, ',')
			}
			n++
			o.b = appendSpan(o.b, sp)
		}
		o.b = append(o.b, ']')
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
	if len(s.Attributes) > 0 {
		o.key("attributes")
		o.b = appendKeyValues(o.b, s.Attributes)
	}
	o.u32("droppedAttributesCount", s.DroppedAttributesCount)
	if len(s.Events) > 0 {
		o.key("events")
		o.b = append(o.b, '[')
		n := 0
		for _, e := range s.Events {
			if e == nil {
				continue
			}
			if n > 0 {
				o.b = append(o.b, ',')
			}
			n++
			eo := newObject(o.b)
			eo.u64("timeUnixNano", e.TimeUnixNano)
			eo.str("name", e.Name)
			if len(e.Attributes) > 0 {
				eo.key("attributes")
				eo.b = appendKeyValues(eo.b, e.Attributes)
			}
			eo.u32("droppedAttributesCount", e.DroppedAttributesCount)
			o.b = eo.end()
		}
		o.b = append(o.b, ']')
	}
	o.u32("droppedEventsCount", s.DroppedEventsCount)
	if len(s.Links) > 0 {
		o.key("links")
		o.b = append(o.b, '[')
		n := 0
		for _, l := range s.Links {
			if l == nil {
				continue
			}
			if n > 0 {
				o.b = append(o.b, ',')
			}
			n++
			lo := newObject(o.b)
			lo.id("traceId", l.TraceId)
			lo.id("spanId", l.SpanId)
			lo.str("traceState", l.TraceState)
			if len(l.Attributes) > 0 {
				lo.key("attributes")
				lo.b = appendKeyValues(lo.b, l.Attributes)
			}
			lo.u32("droppedAttributesCount", l.DroppedAttributesCount)
			lo.u32("flags", l.Flags)
			o.b = lo.end()
		}
		o.b = append(o.b, ']')
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

func appendKeyValues(b []byte, kvs []*commonpb.KeyValue) []byte {
	b = append(b, '[')
	n := 0
	for _, kv := range kvs {
		if kv == nil {
			continue
		}
		if n > 0 {
			b = append(b, ',')
		}
		n++
		o := newObject(b)
		o.str("key", kv.Key)
		if kv.Value != nil {
			o.key("value")
			o.b = appendAnyValue(o.b, kv.Value)
		}
		o.i32("keyStrindex", kv.KeyStrindex)
		b = o.end()
	}
	return append(b, ']')
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
		if x.ArrayValue != nil && len(x.ArrayValue.Values) > 0 {
			ao.key("values")
			ao.b = append(ao.b, '[')
			n := 0
			for _, e := range x.ArrayValue.Values {
				if e == nil {
					continue
				}
				if n > 0 {
					ao.b = append(ao.b, ',')
				}
				n++
				ao.b = appendAnyValue(ao.b, e)
			}
			ao.b = append(ao.b, ']')
		}
		o.b = ao.end()
	case *commonpb.AnyValue_KvlistValue:
		o.key("kvlistValue")
		ko := newObject(o.b)
		if x.KvlistValue != nil && len(x.KvlistValue.Values) > 0 {
			ko.key("values")
			ko.b = appendKeyValues(ko.b, x.KvlistValue.Values)
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
