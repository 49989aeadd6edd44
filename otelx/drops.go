package otelx

import (
	"context"
	"fmt"

	"go.opentelemetry.io/otel"
	"go.opentelemetry.io/otel/metric"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
)

// MetricSpansDropped counts the spans a wrapped exporter failed to deliver
// (NewDropCounter): a counter in spans.
const MetricSpansDropped = "hopwise.trace.spans.dropped"

// dropCounter is a span exporter that counts the spans of failed exports.
type dropCounter struct {
	exp     sdktrace.SpanExporter
	dropped metric.Int64Counter
}

// NewDropCounter wraps a span exporter so that every span of a failed
// ExportSpans call (a full disk under an OTLP file, an unreachable or
// refusing collector once its retries give up) is added to the
// MetricSpansDropped counter of the meter provider set by
// WithMeterProvider (default: the otel global). The error is still returned
// to the span processor, which reports it to otel's error handler; the
// wrapper adds no latency beyond one counter update per failed batch.
// Only WithMeterProvider is used from opts.
//
// Spans a batch span processor drops before export (its queue full) never
// reach the exporter; the OpenTelemetry SDK counts those itself when its
// self-observability is on (see docs/GUARANTEES.md).
func NewDropCounter(exp sdktrace.SpanExporter, opts ...Option) (sdktrace.SpanExporter, error) {
	if exp == nil {
		return nil, fmt.Errorf("%w: NewDropCounter: nil exporter", ErrBadOption)
	}
	var cfg config
	for _, o := range opts {
		if o != nil {
			o.apply(&cfg)
		}
	}
	if cfg.mp == nil {
		cfg.mp = otel.GetMeterProvider()
	}
	c, err := cfg.mp.Meter(ScopeName, metric.WithInstrumentationVersion(Version)).Int64Counter(MetricSpansDropped,
		metric.WithUnit("{span}"), metric.WithDescription("Spans an exporter failed to deliver."))
	if err != nil {
		return nil, err
	}
	return &dropCounter{exp: exp, dropped: c}, nil
}

// ExportSpans exports spans and counts them as dropped when it fails.
func (d *dropCounter) ExportSpans(ctx context.Context, spans []sdktrace.ReadOnlySpan) error {
	err := d.exp.ExportSpans(ctx, spans)
	if err != nil && len(spans) > 0 && d.dropped.Enabled(ctx) {
		d.dropped.Add(context.WithoutCancel(ctx), int64(len(spans)))
	}
	return err
}

// Shutdown shuts the wrapped exporter down.
func (d *dropCounter) Shutdown(ctx context.Context) error { return d.exp.Shutdown(ctx) }
