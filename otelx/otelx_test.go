package otelx

import (
	"context"
	"crypto/hmac"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"go.opentelemetry.io/otel/attribute"
	sdkmetric "go.opentelemetry.io/otel/sdk/metric"
	"go.opentelemetry.io/otel/sdk/metric/metricdata"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/sdk/trace/tracetest"
	"go.opentelemetry.io/otel/trace"
	"go.opentelemetry.io/otel/trace/embedded"
	tnoop "go.opentelemetry.io/otel/trace/noop"

	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
)

func newRouter(t testing.TB, opts ...router.Option) *router.Router {
	t.Helper()
	r, err := router.New(greenhouseGraph(), opts...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { r.Close() })
	return r
}

func spanAttrs(s sdktrace.ReadOnlySpan) map[attribute.Key]attribute.Value {
	m := map[attribute.Key]attribute.Value{}
	for _, kv := range s.Attributes() {
		m[kv.Key] = kv.Value
	}
	return m
}

func TestDecideSpanAndMetrics(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	rec := tracetest.NewSpanRecorder()
	tp := sdktrace.NewTracerProvider(sdktrace.WithSpanProcessor(rec))
	reader := sdkmetric.NewManualReader()
	mp := sdkmetric.NewMeterProvider(sdkmetric.WithReader(reader))
	in, err := New(WithTracerProvider(tp), WithMeterProvider(mp), WithSamplingRatio(0.5))
	if err != nil {
		t.Fatal(err)
	}
	r := newRouter(t, router.WithArms(router.ArmWeight{Arm: router.ArmRouted, Weight: 1}))
	q := router.Query{From: "vent-north", Value: "open", To: "bed-tomato", Key: "unit-1"}
	d, err := in.Decide(ctx, r, q)
	if err != nil {
		t.Fatal(err)
	}
	if d.Chain == nil {
		t.Fatal("the greenhouse graph should offer a chain vent → humidity → bed")
	}
	if _, err := in.Decide(ctx, r, q); err != nil { // cache hit
		t.Fatal(err)
	}
	if _, err := in.Decide(ctx, r, router.Query{From: "vent-north", Value: "ajar", To: "bed-tomato", Key: "unit-2"}); err == nil {
		t.Fatal("unknown value accepted")
	}

	spans := rec.Ended()
	if len(spans) != 3 {
		t.Fatalf("%d spans, want 3", len(spans))
	}
	s := spans[0]
	if s.Name() != SpanDecide || s.InstrumentationScope().Name != ScopeName || s.InstrumentationScope().Version != Version {
		t.Errorf("span %q scope %+v", s.Name(), s.InstrumentationScope())
	}
	a := spanAttrs(s)
	checks := map[string]any{
		KeyQueryKey:        "unit-1",
		KeyQueryFrom:       "vent-north",
		KeyQueryValue:      "open",
		KeyQueryTo:         "bed-tomato",
		KeyRouteMode:       d.Mode.String(),
		KeyRouteGain:       d.Gain,
		KeyRouteReason:     d.Reason.Code,
		KeyRoutePropensity: d.Propensity,
		KeyDirectErr:       d.Direct.Err,
		KeyDirectSupport:   int64(d.Direct.Support),
		KeyChainErr:        d.Chain.Err,
		KeyChainHops:       int64(len(d.Chain.Bridges)),
		KeyABArm:           router.ArmRouted,
		KeyIndexGeneration: fmt.Sprintf("%016x", d.Generation),
		KeySamplingRatio:   0.5,
	}
	for k, want := range checks {
		v, ok := a[attribute.Key(k)]
		if !ok {
			t.Errorf("attribute %s missing", k)
			continue
		}
		if got := v.AsInterface(); got != want {
			t.Errorf("attribute %s = %v (%T), want %v (%T)", k, got, got, want, want)
		}
	}
	// Flags are recorded only when true (readers take false).
	for k, on := range map[attribute.Key]bool{KeyRouteTruncated: d.Truncated, KeyRouteExplored: d.Explored, KeyRouteCached: false, KeyChainParallel: d.Chain.Parallel} {
		if v, ok := a[k]; ok != on || (ok && !v.AsBool()) {
			t.Errorf("attribute %s = %v (present %v), want present only as true: %v", k, v.AsInterface(), ok, on)
		}
	}
	if _, ok := a[KeyRouteScore]; ok != (d.Score != d.Gain) {
		t.Errorf("route.score present = %v with score %v and gain %v", ok, d.Score, d.Gain)
	}
	if got := a[KeyChainBridges].AsStringSlice(); strings.Join(got, ",") != strings.Join(d.Chain.Bridges, ",") {
		t.Errorf("bridges %v, want %v", got, d.Chain.Bridges)
	}
	if !spanAttrs(spans[1])[KeyRouteCached].AsBool() {
		t.Error("second decision should be a cache hit")
	}
	if spans[2].Status().Code.String() != "Error" || len(spans[2].Events()) == 0 {
		t.Errorf("failed decision: status %v events %d", spans[2].Status(), len(spans[2].Events()))
	}

	var rm metricdata.ResourceMetrics
	if err := reader.Collect(ctx, &rm); err != nil {
		t.Fatal(err)
	}
	got := map[string]int64{}
	var latencyCount, gainCount uint64
	latencyExemplars := 0
	spanIDs := map[string]bool{}
	for _, sp := range spans {
		spanIDs[sp.SpanContext().SpanID().String()] = true
	}
	for _, sm := range rm.ScopeMetrics {
		if sm.Scope.Name != ScopeName || sm.Scope.Version != Version {
			t.Errorf("meter scope %+v", sm.Scope)
		}
		for _, m := range sm.Metrics {
			switch data := m.Data.(type) {
			case metricdata.Sum[int64]:
				for _, dp := range data.DataPoints {
					mode, _ := dp.Attributes.Value(KeyRouteMode)
					arm, _ := dp.Attributes.Value(KeyABArm)
					res, _ := dp.Attributes.Value(KeyCacheResult)
					got[m.Name+"|"+mode.AsString()+"|"+arm.AsString()+"|"+res.AsString()] += dp.Value
				}
			case metricdata.Histogram[float64]:
				for _, dp := range data.DataPoints {
					switch m.Name {
					case MetricDecisionLatency:
						latencyCount += dp.Count
						mode, _ := dp.Attributes.Value(KeyRouteMode)
						arm, _ := dp.Attributes.Value(KeyABArm)
						res, _ := dp.Attributes.Value(KeyCacheResult)
						got[m.Name+"|"+mode.AsString()+"|"+arm.AsString()+"|"+res.AsString()] += int64(dp.Count)
						// The SDK's trace-based exemplars link the
						// latency to the decision spans.
						for _, ex := range dp.Exemplars {
							if !spanIDs[hex.EncodeToString(ex.SpanID)] {
								t.Errorf("latency exemplar span %x is no decision span", ex.SpanID)
							}
							latencyExemplars++
						}
					case MetricGain:
						gainCount += dp.Count
					}
				}
			}
		}
	}
	mode := d.Mode.String()
	// Decisions by mode, arm and cache result are the latency counts.
	want := map[string]int64{
		MetricDecisionLatency + "|" + mode + "|routed|miss": 1,
		MetricDecisionLatency + "|" + mode + "|routed|hit":  1,
		MetricDecisionLatency + "|error||":                  1,
	}
	if len(got) != len(want) {
		t.Errorf("metric points %v, want %v", got, want)
	}
	for k, v := range want {
		if got[k] != v {
			t.Errorf("metric %s = %d, want %d (all: %v)", k, got[k], v, got)
		}
	}
	if latencyExemplars == 0 {
		t.Error("no latency exemplar: the latency is not recorded in the decision span's context")
	}
	if latencyCount != 3 || gainCount != 2 {
		t.Errorf("latency count %d (want 3), gain count %d (want 2)", latencyCount, gainCount)
	}
}

