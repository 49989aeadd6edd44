package otelx

import (
	"context"
	"crypto/hmac"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"math"
	"slices"
	"strconv"
	"sync"
	"sync/atomic"
	"time"

	"go.opentelemetry.io/otel"
	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/codes"
	"go.opentelemetry.io/otel/metric"
	mnoop "go.opentelemetry.io/otel/metric/noop"
	"go.opentelemetry.io/otel/trace"
	tnoop "go.opentelemetry.io/otel/trace/noop"

	"github.com/hopwise/hopwise/router"
)

// ScopeName is the instrumentation scope of hopwise's tracer and meter:
// the import path of this package.
const ScopeName = "github.com/hopwise/hopwise/otelx"

// Version is the instrumentation scope version (semver).
const Version = "0.1.0"

// Sentinel errors.
var (
	// ErrBadOption wraps an invalid option value given to New.
	ErrBadOption = errors.New("otelx: invalid option")
	// ErrBadOutcome wraps an outcome outside its domain (score not in
	// [0,1], negative tokens or latency).
	ErrBadOutcome = errors.New("otelx: invalid outcome")
	// ErrNoKey is returned by RecordOutcome for a decision without a unit
	// key: the outcome could not be joined to it. Set router.Query.Key.
	ErrNoKey = errors.New("otelx: decision has no unit key to join the outcome on")
)

// MinHashKeyLen is the shortest HMAC key WithEntityHashKey accepts.
const MinHashKeyLen = 16

// Option configures New.
type Option interface{ apply(*config) }

type optionFunc func(*config)

func (f optionFunc) apply(c *config) { f(c) }

type config struct {
	tp       trace.TracerProvider
	mp       metric.MeterProvider
	hashKey  []byte
	hashSet  bool
	ratio    float64
	ratioSet bool
	compact  bool
}

// WithTracerProvider sets the tracer provider (default: the otel global
// at New time). A nil provider is ignored.
func WithTracerProvider(tp trace.TracerProvider) Option {
	return optionFunc(func(c *config) {
		if tp != nil {
			c.tp = tp
		}
	})
}

// WithMeterProvider sets the meter provider (default: the otel global at
// New time). A nil provider is ignored.
func WithMeterProvider(mp metric.MeterProvider) Option {
	return optionFunc(func(c *config) {
		if mp != nil {
			c.mp = mp
		}
	})
}

// WithEntityHashKey replaces entity names and values in spans by
// HMAC-SHA256(key, name), hex encoded and truncated to 128 bits, so traces
// can be joined and counted without revealing the names. The span of a
// failed decision then records only the sentinel the error wraps (the
// router's error text names the entity in clear). The key must be at least
// MinHashKeyLen bytes; it is copied.
func WithEntityHashKey(key []byte) Option {
	return optionFunc(func(c *config) {
		c.hashKey = append([]byte(nil), key...)
		c.hashSet = true
	})
}

// WithSamplingRatio records r, the trace sampling ratio configured in the
// tracer provider's sampler, on every span (hopwise.sampling.ratio), so
// readers can weight each decision by 1/r. The SDK samplers do not record
// it themselves. r must be in (0, 1]. Without this option spans carry no
// ratio and readers take 1.
func WithSamplingRatio(r float64) Option {
	return optionFunc(func(c *config) { c.ratio, c.ratioSet = r, true })
}

// WithCompactSpans records on decision spans only the attributes that
// `hopwise tune` and `hopwise ab` read: mode, gain, reason, propensity,
// the expected error of the chosen mode (direct or chain), the hop count
// when a chain was found, unit key, arm, and when they apply the sampling
// ratio, exploration and score — no entity names, bridges, support,
// truncation, cache or generation (outcome spans lose the generation too,
// so they stay at 8 attributes or fewer). The SDK's cost grows with the
// attribute count, and more steeply past 8 attributes (its end-of-span
// de-duplication then allocates a full hash table: 7 allocations per span
// instead of 4 with OpenTelemetry Go SDK v1.47, BenchmarkSpanAttrCount),
// so a typical compact span stays at 8 or fewer; in TestOverhead its
// overhead is about half the default span's.
func WithCompactSpans() Option { return optionFunc(func(c *config) { c.compact = true }) }

