package otlpfile

import (
	"bytes"
	"context"
	"encoding/base64"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/exporters/otlp/otlptrace"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/trace"
	commonpb "go.opentelemetry.io/proto/otlp/common/v1"
	resourcepb "go.opentelemetry.io/proto/otlp/resource/v1"
	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
)

func mustHex(t testing.TB, s string) []byte {
	t.Helper()
	b, err := hex.DecodeString(s)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func str(k, v string) *commonpb.KeyValue {
	return &commonpb.KeyValue{Key: k, Value: &commonpb.AnyValue{Value: &commonpb.AnyValue_StringValue{StringValue: v}}}
}

func sampleResourceSpans(t testing.TB) []*tracepb.ResourceSpans {
	return []*tracepb.ResourceSpans{{
		Resource: &resourcepb.Resource{Attributes: []*commonpb.KeyValue{str("service.name", "greenhouse-gw")}},
		ScopeSpans: []*tracepb.ScopeSpans{{
			Scope: &commonpb.InstrumentationScope{Name: "github.com/hopwise/hopwise/otelx", Version: "0.1.0"},
			Spans: []*tracepb.Span{{
				TraceId:           mustHex(t, "5b8efff798038103d269b633813fc60c"),
				SpanId:            mustHex(t, "eee19b7ec3c1b174"),
				ParentSpanId:      mustHex(t, "eee19b7ec3c1b173"),
				Flags:             257,
				Name:              "hopwise.decide",
				Kind:              tracepb.Span_SPAN_KIND_INTERNAL,
				StartTimeUnixNano: 1544712660000000000,
				EndTimeUnixNano:   1544712661000000000,
				Attributes: []*commonpb.KeyValue{
					str("hopwise.route.mode", "chain"),
					{Key: "hopwise.route.gain", Value: &commonpb.AnyValue{Value: &commonpb.AnyValue_DoubleValue{DoubleValue: 0.125}}},
					{Key: "hopwise.direct.support", Value: &commonpb.AnyValue{Value: &commonpb.AnyValue_IntValue{IntValue: 9007199254740993}}},
					{Key: "hopwise.route.truncated", Value: &commonpb.AnyValue{Value: &commonpb.AnyValue_BoolValue{BoolValue: false}}},
					{Key: "hopwise.chain.bridges", Value: &commonpb.AnyValue{Value: &commonpb.AnyValue_ArrayValue{ArrayValue: &commonpb.ArrayValue{
						Values: []*commonpb.AnyValue{{Value: &commonpb.AnyValue_StringValue{StringValue: "vent-3"}}, {Value: &commonpb.AnyValue_StringValue{StringValue: "zone \"b\"\n"}}},
					}}}},
					{Key: "raw", Value: &commonpb.AnyValue{Value: &commonpb.AnyValue_BytesValue{BytesValue: []byte{0xfb, 0xff}}}},
				},
				Events: []*tracepb.Span_Event{{TimeUnixNano: 1544712660500000000, Name: "cache.miss"}},
				Links:  []*tracepb.Span_Link{{TraceId: mustHex(t, "0102030405060708090a0b0c0d0e0f10"), SpanId: mustHex(t, "1112131415161718")}},
				Status: &tracepb.Status{Code: tracepb.Status_STATUS_CODE_ERROR, Message: "no chain"},
			}},
		}},
	}}
}

// The expected text is written out by hand from the OTLP/JSON rules of the
// OpenTelemetry protocol specification (OTLP 1.x, "JSON Protobuf
// Encoding"): hex ids, lowerCamelCase keys, integer enums, 64-bit integers
// as strings, 32-bit integers (flags) as numbers, bytes as base64.
func TestAppendLineExact(t *testing.T) {
	t.Parallel()
	want := `{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":"greenhouse-gw"}}]},` +
		`"scopeSpans":[{"scope":{"name":"github.com/hopwise/hopwise/otelx","version":"0.1.0"},"spans":[{` +
		`"traceId":"5b8efff798038103d269b633813fc60c","spanId":"eee19b7ec3c1b174","parentSpanId":"eee19b7ec3c1b173",` +
		`"flags":257,"name":"hopwise.decide","kind":1,"startTimeUnixNano":"1544712660000000000","endTimeUnixNano":"1544712661000000000",` +
		`"attributes":[{"key":"hopwise.route.mode","value":{"stringValue":"chain"}},` +
		`{"key":"hopwise.route.gain","value":{"doubleValue":0.125}},` +
		`{"key":"hopwise.direct.support","value":{"intValue":"9007199254740993"}},` +
		`{"key":"hopwise.route.truncated","value":{"boolValue":false}},` +
		`{"key":"hopwise.chain.bridges","value":{"arrayValue":{"values":[{"stringValue":"vent-3"},{"stringValue":"zone \"b\"\n"}]}}},` +
		`{"key":"raw","value":{"bytesValue":"+/8="}}],` +
		`"events":[{"timeUnixNano":"1544712660500000000","name":"cache.miss"}],` +
		`"links":[{"traceId":"0102030405060708090a0b0c0d0e0f10","spanId":"1112131415161718"}],` +
		`"status":{"message":"no chain","code":2}}]}]}]}` + "\n"
	got := string(AppendLine(nil, sampleResourceSpans(t)))
	if got != want {
		t.Fatalf("encoding mismatch\n got: %s\nwant: %s", got, want)
	}
	if !json.Valid([]byte(got)) {
		t.Fatal("output is not valid JSON")
	}
}

// handLine is written by hand to the OTLP/JSON spec (modelled on the
// layout of the spec's example trace file, values our own). Decoding must
// give the hex ids' bytes.
const handLine = `{"resourceSpans":[{"resource":{"attributes":[{"key":"service.name","value":{"stringValue":"greenhouse-gw"}}]},"scopeSpans":[{"scope":{"name":"github.com/hopwise/hopwise/otelx","version":"0.1.0"},"spans":[{"traceId":"5b8efff798038103d269b633813fc60c","spanId":"eee19b7ec3c1b174","parentSpanId":"eee19b7ec3c1b173","name":"hopwise.decide","startTimeUnixNano":"1544712660000000000","endTimeUnixNano":"1544712661000000000","kind":2,"attributes":[{"key":"hopwise.route.gain","value":{"doubleValue":0.25}},{"key":"hopwise.direct.support","value":{"intValue":"42"}},{"key":"n","value":{"intValue":7}}],"status":{"code":1}}]}]}]}`

func TestDecodeHandWrittenSpecLine(t *testing.T) {
	t.Parallel()
	td, err := Decode([]byte(handLine))
	if err != nil {
		t.Fatal(err)
	}
	sp := td.ResourceSpans[0].ScopeSpans[0].Spans[0]
	if got := hex.EncodeToString(sp.TraceId); got != "5b8efff798038103d269b633813fc60c" {
		t.Errorf("traceId bytes = %s", got)
	}
	if got := hex.EncodeToString(sp.SpanId); got != "eee19b7ec3c1b174" {
		t.Errorf("spanId bytes = %s", got)
	}
	if got := hex.EncodeToString(sp.ParentSpanId); got != "eee19b7ec3c1b173" {
		t.Errorf("parentSpanId bytes = %s", got)
	}
	if sp.Kind != tracepb.Span_SPAN_KIND_SERVER || sp.Status.GetCode() != tracepb.Status_STATUS_CODE_OK {
		t.Errorf("kind %v status %v", sp.Kind, sp.Status.GetCode())
	}
	if sp.StartTimeUnixNano != 1544712660000000000 || sp.EndTimeUnixNano != 1544712661000000000 {
		t.Errorf("times %d %d", sp.StartTimeUnixNano, sp.EndTimeUnixNano)
	}
	if v := sp.Attributes[0].Value.GetDoubleValue(); v != 0.25 {
		t.Errorf("gain %v", v)
	}
	if v := sp.Attributes[1].Value.GetIntValue(); v != 42 {
		t.Errorf("support %v", v)
	}
	// Receivers also accept a 64-bit integer written as a JSON number.
	if v := sp.Attributes[2].Value.GetIntValue(); v != 7 {
		t.Errorf("n %v", v)
	}

	// The pitfall this package avoids: plain protojson reads the ids as
	// base64 and yields other bytes (here 24 bytes instead of 16).
	var viaProtojson tracepb.TracesData
	if err := protojson.Unmarshal([]byte(handLine), &viaProtojson); err == nil {
		wrong := viaProtojson.ResourceSpans[0].ScopeSpans[0].Spans[0].TraceId
		if bytes.Equal(wrong, sp.TraceId) {
			t.Errorf("protojson unexpectedly decoded hex ids correctly; the note in doc.go is stale")
		}
	}
}

// hexToBase64IDs rewrites a line from the OTLP/JSON id form to the plain
// proto3-JSON form, so that protojson (the reference proto3 JSON
// implementation) can check everything else about our encoding.
func hexToBase64IDs(t *testing.T, line []byte) []byte {
	t.Helper()
	var m any
	if err := json.Unmarshal(line, &m); err != nil {
		t.Fatal(err)
	}
	var walk func(v any, parent string)
	walk = func(v any, parent string) {
		switch x := v.(type) {
		case map[string]any:
			if parent == "spans" || parent == "links" {
				for _, k := range []string{"traceId", "spanId", "parentSpanId"} {
					if s, ok := x[k].(string); ok {
						x[k] = base64.StdEncoding.EncodeToString(mustHex(t, s))
					}
				}
			}
			for k, e := range x {
				walk(e, k)
			}
		case []any:
			for _, e := range x {
				walk(e, parent)
			}
		}
	}
	walk(m, "")
	out, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	return out
}

func randomResourceSpans(r *rand.Rand) []*tracepb.ResourceSpans {
	randBytes := func(n int) []byte {
		b := make([]byte, n)
		for i := range b {
			b[i] = byte(r.IntN(256))
		}
		return b
	}
	randStr := func() string {
		const alpha = "abcz \"\\\n\t\x01é€😀/<>&"
		rs := []rune(alpha)
		n := r.IntN(8)
		var sb strings.Builder
		for range n {
			sb.WriteRune(rs[r.IntN(len(rs))])
		}
		return sb.String()
	}
	var randAny func(depth int) *commonpb.AnyValue
	randAny = func(depth int) *commonpb.AnyValue {
		k := r.IntN(7)
		if depth > 2 && k >= 4 {
			k = r.IntN(4)
		}
		switch k {
		case 0:
			return &commonpb.AnyValue{Value: &commonpb.AnyValue_StringValue{StringValue: randStr()}}
		case 1:
			return &commonpb.AnyValue{Value: &commonpb.AnyValue_BoolValue{BoolValue: r.IntN(2) == 0}}
		case 2:
			return &commonpb.AnyValue{Value: &commonpb.AnyValue_IntValue{IntValue: int64(r.Uint64())}}
		case 3:
			fs := []float64{0, -0.5, 1e-9, 3.25e22, r.NormFloat64() * 1e3, math.MaxFloat64, math.SmallestNonzeroFloat64}
			return &commonpb.AnyValue{Value: &commonpb.AnyValue_DoubleValue{DoubleValue: fs[r.IntN(len(fs))]}}
		case 4:
			a := &commonpb.ArrayValue{}
			for range r.IntN(3) {
				a.Values = append(a.Values, randAny(depth+1))
			}
			return &commonpb.AnyValue{Value: &commonpb.AnyValue_ArrayValue{ArrayValue: a}}
		case 5:
			kv := &commonpb.KeyValueList{}
			for range r.IntN(3) {
				kv.Values = append(kv.Values, &commonpb.KeyValue{Key: randStr(), Value: randAny(depth + 1)})
			}
			return &commonpb.AnyValue{Value: &commonpb.AnyValue_KvlistValue{KvlistValue: kv}}
		default:
			return &commonpb.AnyValue{Value: &commonpb.AnyValue_BytesValue{BytesValue: randBytes(r.IntN(5))}}
		}
	}
	randAttrs := func() []*commonpb.KeyValue {
		var out []*commonpb.KeyValue
		for range r.IntN(4) {
			out = append(out, &commonpb.KeyValue{Key: randStr(), Value: randAny(0)})
		}
		return out
	}
	var rss []*tracepb.ResourceSpans
	for range 1 + r.IntN(2) {
		rs := &tracepb.ResourceSpans{Resource: &resourcepb.Resource{Attributes: randAttrs()}, SchemaUrl: randStr()}
		for range 1 + r.IntN(2) {
			ss := &tracepb.ScopeSpans{Scope: &commonpb.InstrumentationScope{Name: randStr(), Version: randStr()}}
			for range r.IntN(4) {
				sp := &tracepb.Span{
					TraceId: randBytes(16), SpanId: randBytes(8), Name: randStr(),
					Kind:              tracepb.Span_SpanKind(r.IntN(6)),
					StartTimeUnixNano: r.Uint64(), EndTimeUnixNano: r.Uint64(),
					Attributes: randAttrs(), Flags: uint32(r.IntN(1024)), TraceState: randStr(),
					DroppedAttributesCount: uint32(r.IntN(3)),
				}
				if r.IntN(2) == 0 {
					sp.ParentSpanId = randBytes(8)
				}
				for range r.IntN(3) {
					sp.Events = append(sp.Events, &tracepb.Span_Event{TimeUnixNano: r.Uint64(), Name: randStr(), Attributes: randAttrs()})
				}
				for range r.IntN(2) {
					sp.Links = append(sp.Links, &tracepb.Span_Link{TraceId: randBytes(16), SpanId: randBytes(8), Attributes: randAttrs(), Flags: uint32(r.IntN(512))})
				}
				if r.IntN(3) > 0 {
					sp.Status = &tracepb.Status{Code: tracepb.Status_StatusCode(r.IntN(3)), Message: randStr()}
				}
				ss.Spans = append(ss.Spans, sp)
			}
			rs.ScopeSpans = append(rs.ScopeSpans, ss)
		}
		rss = append(rss, rs)
	}
	return rss
}

// Round trip through our encoder and decoder, and cross-check the encoder
// against protojson once ids are converted back to base64.
func TestRoundTripRandom(t *testing.T) {
	t.Parallel()
	r := rand.New(rand.NewPCG(1, 2))
	for i := range 300 {
		rss := randomResourceSpans(r)
		want := &tracepb.TracesData{ResourceSpans: rss}
		line := AppendLine(nil, rss)
		if !json.Valid(line) {
			t.Fatalf("case %d: invalid JSON: %s", i, line)
		}
		got, err := Decode(line)
		if err != nil {
			t.Fatalf("case %d: %v\n%s", i, err, line)
		}
		if !proto.Equal(got, want) {
			t.Fatalf("case %d: round trip differs\nline %s", i, line)
		}
		var ref tracepb.TracesData
		if err := protojson.Unmarshal(hexToBase64IDs(t, line), &ref); err != nil {
			t.Fatalf("case %d: protojson rejects our encoding: %v\n%s", i, err, line)
		}
		if !proto.Equal(&ref, want) {
			t.Fatalf("case %d: protojson reads our encoding differently\n%s", i, line)
		}
	}
}

func TestDecodeErrors(t *testing.T) {
	t.Parallel()
	full := string(AppendLine(nil, sampleResourceSpans(t)))
	cases := []struct {
		name, line, want string
	}{
		{"truncated", full[:len(full)/2], "truncated"},
		{"garbage", "hello world", "invalid character"},
		{"trailing", `{"resourceSpans":[]} {}`, "trailing data"},
		{"short trace id", strings.Replace(handLine, "5b8efff798038103d269b633813fc60c", "5b8e", 1), "spans[0].traceId: want 32 hex digits"},
		{"non-hex span id", strings.Replace(handLine, "eee19b7ec3c1b174", "zzz19b7ec3c1b174", 1), "spans[0].spanId: not hex"},
		{"base64 trace id", strings.Replace(handLine, "5b8efff798038103d269b633813fc60c", "W47/95gDgQPSabYzgT/GDA==", 1), "traceId: want 32 hex digits"},
		{"bad time", strings.Replace(handLine, `"1544712660000000000"`, `"soon"`, 1), "bad 64-bit unsigned integer"},
		{"bad kind", strings.Replace(handLine, `"kind":2`, `"kind":"SPAN_KIND_SIDEWAYS"`, 1), "unknown enum name"},
		{"two members", strings.Replace(handLine, `{"doubleValue":0.25}`, `{"doubleValue":0.25,"stringValue":"x"}`, 1), "AnyValue has 2 members"},
		{"wrong type", `{"resourceSpans":{}}`, "resourceSpans"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			_, err := Decode([]byte(tc.line))
			if err == nil {
				t.Fatal("no error")
			}
			if !errors.Is(err, ErrMalformed) {
				t.Errorf("error does not wrap ErrMalformed: %v", err)
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %q does not mention %q", err, tc.want)
			}
		})
	}
	// Enum names are accepted leniently.
	if _, err := Decode([]byte(strings.Replace(handLine, `"kind":2`, `"kind":"SPAN_KIND_CLIENT"`, 1))); err != nil {
		t.Errorf("enum name: %v", err)
	}
}