func TestEntityHashing(t *testing.T) {
	t.Parallel()
	rec := tracetest.NewSpanRecorder()
	key := []byte("greenhouse-secret-key-01")
	in, err := New(WithTracerProvider(sdktrace.NewTracerProvider(sdktrace.WithSpanProcessor(rec))), WithEntityHashKey(key))
	if err != nil {
		t.Fatal(err)
	}
	r := newRouter(t)
	d, err := in.Decide(context.Background(), r, router.Query{From: "vent-north", Value: "open", To: "bed-tomato", Key: "u"})
	if err != nil || d.Chain == nil {
		t.Fatalf("%v %+v", err, d)
	}
	// HMAC-SHA256 (RFC 2104 with SHA-256) computed independently.
	mac := func(s string) string {
		h := hmac.New(sha256.New, key)
		h.Write([]byte(s))
		return hex.EncodeToString(h.Sum(nil))[:32]
	}
	a := spanAttrs(rec.Ended()[0])
	if a[KeyQueryFrom].AsString() != mac("vent-north") || a[KeyQueryTo].AsString() != mac("bed-tomato") || a[KeyQueryValue].AsString() != mac("open") {
		t.Errorf("hashed endpoints: %v %v", a[KeyQueryFrom], a[KeyQueryTo])
	}
	for i, b := range a[KeyChainBridges].AsStringSlice() {
		if b != mac(d.Chain.Bridges[i]) {
			t.Errorf("bridge %d = %s", i, b)
		}
	}
	for _, kv := range rec.Ended()[0].Attributes() {
		if kv.Value.Type() == attribute.STRING && strings.Contains(kv.Value.AsString(), "vent") {
			t.Errorf("raw entity name leaked in %s", kv.Key)
		}
	}
	if a[KeyEntityHash].AsString() != "hmac-sha256" {
		t.Error("hash marker missing")
	}
}