// Outcome is what the gateway observed for a routed query.
type Outcome struct {
	Score        float64       // quality in [0,1] (1 = correct)
	InputTokens  int64         // prompt tokens spent
	OutputTokens int64         // completion tokens spent
	Latency      time.Duration // end-to-end answer latency
}

// Instrumentation traces and measures routing decisions. It is safe for
// concurrent use.
type Instrumentation struct {
	tracer  trace.Tracer // nil when the provider is the otel noop provider
	genStr  atomic.Pointer[genCache]
	hashKey []byte
	hashers sync.Pool
	hashes  hashCache
	ratio   attribute.KeyValue
	// ratioSet: WithSamplingRatio was given, so spans carry the ratio
	// (readers take 1 when it is absent).
	ratioSet bool
	hashed   bool
	compact  bool
	// metricsOff: the meter provider is the otel noop provider, so the
	// Enabled checks are skipped too.
	metricsOff bool
	off        bool // tracer nil and metricsOff

	latency metric.Float64Histogram
	gain    metric.Float64Histogram
	outcome metric.Float64Histogram

	sets     [3][len(knownArms)]attrOpts // [mode][arm]: direct, chain, error
	extra    sync.Map                    // unknown arm name → *[3]attrOpts
	ratioVal float64
	epoch    time.Time // New's time, with its monotonic reading
}

var knownArms = [...]string{"", router.ArmRouted, router.ArmDirectOnly, router.ArmChainAlways}

const modeError = 2

var modeNames = [3]string{"direct", "chain", "error"}

// New builds the instrumentation: a tracer and a meter of scope ScopeName
// and Version from the configured providers, and the metric instruments.
func New(opts ...Option) (*Instrumentation, error) {
	cfg := config{ratio: 1}
	for _, o := range opts {
		if o != nil {
			o.apply(&cfg)
		}
	}
	if cfg.tp == nil {
		cfg.tp = otel.GetTracerProvider()
	}
	if cfg.mp == nil {
		cfg.mp = otel.GetMeterProvider()
	}
	if cfg.ratioSet && !(cfg.ratio > 0 && cfg.ratio <= 1) {
		return nil, fmt.Errorf("%w: WithSamplingRatio(%v): want a ratio in (0, 1]", ErrBadOption, cfg.ratio)
	}
	if cfg.hashSet && len(cfg.hashKey) < MinHashKeyLen {
		return nil, fmt.Errorf("%w: WithEntityHashKey: key of %d bytes, want at least %d", ErrBadOption, len(cfg.hashKey), MinHashKeyLen)
	}
	in := &Instrumentation{
		ratio:    attribute.Float64(KeySamplingRatio, cfg.ratio),
		ratioSet: cfg.ratioSet,
		ratioVal: cfg.ratio,
		compact:  cfg.compact,
		epoch:    time.Now(),
	}
	// The otel noop provider records nothing by contract, so its spans are
	// skipped outright (no context allocation per decision). Any other
	// provider gets real Start calls, including the otel globals before an
	// SDK is installed behind them: telling those apart would take a look
	// at otel's internal package path, which otel may change in any
	// release, so they take the ordinary path (a non-recording span, about
	// 240 B in 3 allocations per decision; BenchmarkDecide global-no-sdk).
	// A process that never installs an SDK passes the noop providers.
	if _, isNoop := cfg.tp.(tnoop.TracerProvider); !isNoop {
		in.tracer = cfg.tp.Tracer(ScopeName, trace.WithInstrumentationVersion(Version))
	}
	if cfg.hashSet {
		in.hashed = true
		in.hashKey = cfg.hashKey
		in.hashers.New = func() any { return hmac.New(sha256.New, in.hashKey) }
	}
	// Likewise the noop meter provider: its instruments are never enabled.
	if _, isNoop := cfg.mp.(mnoop.MeterProvider); isNoop {
		in.metricsOff = true
	}
	meter := cfg.mp.Meter(ScopeName, metric.WithInstrumentationVersion(Version))
	var err, e error
	in.latency, e = meter.Float64Histogram(MetricDecisionLatency, metric.WithUnit("s"),
		metric.WithDescription("Time to decide a route, by mode, A/B arm and decision cache result; its count is the number of decisions."),
		metric.WithExplicitBucketBoundaries(1e-6, 2.5e-6, 5e-6, 1e-5, 2.5e-5, 5e-5, 1e-4, 2.5e-4, 5e-4, 1e-3, 5e-3, 0.01, 0.05))
	err = errors.Join(err, e)
	in.gain, e = meter.Float64Histogram(MetricGain, metric.WithUnit("1"),
		metric.WithDescription("Estimated error reduction of the best chain over the direct answer."),
		metric.WithExplicitBucketBoundaries(-0.05, -0.01, -0.001, 0, 0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1))
	err = errors.Join(err, e)
	in.outcome, e = meter.Float64Histogram(MetricOutcomeScore, metric.WithUnit("1"),
		metric.WithDescription("Outcome scores reported by the gateway, by mode and arm."),
		metric.WithExplicitBucketBoundaries(0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1))
	err = errors.Join(err, e)
	if err != nil {
		return nil, fmt.Errorf("otelx: create instruments: %w", err)
	}
	in.off = in.tracer == nil && in.metricsOff
	for m := range in.sets {
		for a, arm := range knownArms {
			in.sets[m][a] = modeArmSet(modeNames[m], arm)
		}
	}
	return in, nil
}

