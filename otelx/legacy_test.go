package otelx

// The decision path as of commit 9e1f98c (before the overhead work), kept
// so that TestOverhead can time "before" and "after" in the same run, paired
// round by round. It shares the metric sets and helpers of the current
// Instrumentation; what differs is what the old code did per decision: a
// span through any non-noop tracer (the otel globals included), the span
// kind option, every flag and the sampling ratio always recorded, the
// compact set with both errors.

import (
	"context"
	"testing"
	"time"

	"go.opentelemetry.io/otel"
	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/codes"
	"go.opentelemetry.io/otel/metric"
	"go.opentelemetry.io/otel/trace"

	"github.com/hopwise/hopwise/router"
)

var legacyStartOp = []trace.SpanStartOption{trace.WithSpanKind(trace.SpanKindInternal)}

// legacy adds the old metric state: a separate cache counter, and
// (mode, arm) sets without the cache result.
type legacy struct {
	*Instrumentation
	decisions metric.Int64Counter
	cache     metric.Int64Counter
	hitOpts   []metric.AddOption
	missOpts  []metric.AddOption
	sets      [3][len(knownArms)]legacyOpts
}

type legacyOpts struct {
	add []metric.AddOption
	rec []metric.RecordOption
}

// legacyDecide returns the old Decide over in, whose meter provider is mp
// (nil for the otel global).
func legacyDecide(tb testing.TB, in *Instrumentation, mp metric.MeterProvider) func(ctx context.Context, r *router.Router, q router.Query) (router.Decision, error) {
	if mp == nil {
		mp = otel.GetMeterProvider()
	}
	l := &legacy{Instrumentation: in}
	meter := mp.Meter(ScopeName+"/legacy", metric.WithInstrumentationVersion(Version))
	var err, err2 error
	l.decisions, err = meter.Int64Counter("hopwise.decisions", metric.WithUnit("{decision}"),
		metric.WithDescription("Routing decisions by mode and A/B arm."))
	l.cache, err2 = meter.Int64Counter("hopwise.decision.cache", metric.WithUnit("{decision}"),
		metric.WithDescription("Decision cache hits and misses."))
	if err != nil || err2 != nil {
		tb.Fatal(err, err2)
	}
	l.hitOpts = []metric.AddOption{metric.WithAttributeSet(attribute.NewSet(attribute.String(KeyCacheResult, "hit")))}
	l.missOpts = []metric.AddOption{metric.WithAttributeSet(attribute.NewSet(attribute.String(KeyCacheResult, "miss")))}
	for m := range l.sets {
		for a, arm := range knownArms {
			set := attribute.NewSet(attribute.String(KeyRouteMode, modeNames[m]))
			if arm != "" {
				set = attribute.NewSet(attribute.String(KeyRouteMode, modeNames[m]), attribute.String(KeyABArm, arm))
			}
			o := metric.WithAttributeSet(set)
			l.sets[m][a] = legacyOpts{add: []metric.AddOption{o}, rec: []metric.RecordOption{o}}
		}
	}
	return func(ctx context.Context, r *router.Router, q router.Query) (router.Decision, error) {
		if in.off {
			return r.Decide(ctx, q)
		}
		return l.legacyDecide(ctx, r, q)
	}
}

// set is the old lookup (known arms only; the benchmark has no others).
func (in *legacy) set(mode int, arm string) *legacyOpts {
	for a, k := range knownArms {
		if k == arm {
			return &in.sets[mode][a]
		}
	}
	panic("legacy: unknown arm " + arm)
}

func (in *legacy) legacyDecide(ctx context.Context, r *router.Router, q router.Query) (router.Decision, error) {
	var span trace.Span
	recording := false
	if in.tracer != nil {
		ctx, span = in.tracer.Start(ctx, SpanDecide, legacyStartOp...)
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
			span.SetAttributes(in.legacyQueryAttrs(nil, q)...)
		} else {
			bp := attrPool.Get().(*[]attribute.KeyValue)
			attrs := in.legacyDecisionAttrs((*bp)[:0], q, &d)
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

func (in *legacy) legacyQueryAttrs(attrs []attribute.KeyValue, q router.Query) []attribute.KeyValue {
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

// decisionAttrs appends the span attributes of a decision (DESIGN.md §6)
// to attrs.
func (in *legacy) legacyDecisionAttrs(attrs []attribute.KeyValue, q router.Query, d *router.Decision) []attribute.KeyValue {
	if in.compact {
		return in.legacyCompactAttrs(attrs, q, d)
	}
	attrs = in.legacyQueryAttrs(attrs, q)
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
func (in *legacy) legacyCompactAttrs(attrs []attribute.KeyValue, q router.Query, d *router.Decision) []attribute.KeyValue {
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