// guardSpan is a non-recording span that fails the test if attributes are
// set on it: the instrumentation must check IsRecording first.
type guardSpan struct {
	tnoop.Span
	t *testing.T
}

func (s guardSpan) IsRecording() bool { return false }
func (s guardSpan) SetAttributes(...attribute.KeyValue) {
	s.t.Error("SetAttributes called on a non-recording span")
}

type guardTracer struct {
	embedded.Tracer
	t *testing.T
}

func (g guardTracer) Start(ctx context.Context, _ string, _ ...trace.SpanStartOption) (context.Context, trace.Span) {
	return ctx, guardSpan{t: g.t}
}

type guardProvider struct {
	embedded.TracerProvider
	t *testing.T
}

func (g guardProvider) Tracer(string, ...trace.TracerOption) trace.Tracer { return guardTracer{t: g.t} }

func TestNoAttributesWhenNotRecording(t *testing.T) {
	t.Parallel()
	in, err := New(WithTracerProvider(guardProvider{t: t}))
	if err != nil {
		t.Fatal(err)
	}
	r := newRouter(t)
	d, err := in.Decide(context.Background(), r, router.Query{From: "vent-north", Value: "open", To: "bed-tomato", Key: "k"})
	if err != nil {
		t.Fatal(err)
	}
	if err := in.RecordOutcome(context.Background(), d, Outcome{Score: 1}); err != nil {
		t.Fatal(err)
	}
}

func TestOptionsAndOutcomeValidation(t *testing.T) {
	t.Parallel()
	for _, o := range []Option{WithSamplingRatio(0), WithSamplingRatio(1.5), WithEntityHashKey([]byte("short"))} {
		if _, err := New(o); !errors.Is(err, ErrBadOption) {
			t.Errorf("want ErrBadOption, got %v", err)
		}
	}
	in, err := New(WithTracerProvider(nil), WithMeterProvider(nil), nil)
	if err != nil {
		t.Fatal(err)
	}
	d := router.Decision{Key: "k"}
	for _, o := range []Outcome{{Score: 1.2}, {Score: -0.1}, {Score: 0.5, InputTokens: -1}, {Score: 0.5, Latency: -time.Second}} {
		if err := in.RecordOutcome(context.Background(), d, o); !errors.Is(err, ErrBadOutcome) {
			t.Errorf("outcome %+v: %v", o, err)
		}
	}
	if err := in.RecordOutcome(context.Background(), router.Decision{}, Outcome{Score: 1}); !errors.Is(err, ErrNoKey) {
		t.Errorf("no key: %v", err)
	}
}