// attrOpts holds the measurement options of one (mode, arm): the latency
// histogram's, by cache result, and the other histograms'. They are built
// once, so that recording allocates nothing.
type attrOpts struct {
	lat [2][]metric.RecordOption // [miss, hit]; the same set for the error mode
	rec []metric.RecordOption
}

func modeArmSet(mode, arm string) attrOpts {
	kvs := []attribute.KeyValue{attribute.String(KeyRouteMode, mode)}
	if arm != "" {
		kvs = append(kvs, attribute.String(KeyABArm, arm))
	}
	var o attrOpts
	o.rec = []metric.RecordOption{metric.WithAttributeSet(attribute.NewSet(kvs...))}
	for i, res := range [2]string{"miss", "hit"} {
		if mode == modeNames[modeError] {
			o.lat[i] = o.rec
			continue
		}
		withRes := append(slices.Clip(kvs), attribute.String(KeyCacheResult, res))
		o.lat[i] = []metric.RecordOption{metric.WithAttributeSet(attribute.NewSet(withRes...))}
	}
	return o
}

// set returns the prebuilt options of (mode, arm).
func (in *Instrumentation) set(mode int, arm string) *attrOpts {
	for a, k := range knownArms {
		if k == arm {
			return &in.sets[mode][a]
		}
	}
	if v, ok := in.extra.Load(arm); ok {
		return &v.(*[3]attrOpts)[mode]
	}
	var s [3]attrOpts
	for m := range s {
		s[m] = modeArmSet(modeNames[m], arm)
	}
	v, _ := in.extra.LoadOrStore(arm, &s)
	return &v.(*[3]attrOpts)[mode]
}

// HashEntity returns what spans record for an entity name or value: the
// name itself, or its truncated HMAC-SHA256 when WithEntityHashKey is set.
func (in *Instrumentation) HashEntity(name string) string {
	if !in.hashed {
		return name
	}
	if s, ok := in.hashes.get(name); ok {
		return s
	}
	s := in.hmacHex(name)
	in.hashes.put(name, s)
	return s
}

// hmacHex computes the truncated HMAC-SHA256 of name in hex.
func (in *Instrumentation) hmacHex(name string) string {
	h := in.hashers.Get().(hash.Hash)
	h.Reset()
	h.Write([]byte(name))
	var sum [sha256.Size]byte
	out := hex.EncodeToString(h.Sum(sum[:0])[:16])
	in.hashers.Put(h)
	return out
}

// Decide calls r.Decide inside a span named SpanDecide and records the
// decision metrics. Span attributes are built only when the span is
// recording, the latency is measured only when the latency histogram is
// enabled, and each metric call is guarded by its instrument's Enabled.
// With the otel noop providers it calls r.Decide and nothing else.
func (in *Instrumentation) Decide(ctx context.Context, r *router.Router, q router.Query) (router.Decision, error) {
	if in.off { // both providers are the otel noop ones
		return r.Decide(ctx, q)
	}
	return in.decide(ctx, r, q)
}

