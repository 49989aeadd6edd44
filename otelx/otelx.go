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
// it themselves. r must be in (0, 1]; default 1.
func WithSamplingRatio(r float64) Option {
	return optionFunc(func(c *config) { c.ratio, c.ratioSet = r, true })
}

// WithCompactSpans records on decision spans only the attributes that
// `hopwise tune` and `hopwise ab` read: unit key, mode, gain (and score
// when it differs), reason, propensity, exploration, direct error, chain
// error and hops, arm and sampling ratio — no entity names, bridges,
// support, truncation, cache or generation. The SDK's cost grows with the
// attribute count (and a string slice is dear), so this roughly halves
// the per-decision cost of a recording span.
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
	startOp []trace.SpanStartOption
	genStr  atomic.Pointer[genCache]
	hashKey []byte
	hashers sync.Pool
	ratio   attribute.KeyValue
	hashed  bool
	compact bool
	// metricsOff: the meter provider is the otel noop provider, so the
	// Enabled checks are skipped too.
	metricsOff bool
	off        bool // tracer nil and metricsOff

	decisions metric.Int64Counter
	latency   metric.Float64Histogram
	cache     metric.Int64Counter
	gain      metric.Float64Histogram
	outcome   metric.Float64Histogram

	sets     [3][len(knownArms)]attrOpts // [mode][arm]: direct, chain, error
	extra    sync.Map                    // unknown arm name → *[3]attrOpts
	hitOpts  []metric.AddOption
	missOpts []metric.AddOption
	ratioVal float64
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
		startOp:  []trace.SpanStartOption{trace.WithSpanKind(trace.SpanKindInternal)},
		ratio:    attribute.Float64(KeySamplingRatio, cfg.ratio),
		ratioVal: cfg.ratio,
		compact:  cfg.compact,
	}
	// The otel noop provider records nothing by contract, so its spans are
	// skipped outright (no context allocation per decision). Any other
	// provider, including the global delegate, gets real Start calls.
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
	in.decisions, e = meter.Int64Counter(MetricDecisions, metric.WithUnit("{decision}"),
		metric.WithDescription("Routing decisions by mode and A/B arm."))
	err = errors.Join(err, e)
	in.latency, e = meter.Float64Histogram(MetricDecisionLatency, metric.WithUnit("s"),
		metric.WithDescription("Time to decide a route."),
		metric.WithExplicitBucketBoundaries(1e-6, 2.5e-6, 5e-6, 1e-5, 2.5e-5, 5e-5, 1e-4, 2.5e-4, 5e-4, 1e-3, 5e-3, 0.01, 0.05))
	err = errors.Join(err, e)
	in.cache, e = meter.Int64Counter(MetricCache, metric.WithUnit("{decision}"),
		metric.WithDescription("Decision cache hits and misses."))
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
	in.hitOpts = []metric.AddOption{metric.WithAttributeSet(attribute.NewSet(attribute.String(KeyCacheResult, "hit")))}
	in.missOpts = []metric.AddOption{metric.WithAttributeSet(attribute.NewSet(attribute.String(KeyCacheResult, "miss")))}
	return in, nil
}

// attrOpts holds the measurement options of one (mode, arm) attribute
// set, built once so that recording allocates nothing.
type attrOpts struct {
	add []metric.AddOption
	rec []metric.RecordOption
}