// Decisions and outcomes go through the SDK, the batch processor and the
// OTLP JSON Lines file exporter, and come back as records.
func TestTraceFileRoundTrip(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "hopwise.jsonl")
	exp, err := otlpfile.NewExporter(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	tp := sdktrace.NewTracerProvider(sdktrace.WithBatcher(exp))
	in, err := New(WithTracerProvider(tp), WithSamplingRatio(0.25))
	if err != nil {
		t.Fatal(err)
	}
	r := newRouter(t,
		router.WithArms(router.ArmWeight{Arm: router.ArmRouted, Weight: 0.5}, router.ArmWeight{Arm: router.ArmDirectOnly, Weight: 0.5}),
		router.WithExploration(0.2, "otelx-test"))
	queries := []router.Query{
		{From: "vent-north", Value: "open", To: "bed-tomato"},
		{From: "vent-north", Value: "closed", To: "bed-tomato"},
		{From: "sensor-9", Value: "ok", To: "vent-north"},
		{From: "pump-2", Value: "on", To: "humidity-zone1"},
	}
	type made struct {
		d router.Decision
		o Outcome
	}
	var want []made
	for i := range 40 {
		q := queries[i%len(queries)]
		q.Key = fmt.Sprintf("unit-%02d", i)
		d, err := in.Decide(ctx, r, q)
		if err != nil {
			t.Fatal(err)
		}
		o := Outcome{Score: float64(i%3) / 2, InputTokens: int64(100 + i), OutputTokens: int64(i), Latency: time.Duration(i) * time.Millisecond}
		if err := in.RecordOutcome(ctx, d, o); err != nil {
			t.Fatal(err)
		}
		want = append(want, made{d, o})
	}
	if err := tp.Shutdown(ctx); err != nil {
		t.Fatal(err)
	}
	lg, err := ReadTraceFiles(path)
	if err != nil {
		t.Fatal(err)
	}
	if lg.Stats.Decisions != 40 || lg.Stats.Outcomes != 40 || lg.Stats.OtherSpans != 0 {
		t.Fatalf("stats %+v", lg.Stats)
	}
	joined, js := Join(lg.Decisions, lg.Outcomes)
	if js.Joined != 40 || js.DecisionsWithoutOutcome != 0 || js.OutcomesWithoutDecision != 0 {
		t.Fatalf("join %+v", js)
	}
	byKey := map[string]Joined{}
	for _, j := range joined {
		byKey[j.Decision.Key] = j
	}
	explored, cached := 0, 0
	for i, m := range want {
		j, ok := byKey[fmt.Sprintf("unit-%02d", i)]
		if !ok {
			t.Fatalf("unit %d missing", i)
		}
		dr, or := j.Decision, j.Outcome
		if dr.Mode != m.d.Mode.String() || dr.Gain != m.d.Gain || dr.Score != m.d.Score || dr.Err != m.d.Err || dr.Arm != m.d.Arm ||
			dr.Propensity != m.d.Propensity || dr.Explored != m.d.Explored || dr.Reason != m.d.Reason.Code ||
			dr.DirectErr != m.d.Direct.Err || dr.DirectSupport != m.d.Direct.Support || dr.SamplingRatio != 0.25 ||
			dr.HasChain != (m.d.Chain != nil) || dr.Cached != m.d.Cached || dr.Truncated != m.d.Truncated {
			t.Errorf("unit %d: record %+v\n decision %+v", i, dr, m.d)
		}
		if m.d.Chain != nil && (dr.ChainErr != m.d.Chain.Err || dr.ChainHops != len(m.d.Chain.Bridges) || strings.Join(dr.Bridges, ",") != strings.Join(m.d.Chain.Bridges, ",")) {
			t.Errorf("unit %d: chain %+v vs %+v", i, dr, m.d.Chain)
		}
		if len(dr.TraceID) != 32 || len(dr.SpanID) != 16 || dr.Source == "" {
			t.Errorf("ids %q %q source %q", dr.TraceID, dr.SpanID, dr.Source)
		}
		if or.Score != m.o.Score || or.InputTokens != m.o.InputTokens || or.OutputTokens != m.o.OutputTokens ||
			or.LatencyMs != float64(m.o.Latency.Milliseconds()) || or.Mode != m.d.Mode.String() || or.Arm != m.d.Arm {
			t.Errorf("unit %d: outcome %+v vs %+v", i, or, m.o)
		}
		if dr.Explored {
			explored++
		}
		if dr.Cached {
			cached++
		}
	}
	// The flags are written only when true: both values must occur for
	// the check above to cover them.
	t.Logf("explored %d, cached %d of 40", explored, cached)
	if explored == 0 || explored == 40 || cached == 0 || cached == 40 {
		t.Errorf("explored %d, cached %d of 40: want both values of each flag", explored, cached)
	}
}