func TestScannerLineNumbers(t *testing.T) {
	t.Parallel()
	good := strings.TrimSpace(string(AppendLine(nil, sampleResourceSpans(t))))
	input := good + "\n\n" + good + "\n" + good[:40] + "\n" + good + "\n"
	sc := NewScanner(strings.NewReader(input), "day1.jsonl", 0)
	n := 0
	for sc.Scan() {
		n++
	}
	if n != 2 {
		t.Fatalf("decoded %d lines before the bad one, want 2", n)
	}
	var le *LineError
	if !errors.As(sc.Err(), &le) || le.Line != 4 || le.File != "day1.jsonl" {
		t.Fatalf("err = %v, want day1.jsonl:4", sc.Err())
	}
	if !strings.HasPrefix(sc.Err().Error(), "day1.jsonl:4: ") {
		t.Errorf("message %q", sc.Err())
	}
	// A line over the limit is reported with its number.
	sc = NewScanner(strings.NewReader(good+"\n"+good+"\n"), "small.jsonl", 100)
	if sc.Scan() || !errors.Is(sc.Err(), ErrLineTooLong) || !strings.Contains(sc.Err().Error(), "small.jsonl:1:") {
		t.Fatalf("want line-too-long at line 1, got %v", sc.Err())
	}
}