func modeArmSet(mode, arm string) attrOpts {
	var set attribute.Set
	if arm == "" {
		set = attribute.NewSet(attribute.String(KeyRouteMode, mode))
	} else {
		set = attribute.NewSet(attribute.String(KeyRouteMode, mode), attribute.String(KeyABArm, arm))
	}
	o := metric.WithAttributeSet(set)
	return attrOpts{add: []metric.AddOption{o}, rec: []metric.RecordOption{o}}
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
// recording, the latency is measured only when a span records or the
// latency histogram is enabled, and each metric call is guarded by its
// instrument's Enabled.
func (in *Instrumentation) Decide(ctx context.Context, r *router.Router, q router.Query) (router.Decision, error) {
	if in.off {
		return r.Decide(ctx, q) // both providers are the otel noop ones
	}
	return in.decide(ctx, r, q)
}

// decide is Decide's instrumented path; Decide stays small enough to be
// inlined, so the noop case costs one branch.
func (in *Instrumentation) decide(ctx context.Context, r *router.Router, q router.Query) (router.Decision, error) {
	var span trace.Span
	recording := false
	if in.tracer != nil {
		ctx, span = in.tracer.Start(ctx, SpanDecide, in.startOp...)
		recording = span.IsRecording()
	}
	timed := recording || (!in.metricsOff && in.latency.Enabled(ctx))
	var start time.Time
	if timed {
		start = time.Now()
	}
	d, err := r.Decide(ctx, q)
	var elapsed time.Duration
	if timed {
		elapsed = time.Since(start)
	}
	if recording {
		if err != nil {
			serr := in.spanError(err) // no entity names in clear when hashing
			span.RecordError(serr)
			span.SetStatus(codes.Error, serr.Error())
			span.SetAttributes(in.queryAttrs(nil, q)...)
		} else {
			bp := attrPool.Get().(*[]attribute.KeyValue)
			attrs := in.decisionAttrs((*bp)[:0], q, &d)
			span.SetAttributes(attrs...) // the SDK copies the values
			clear(attrs)
			*bp = attrs[:0]
			attrPool.Put(bp)
		}
	}
	if span != nil {
		span.End()
	}

	if in.metricsOff {
		return d, err
	}
	mode := modeError
	if err == nil {
		mode = int(d.Mode)
		if mode > 1 {
			mode = modeError
		}
	}
	if in.decisions.Enabled(ctx) {
		in.decisions.Add(ctx, 1, in.set(mode, d.Arm).add...)
	}
	if timed && in.latency.Enabled(ctx) {
		in.latency.Record(ctx, elapsed.Seconds(), in.set(mode, d.Arm).rec...)
	}
	if err == nil {
		if in.cache.Enabled(ctx) {
			opts := in.missOpts
			if d.Cached {
				opts = in.hitOpts
			}
			in.cache.Add(ctx, 1, opts...)
		}
		if d.Chain != nil && in.gain.Enabled(ctx) {
			in.gain.Record(ctx, d.Gain, in.set(mode, d.Arm).rec...)
		}
	}
	return d, err
}

func (in *Instrumentation) queryAttrs(attrs []attribute.KeyValue, q router.Query) []attribute.KeyValue {
	attrs = append(attrs,
		attribute.String(KeyQueryFrom, in.HashEntity(q.From)),
		attribute.String(KeyQueryValue, in.HashEntity(q.Value)),
		attribute.String(KeyQueryTo, in.HashEntity(q.To)),
		in.ratio,
	)
	if q.Key != "" {
		attrs = append(attrs, attribute.String(KeyQueryKey, q.Key))
	}
	if in.hashed {
		attrs = append(attrs, attribute.String(KeyEntityHash, "hmac-sha256"))
	}
	return attrs
}

var attrPool = sync.Pool{New: func() any { s := make([]attribute.KeyValue, 0, 32); return &s }}

// decisionAttrs appends the span attributes of a decision (DESIGN.md §6)
// to attrs.
func (in *Instrumentation) decisionAttrs(attrs []attribute.KeyValue, q router.Query, d *router.Decision) []attribute.KeyValue {
	if in.compact {
		return in.compactAttrs(attrs, q, d)
	}
	attrs = in.queryAttrs(attrs, q)
	attrs = append(attrs,
		attribute.String(KeyRouteMode, d.Mode.String()),
		attribute.Float64(KeyRouteGain, d.Gain),
		attribute.String(KeyRouteReason, d.Reason.Code),
		attribute.Bool(KeyRouteTruncated, d.Truncated),
		attribute.Float64(KeyRoutePropensity, d.Propensity),
		attribute.Bool(KeyRouteExplored, d.Explored),
		attribute.Bool(KeyRouteCached, d.Cached),
		attribute.Float64(KeyDirectErr, d.Direct.Err),
		attribute.Int64(KeyDirectSupport, clampInt64(d.Direct.Support)),
		attribute.String(KeyIndexGeneration, in.genString(d.Generation)),
	)
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
	}
	if d.Arm != "" {
		attrs = append(attrs, attribute.String(KeyABArm, d.Arm))
	}
	return attrs
}

// compactAttrs is the WithCompactSpans set: what tuning and A/B analysis
// read, and nothing else.
func (in *Instrumentation) compactAttrs(attrs []attribute.KeyValue, q router.Query, d *router.Decision) []attribute.KeyValue {
	attrs = append(attrs,
		attribute.String(KeyRouteMode, d.Mode.String()),
		attribute.Float64(KeyRouteGain, d.Gain),
		attribute.String(KeyRouteReason, d.Reason.Code),
		attribute.Float64(KeyRoutePropensity, d.Propensity),
		attribute.Float64(KeyDirectErr, d.Direct.Err),
		in.ratio,
	)
	if q.Key != "" {
		attrs = append(attrs, attribute.String(KeyQueryKey, q.Key))
	}
	if d.Explored {
		attrs = append(attrs, attribute.Bool(KeyRouteExplored, true))
	}
	if d.Score != d.Gain {
		attrs = append(attrs, attribute.Float64(KeyRouteScore, d.Score))
	}
	if d.Chain != nil {
		attrs = append(attrs,
			attribute.Float64(KeyChainErr, d.Chain.Err),
			attribute.Int(KeyChainHops, len(d.Chain.Bridges)),
		)
	}
	if d.Arm != "" {
		attrs = append(attrs, attribute.String(KeyABArm, d.Arm))
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
func (in *Instrumentation) RecordOutcome(ctx context.Context, d router.Decision, o Outcome) error {
	if d.Key == "" {
		return ErrNoKey
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
	if in.tracer != nil {
		_, span = in.tracer.Start(ctx, SpanOutcome, in.startOp...)
	}
	if span != nil && span.IsRecording() {
		attrs := []attribute.KeyValue{
			attribute.String(KeyQueryKey, d.Key),
			attribute.Float64(KeyOutcomeScore, o.Score),
			attribute.Int64(KeyOutcomeInputTokens, o.InputTokens),
			attribute.Int64(KeyOutcomeOutputTokens, o.OutputTokens),
			attribute.Float64(KeyOutcomeLatencyMs, float64(o.Latency)/float64(time.Millisecond)),
			attribute.String(KeyRouteMode, d.Mode.String()),
			attribute.String(KeyIndexGeneration, in.genString(d.Generation)),
			in.ratio,
		}
		if d.Arm != "" {
			attrs = append(attrs, attribute.String(KeyABArm, d.Arm))
		}
		span.SetAttributes(attrs...)
	}
	if span != nil {
		span.End()
	}
	if !in.metricsOff && in.outcome.Enabled(ctx) {
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