// A decision span line written by hand to the OTLP/JSON spec reads back
// with the right ids and attributes.
func TestReadHandWrittenDecisionLine(t *testing.T) {
	t.Parallel()
	line := `{"resourceSpans":[{"resource":{},"scopeSpans":[{"scope":{"name":"github.com/hopwise/hopwise/otelx","version":"0.1.0"},"spans":[` +
		`{"traceId":"0af7651916cd43dd8448eb211c80319c","spanId":"b7ad6b7169203331","name":"hopwise.decide","kind":1,` +
		`"startTimeUnixNano":"1700000000000000000","endTimeUnixNano":"1700000000000004000",` +
		`"attributes":[{"key":"hopwise.query.key","value":{"stringValue":"unit-7"}},` +
		`{"key":"hopwise.route.mode","value":{"stringValue":"chain"}},` +
		`{"key":"hopwise.route.gain","value":{"doubleValue":0.0125}},` +
		`{"key":"hopwise.route.propensity","value":{"doubleValue":0.9}},` +
		`{"key":"hopwise.direct.support","value":{"intValue":"3"}},` +
		`{"key":"hopwise.chain.err","value":{"doubleValue":0.02}},` +
		`{"key":"hopwise.chain.hops","value":{"intValue":"2"}},` +
		`{"key":"hopwise.chain.bridges","value":{"arrayValue":{"values":[{"stringValue":"humidity-zone1"},{"stringValue":"pump-2"}]}}},` +
		`{"key":"hopwise.ab.arm","value":{"stringValue":"routed"}},` +
		`{"key":"hopwise.sampling.ratio","value":{"doubleValue":0.1}}],"status":{}},` +
		`{"traceId":"0af7651916cd43dd8448eb211c80319c","spanId":"00f067aa0ba902b7","name":"hopwise.outcome",` +
		`"attributes":[{"key":"hopwise.query.key","value":{"stringValue":"unit-7"}},{"key":"hopwise.outcome.score","value":{"doubleValue":1}},` +
		`{"key":"hopwise.outcome.input_tokens","value":{"intValue":"640"}}]}]}]}]}`
	var ds []*DecisionRecord
	var os []*OutcomeRecord
	st, err := ReadTraces(strings.NewReader(line+"\n"), "hand.jsonl",
		func(d *DecisionRecord) error { ds = append(ds, d); return nil },
		func(o *OutcomeRecord) error { os = append(os, o); return nil })
	if err != nil {
		t.Fatal(err)
	}
	if st.Decisions != 1 || st.Outcomes != 1 {
		t.Fatalf("stats %+v", st)
	}
	d := ds[0]
	if d.TraceID != "0af7651916cd43dd8448eb211c80319c" || d.SpanID != "b7ad6b7169203331" || d.Source != "hand.jsonl:1" {
		t.Errorf("ids %s %s %s", d.TraceID, d.SpanID, d.Source)
	}
	if d.Mode != "chain" || d.Gain != 0.0125 || d.Score != 0.0125 || d.Propensity != 0.9 || d.DirectSupport != 3 ||
		!d.HasChain || d.ChainHops != 2 || len(d.Bridges) != 2 || d.Arm != "routed" || d.SamplingRatio != 0.1 ||
		d.Duration != 4*time.Microsecond || d.Start.UnixNano() != 1700000000000000000 {
		t.Errorf("record %+v", d)
	}
	if os[0].Key != "unit-7" || os[0].Score != 1 || os[0].InputTokens != 640 || os[0].SamplingRatio != 1 {
		t.Errorf("outcome %+v", os[0])
	}
}