// End to end through the SDK: spans written by otlptrace.New(client) come
// back with the ids the SDK assigned.
func TestClientWithSDK(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "traces.jsonl")
	exp, err := NewExporter(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	tp := sdktrace.NewTracerProvider(sdktrace.WithBatcher(exp), sdktrace.WithSampler(sdktrace.AlwaysSample()))
	tr := tp.Tracer("test")
	want := map[string]string{}
	for i := range 50 {
		_, sp := tr.Start(ctx, "hopwise.decide", trace.WithAttributes(attribute.Int("i", i), attribute.StringSlice("b", []string{"pump-1", "bed-2"})))
		want[sp.SpanContext().SpanID().String()] = sp.SpanContext().TraceID().String()
		sp.End()
	}
	if err := tp.Shutdown(ctx); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := NewScanner(f, path, 0)
	got := 0
	for sc.Scan() {
		for _, rs := range sc.TracesData().ResourceSpans {
			for _, ss := range rs.ScopeSpans {
				for _, sp := range ss.Spans {
					sid, tid := hex.EncodeToString(sp.SpanId), hex.EncodeToString(sp.TraceId)
					if want[sid] != tid {
						t.Errorf("span %s: trace %s, want %s", sid, tid, want[sid])
					}
					got++
				}
			}
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if got != 50 {
		t.Fatalf("read %d spans, want 50", got)
	}
}

func countSpans(t *testing.T, path string) (lines, spans int) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := NewScanner(f, path, 0)
	for sc.Scan() {
		lines++
		for _, rs := range sc.TracesData().ResourceSpans {
			for _, ss := range rs.ScopeSpans {
				spans += len(ss.Spans)
			}
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return lines, spans
}

func TestRotationAndConcurrency(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	dir := t.TempDir()
	path := filepath.Join(dir, "t.jsonl")
	batch := sampleResourceSpans(t)
	lineLen := int64(len(AppendLine(nil, batch)))
	c, err := NewClient(path, WithMaxBytes(10*lineLen), WithMaxBackups(100))
	if err != nil {
		t.Fatal(err)
	}
	if err := c.UploadTraces(ctx, batch); !errors.Is(err, ErrNotStarted) {
		t.Fatalf("upload before start: %v", err)
	}
	if err := c.Start(ctx); err != nil {
		t.Fatal(err)
	}
	const workers, per = 8, 25
	var wg sync.WaitGroup
	for range workers {
		wg.Go(func() {
			for range per {
				if err := c.UploadTraces(ctx, batch); err != nil {
					t.Error(err)
				}
			}
		})
	}
	wg.Wait()
	if err := c.Stop(ctx); err != nil {
		t.Fatal(err)
	}
	if err := c.UploadTraces(ctx, batch); !errors.Is(err, ErrStopped) {
		t.Fatalf("upload after stop: %v", err)
	}
	// 200 lines at 10 lines per file: the live file plus 19 backups.
	total := 0
	files := []string{path}
	for i := 1; ; i++ {
		p := fmt.Sprintf("%s.%d", path, i)
		if _, err := os.Stat(p); err != nil {
			break
		}
		files = append(files, p)
	}
	for _, p := range files {
		st, _ := os.Stat(p)
		if st.Size() > 10*lineLen {
			t.Errorf("%s has %d bytes, limit %d", p, st.Size(), 10*lineLen)
		}
		lines, spans := countSpans(t, p)
		if lines != spans {
			t.Errorf("%s: %d lines %d spans", p, lines, spans)
		}
		total += lines
	}
	if total != workers*per || len(files) != 20 || c.rotated != 19 {
		t.Fatalf("total lines %d in %d files (%d rotations), want %d in 20", total, len(files), c.rotated, workers*per)
	}
}

func TestRotationDropsOldest(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "t.jsonl")
	batch := sampleResourceSpans(t)
	c, err := NewClient(path, WithMaxBytes(1), WithMaxBackups(2), WithSyncEachUpload(true))
	if err != nil {
		t.Fatal(err)
	}
	if err := c.Start(ctx); err != nil {
		t.Fatal(err)
	}
	for range 5 {
		if err := c.UploadTraces(ctx, batch); err != nil {
			t.Fatal(err)
		}
	}
	if err := c.Stop(ctx); err != nil {
		t.Fatal(err)
	}
	for _, p := range []string{path, path + ".1", path + ".2"} {
		if l, _ := countSpans(t, p); l != 1 {
			t.Errorf("%s: %d lines, want 1 (a line longer than the limit sits alone)", p, l)
		}
	}
	if _, err := os.Stat(path + ".3"); err == nil {
		t.Error("backup beyond WithMaxBackups(2) was kept")
	}
}

func TestNewClientBadOptions(t *testing.T) {
	t.Parallel()
	for _, opts := range [][]Option{{WithMaxBytes(-1)}, {WithMaxBackups(0)}} {
		if _, err := NewClient("x", opts...); !errors.Is(err, ErrBadOption) {
			t.Errorf("want ErrBadOption, got %v", err)
		}
	}
	if _, err := NewClient(""); !errors.Is(err, ErrBadOption) {
		t.Errorf("empty path: %v", err)
	}
	c, _ := NewClient(filepath.Join(t.TempDir(), "missing-dir", "t.jsonl"))
	if err := c.Start(context.Background()); err == nil {
		t.Error("start in a missing directory succeeded")
	}
}

var _ otlptrace.Client = (*Client)(nil)

func FuzzDecode(f *testing.F) {
	f.Add([]byte(handLine))
	f.Add(AppendLine(nil, sampleResourceSpans(f)))
	f.Add([]byte(`{"resourceSpans":[{"scopeSpans":[{"spans":[{"attributes":[{"key":"a","value":{"arrayValue":{"values":[{"kvlistValue":{}}]}}}]}]}]}]}`))
	f.Add([]byte(`{"resourceSpans":[{"scopeSpans":[{"spans":[{"kind":"x"}]}]}]}`))
	f.Add([]byte(`{`))
	f.Fuzz(func(t *testing.T, line []byte) {
		td, err := Decode(line)
		if err != nil {
			if !errors.Is(err, ErrMalformed) {
				t.Fatalf("error does not wrap ErrMalformed: %v", err)
			}
			return
		}
		again, err := Decode(AppendLine(nil, td.ResourceSpans))
		if err != nil {
			t.Fatalf("re-encoding does not decode: %v", err)
		}
		if !proto.Equal(again, td) {
			t.Fatalf("re-encoding changes the message")
		}
	})
}

// TestTooManyObjects: a line of millions of empty containers is refused
// before decoding, naming the file and line, instead of taking gigabytes
// (20 million "{}" in a 60 MB line took 3.5 GB); a small one still decodes.
func TestTooManyObjects(t *testing.T) {
	t.Parallel()
	many := func(n int) []byte {
		var b bytes.Buffer
		b.WriteString(`{"resourceSpans":[`)
		for i := range n {
			if i > 0 {
				b.WriteByte(',')
			}
			b.WriteString("{}")
		}
		b.WriteString("]}\n")
		return b.Bytes()
	}
	line := many(MaxObjects)
	sc := NewScanner(bytes.NewReader(line), "big.jsonl", 0)
	if sc.Scan() || !errors.Is(sc.Err(), ErrTooManyObjects) || !strings.Contains(sc.Err().Error(), "big.jsonl:1:") {
		t.Fatalf("err %v, want ErrTooManyObjects naming big.jsonl:1", sc.Err())
	}
	td, err := Decode(many(1000))
	if err != nil || len(td.ResourceSpans) != 1000 {
		t.Fatalf("1000 empty containers: %v", err)
	}
}