// tracing reports whether decisions get spans: the tracer is not the noop
// one.
func (in *Instrumentation) tracing() bool { return in.tracer != nil }

// metering is tracing's counterpart for the meter provider.
func (in *Instrumentation) metering() bool { return !in.metricsOff }

// decide is Decide's instrumented path; Decide stays small, so the noop
// case costs one branch and a call.
func (in *Instrumentation) decide(ctx context.Context, r *router.Router, q router.Query) (router.Decision, error) {
	tracing, metering := in.tracing(), in.metering()
	var span trace.Span
	recording := false
	spanCtx := ctx
	if tracing {
		spanCtx, span = in.tracer.Start(ctx, SpanDecide)
		recording = span.IsRecording()
	}
	// Monotonic readings since New: one clock read each, where time.Now
	// reads the wall clock as well.
	timed := metering && in.latency.Enabled(spanCtx)
	var start time.Duration
	if timed {
		start = time.Since(in.epoch)
	}
	d, err := r.Decide(spanCtx, q)
	var elapsed time.Duration
	if timed {
		elapsed = time.Since(in.epoch) - start
	}
	if recording {
		bp := attrPool.Get().(*[]attribute.KeyValue)
		var attrs []attribute.KeyValue
		if err != nil {
			serr := in.spanError(err) // no entity names in clear when hashing
			span.RecordError(serr)
			span.SetStatus(codes.Error, serr.Error())
			attrs = in.queryAttrs((*bp)[:0], q)
		} else {
			attrs = in.decisionAttrs((*bp)[:0], q, &d)
		}
		// One call: the SDK grows its attribute slice once and copies the
		// values, so the pooled slice can be reused.
		span.SetAttributes(attrs...)
		clear(attrs)
		*bp = attrs[:0]
		attrPool.Put(bp)
	}
	if span != nil {
		span.End()
	}
	if metering {
		in.measure(ctx, spanCtx, &d, err, timed, elapsed)
	}
	return d, err
}

// measure records the decision metrics, each guarded by Enabled. The
// latency histogram is also the decision count, by mode, arm and cache
// result (its count; the OpenTelemetry HTTP semantic conventions count
// requests the same way, from memory), which saves the SDK one measurement
// per decision. It is recorded in the decision span's context, so that an
// SDK exemplar points at the decision's span; the gain in the caller's
// context (the SDK reads the clock for each exemplar it offers).
func (in *Instrumentation) measure(ctx, spanCtx context.Context, d *router.Decision, err error, timed bool, elapsed time.Duration) {
	mode := modeError
	if err == nil {
		mode = int(d.Mode)
		if mode > 1 {
			mode = modeError
		}
	}
	set := in.set(mode, d.Arm)
	if timed {
		hit := 0
		if err == nil && d.Cached {
			hit = 1
		}
		in.latency.Record(spanCtx, elapsed.Seconds(), set.lat[hit]...)
	}
	if err == nil && d.Chain != nil && in.gain.Enabled(ctx) {
		in.gain.Record(ctx, d.Gain, set.rec...)
	}
}

func (in *Instrumentation) queryAttrs(attrs []attribute.KeyValue, q router.Query) []attribute.KeyValue {
	attrs = append(attrs,
		attribute.String(KeyQueryFrom, in.HashEntity(q.From)),
		attribute.String(KeyQueryValue, in.HashEntity(q.Value)),
		attribute.String(KeyQueryTo, in.HashEntity(q.To)),
	)
	if in.ratioSet {
		attrs = append(attrs, in.ratio)
	}
	if q.Key != "" {
		attrs = append(attrs, attribute.String(KeyQueryKey, q.Key))
	}
	if in.hashed {
		attrs = append(attrs, entityHashAttr)
	}
	return attrs
}

var (
	entityHashAttr = attribute.String(KeyEntityHash, "hmac-sha256")
	// Enum-like attributes, built once.
	modeAttrs     = [2]attribute.KeyValue{attribute.String(KeyRouteMode, "direct"), attribute.String(KeyRouteMode, "chain")}
	truncatedAttr = attribute.Bool(KeyRouteTruncated, true)
	exploredAttr  = attribute.Bool(KeyRouteExplored, true)
	cachedAttr    = attribute.Bool(KeyRouteCached, true)
)