func TestReadTracesBadRecords(t *testing.T) {
	t.Parallel()
	span := func(attrs string) string {
		return `{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"0af7651916cd43dd8448eb211c80319c","spanId":"b7ad6b7169203331","name":"hopwise.decide","attributes":[` + attrs + `]}]}]}]}`
	}
	good := span(`{"key":"hopwise.route.mode","value":{"stringValue":"direct"}}`)
	cases := []struct{ name, input, want string }{
		{"gain as string", good + "\n" + strings.Replace(span(`{"key":"hopwise.route.mode","value":{"stringValue":"direct"}},{"key":"hopwise.route.gain","value":{"stringValue":"high"}}`), "b7ad6b7169203331", "b7ad6b7169203332", 1),
			"t.jsonl:2: span b7ad6b7169203332: attribute hopwise.route.gain: want double, got string"},
		{"missing mode", span(`{"key":"hopwise.route.gain","value":{"doubleValue":1}}`), "t.jsonl:1: span b7ad6b7169203331: attribute hopwise.route.mode: missing"},
		{"unknown mode", span(`{"key":"hopwise.route.mode","value":{"stringValue":"sideways"}}`), "unknown mode"},
		{"bad ratio", span(`{"key":"hopwise.route.mode","value":{"stringValue":"direct"}},{"key":"hopwise.sampling.ratio","value":{"doubleValue":0}}`), "ratio 0 not in (0,1]"},
		{"truncated", good + "\n" + good[:50], "t.jsonl:2: otlpfile: malformed"},
		{"garbage", "not json at all", "t.jsonl:1:"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			_, err := ReadTraces(strings.NewReader(c.input), "t.jsonl", nil, nil)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("err = %v, want it to contain %q", err, c.want)
			}
		})
	}
}

func TestReadOutcomesPlain(t *testing.T) {
	t.Parallel()
	input := `{"unit":"unit-1","score":1,"input_tokens":812,"output_tokens":95,"latency_ms":640.5}

{"unit":"unit-2","score":0}
`
	got, err := ReadOutcomes(strings.NewReader(input), "out.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 2 || got[0].Tokens() != 907 || got[0].LatencyMs != 640.5 || got[1].Source != "out.jsonl:3" {
		t.Errorf("%+v", got)
	}
	bad := []struct{ line, want string }{
		{`{"unit":"u","score":1.5}`, "out.jsonl:1: field score: 1.5 not in [0,1]"},
		{`{"score":1}`, "field unit: missing"},
		{`{"unit":"u","score":1,"input_tokens":-3}`, "field input_tokens: negative"},
		{`{"unit":"u","score":1,"input_tokens":"many"}`, "field input_tokens: want a number, got a string"},
		{`{"unit":"u","score":1,"tokens":3}`, `field "tokens": unknown`},
		{`{"unit":"u","score":1`, "out.jsonl:1:"},
	}
	for _, b := range bad {
		_, err := ReadOutcomes(strings.NewReader(b.line), "out.jsonl")
		if !errors.Is(err, ErrBadRecord) || !strings.Contains(err.Error(), b.want) {
			t.Errorf("%s: err = %v, want %q", b.line, err, b.want)
		}
	}
}

func TestJoinOrderAndCounts(t *testing.T) {
	t.Parallel()
	t0 := time.Unix(100, 0)
	ds := []DecisionRecord{
		{Key: "a", Start: t0.Add(2 * time.Second), Mode: "chain"},
		{Key: "a", Start: t0, Mode: "direct"},
		{Key: "b", Start: t0},
		{Key: ""},
	}
	os := []OutcomeRecord{{Key: "a", Score: 0}, {Key: "a", Score: 1}, {Key: "c", Score: 1}}
	j, st := Join(ds, os)
	if st.Joined != 2 || st.DecisionsWithoutKey != 1 || st.DecisionsWithoutOutcome != 1 || st.OutcomesWithoutDecision != 1 {
		t.Fatalf("stats %+v", st)
	}
	// earliest decision of key a gets the first outcome
	for _, x := range j {
		if (x.Decision.Mode == "direct") != (x.Outcome.Score == 0) {
			t.Errorf("pairing %+v %+v", x.Decision, x.Outcome)
		}
	}
}

// TestCompactSpans: the compact set holds exactly what tune and ab read,
// the error of the chosen mode only, and reads back into the same record
// fields (HasChain from the hop count when the chain was not taken). τ = -1
// takes every chain, τ = 2 none (a gain never exceeds 1).
func TestCompactSpans(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name string
		tau  float64
		mode router.Mode
	}{{"chain", -1, router.ModeChain}, {"direct", 2, router.ModeDirect}} {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			compactCase(t, c.tau, c.mode)
		})
	}
}