func modeAttr(m router.Mode) attribute.KeyValue {
	if int(m) < len(modeAttrs) {
		return modeAttrs[m]
	}
	return attribute.String(KeyRouteMode, m.String())
}

var attrPool = sync.Pool{New: func() any { s := make([]attribute.KeyValue, 0, 32); return &s }}

// decisionAttrs appends the span attributes of a decision (docs/DESIGN.md, Telemetry)
// to attrs. The flags truncated, explored and cached are recorded only
// when true, the sampling ratio only when WithSamplingRatio was given, and
// the score only when it differs from the gain: readers take false, 1 and
// the gain when they are absent, and every attribute costs the SDK time.
func (in *Instrumentation) decisionAttrs(attrs []attribute.KeyValue, q router.Query, d *router.Decision) []attribute.KeyValue {
	if in.compact {
		return in.compactAttrs(attrs, q, d)
	}
	attrs = in.queryAttrs(attrs, q)
	attrs = append(attrs,
		modeAttr(d.Mode),
		attribute.Float64(KeyRouteGain, d.Gain),
		attribute.String(KeyRouteReason, d.Reason.Code),
		attribute.Float64(KeyRoutePropensity, d.Propensity),
		attribute.Float64(KeyDirectErr, d.Direct.Err),
		attribute.Int64(KeyDirectSupport, clampInt64(d.Direct.Support)),
		attribute.String(KeyIndexGeneration, in.genString(d.Generation)),
	)
	if d.Truncated {
		attrs = append(attrs, truncatedAttr)
	}
	if d.Explored {
		attrs = append(attrs, exploredAttr)
	}
	if d.Cached {
		attrs = append(attrs, cachedAttr)
	}
	if d.Score != d.Gain { // utility scoring; readers default score to gain
		attrs = append(attrs, attribute.Float64(KeyRouteScore, d.Score))
	}
	if d.Chain != nil {
		bridges := d.Chain.Bridges // StringSlice copies it
		if in.hashed {
			bridges = make([]string, len(d.Chain.Bridges))
			for i, b := range d.Chain.Bridges {
				bridges[i] = in.HashEntity(b)
			}
		}
		attrs = append(attrs,
			attribute.Float64(KeyChainErr, d.Chain.Err),
			attribute.Int(KeyChainHops, len(d.Chain.Bridges)),
			attribute.StringSlice(KeyChainBridges, bridges),
		)
		if d.Chain.Parallel {
			attrs = append(attrs, attribute.Bool(KeyChainParallel, true))
		}
		if d.Chain.Midpoint {
			attrs = append(attrs, attribute.Bool(KeyChainMidpoint, true))
		}
	}
	if d.Arm != "" {
		attrs = append(attrs, attribute.String(KeyABArm, d.Arm))
	}
	return attrs
}

// compactAttrs is the WithCompactSpans set: what tuning and A/B analysis
// read, and nothing else. The expected error is recorded for the chosen
// mode only (direct error in direct mode, chain error in chain mode), and
// the hop count marks that a chain was available; so a typical span has
// at most 8 attributes (see WithCompactSpans).
func (in *Instrumentation) compactAttrs(attrs []attribute.KeyValue, q router.Query, d *router.Decision) []attribute.KeyValue {
	attrs = append(attrs,
		modeAttr(d.Mode),
		attribute.Float64(KeyRouteGain, d.Gain),
		attribute.String(KeyRouteReason, d.Reason.Code),
		attribute.Float64(KeyRoutePropensity, d.Propensity),
	)
	if d.Mode == router.ModeChain && d.Chain != nil {
		attrs = append(attrs, attribute.Float64(KeyChainErr, d.Chain.Err))
	} else {
		attrs = append(attrs, attribute.Float64(KeyDirectErr, d.Direct.Err))
	}
	if d.Chain != nil {
		attrs = append(attrs, attribute.Int(KeyChainHops, len(d.Chain.Bridges)))
	}
	if q.Key != "" {
		attrs = append(attrs, attribute.String(KeyQueryKey, q.Key))
	}
	if d.Arm != "" {
		attrs = append(attrs, attribute.String(KeyABArm, d.Arm))
	}
	if in.ratioSet {
		attrs = append(attrs, in.ratio)
	}
	if d.Explored {
		attrs = append(attrs, exploredAttr)
	}
	if d.Score != d.Gain {
		attrs = append(attrs, attribute.Float64(KeyRouteScore, d.Score))
	}
	return attrs
}