func compactCase(t *testing.T, tau float64, mode router.Mode) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "compact.jsonl")
	exp, err := otlpfile.NewExporter(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	rec := tracetest.NewSpanRecorder()
	tp := sdktrace.NewTracerProvider(sdktrace.WithSpanProcessor(rec), sdktrace.WithBatcher(exp))
	in, err := New(WithTracerProvider(tp), WithCompactSpans(), WithSamplingRatio(0.5))
	if err != nil {
		t.Fatal(err)
	}
	r := newRouter(t, router.WithArms(router.ArmWeight{Arm: router.ArmRouted, Weight: 1}), router.WithGainThreshold(tau))
	d, err := in.Decide(ctx, r, router.Query{From: "vent-north", Value: "open", To: "bed-tomato", Key: "u1"})
	if err != nil || d.Chain == nil || d.Mode != mode {
		t.Fatalf("%v %+v", err, d)
	}
	if err := in.RecordOutcome(ctx, d, Outcome{Score: 1, InputTokens: 7}); err != nil {
		t.Fatal(err)
	}
	if err := tp.Shutdown(ctx); err != nil {
		t.Fatal(err)
	}
	var keys []string
	for _, kv := range rec.Ended()[0].Attributes() {
		keys = append(keys, string(kv.Key))
		if kv.Value.Type() == attribute.STRING && strings.Contains(kv.Value.AsString(), "vent") {
			t.Errorf("entity name recorded in %s", kv.Key)
		}
	}
	want := []string{KeyRouteMode, KeyRouteGain, KeyRouteReason, KeyRoutePropensity, KeySamplingRatio, KeyQueryKey, KeyChainHops, KeyABArm}
	if d.Mode == router.ModeChain {
		want = append(want, KeyChainErr)
	} else {
		want = append(want, KeyDirectErr)
	}
	slices.Sort(keys)
	slices.Sort(want)
	if !slices.Equal(keys, want) {
		t.Errorf("compact keys %v, want %v", keys, want)
	}
	lg, err := ReadTraceFiles(path)
	if err != nil {
		t.Fatal(err)
	}
	// The outcome span: no generation, 8 attributes with ratio and arm.
	oa := spanAttrs(rec.Ended()[1])
	if _, ok := oa[KeyIndexGeneration]; ok || len(oa) != 8 {
		t.Errorf("compact outcome span attributes %v", oa)
	}
	if len(lg.Outcomes) != 1 || lg.Outcomes[0].Score != 1 || lg.Outcomes[0].InputTokens != 7 || lg.Outcomes[0].Arm != router.ArmRouted ||
		lg.Outcomes[0].SamplingRatio != 0.5 || lg.Outcomes[0].Key != "u1" || lg.Outcomes[0].Mode != d.Mode.String() {
		t.Errorf("compact outcome records %+v", lg.Outcomes)
	}
	got := lg.Decisions[0]
	if got.Mode != d.Mode.String() || got.Gain != d.Gain || got.Propensity != d.Propensity || !got.HasChain ||
		got.ChainHops != len(d.Chain.Bridges) || got.Err != d.Err || got.SamplingRatio != 0.5 || got.Key != "u1" || got.Arm != router.ArmRouted {
		t.Errorf("compact record %+v vs decision %+v", got, d)
	}
}

// TestParallelChainAttr: a decision whose chain reads its two bridges side
// by side carries hopwise.chain.parallel = true; a sequential chain does
// not carry the key (readers take false).
func TestParallelChainAttr(t *testing.T) {
	in, err := New()
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ par, mid bool }{{true, true}, {true, false}, {false, false}} {
		d := router.Decision{Mode: router.ModeChain, Bridges: []string{"a", "b"},
			Chain: &router.ChainResult{Bridges: []string{"a", "b"}, Parallel: c.par, Midpoint: c.mid}}
		found, mid := false, false
		for _, kv := range in.decisionAttrs(nil, router.Query{From: "s", Value: "v", To: "t"}, &d) {
			switch kv.Key {
			case KeyChainParallel:
				found = kv.Value.AsBool()
			case KeyChainMidpoint:
				mid = kv.Value.AsBool()
			}
		}
		if found != c.par || mid != c.mid {
			t.Errorf("parallel %v, midpoint %v: attributes %s %v, %s %v", c.par, c.mid, KeyChainParallel, found, KeyChainMidpoint, mid)
		}
	}
}