type genCache struct {
	gen uint64
	s   string
}

// genString formats an index generation as 16 hex digits, caching the last
// one (generations change only on index swaps).
func (in *Instrumentation) genString(g uint64) string {
	if c := in.genStr.Load(); c != nil && c.gen == g {
		return c.s
	}
	s := formatGen(g)
	in.genStr.Store(&genCache{gen: g, s: s})
	return s
}

func formatGen(g uint64) string {
	var b [16]byte
	s := strconv.AppendUint(b[:0], g, 16)
	out := make([]byte, 16)
	for i := range out {
		out[i] = '0'
	}
	copy(out[16-len(s):], s)
	return string(out)
}

func clampInt64(u uint64) int64 {
	if u > math.MaxInt64 {
		return math.MaxInt64
	}
	return int64(u)
}

// RecordOutcome reports what the gateway observed for decision d: a span
// named SpanOutcome carrying the unit key (the join key with the decision
// span), the outcome, and the decision's mode and arm, plus the outcome
// score histogram. Pass the request's context (the one given to Decide),
// so that the outcome span joins the decision's trace and a trace sampler
// keeps or drops the two together. It returns ErrNoKey when d has no unit key and
// ErrBadOutcome for values outside their domain; nothing is recorded then.
//
// Options add to the span: WithOutcomeAttributes puts the caller's own
// attributes (the GenAI attributes of the model call, say) beside the
// hopwise.* ones.
func (in *Instrumentation) RecordOutcome(ctx context.Context, d router.Decision, o Outcome, opts ...OutcomeOption) error {
	if d.Key == "" {
		return ErrNoKey
	}
	var oc outcomeConfig
	for _, opt := range opts {
		if opt != nil {
			opt.applyOutcome(&oc)
		}
	}
	if err := checkOutcomeAttrs(oc.attrs); err != nil {
		return err
	}
	switch {
	case !(o.Score >= 0 && o.Score <= 1):
		return fmt.Errorf("%w: score %v not in [0,1]", ErrBadOutcome, o.Score)
	case o.InputTokens < 0 || o.OutputTokens < 0:
		return fmt.Errorf("%w: negative token count (%d in, %d out)", ErrBadOutcome, o.InputTokens, o.OutputTokens)
	case o.Latency < 0:
		return fmt.Errorf("%w: negative latency %v", ErrBadOutcome, o.Latency)
	}
	var span trace.Span
	if in.tracing() {
		_, span = in.tracer.Start(ctx, SpanOutcome)
	}
	if span != nil && span.IsRecording() {
		bp := attrPool.Get().(*[]attribute.KeyValue)
		attrs := append((*bp)[:0],
			attribute.String(KeyQueryKey, d.Key),
			attribute.Float64(KeyOutcomeScore, o.Score),
			attribute.Int64(KeyOutcomeInputTokens, o.InputTokens),
			attribute.Int64(KeyOutcomeOutputTokens, o.OutputTokens),
			attribute.Float64(KeyOutcomeLatencyMs, float64(o.Latency)/float64(time.Millisecond)),
			modeAttr(d.Mode),
		)
		if !in.compact { // no reader uses it: the decision span has it
			attrs = append(attrs, attribute.String(KeyIndexGeneration, in.genString(d.Generation)))
		}
		if in.ratioSet {
			attrs = append(attrs, in.ratio)
		}
		if d.Arm != "" {
			attrs = append(attrs, attribute.String(KeyABArm, d.Arm))
		}
		attrs = append(attrs, oc.attrs...)
		span.SetAttributes(attrs...)
		clear(attrs)
		*bp = attrs[:0]
		attrPool.Put(bp)
	}
	if span != nil {
		span.End()
	}
	if in.metering() && in.outcome.Enabled(ctx) {
		m := int(d.Mode)
		if m > 1 {
			m = modeError
		}
		in.outcome.Record(ctx, o.Score, in.set(m, d.Arm).rec...)
	}
	return nil
}

// SamplingRatio returns the ratio recorded on spans.
func (in *Instrumentation) SamplingRatio() float64 { return in.ratioVal }
