package gw

import (
	"context"
	"net/http"
	"time"

	"github.com/hopwise/hopwise/otelx"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"
	"go.opentelemetry.io/otel/attribute"
	otelprom "go.opentelemetry.io/otel/exporters/prometheus"
	"go.opentelemetry.io/otel/metric"
	sdkmetric "go.opentelemetry.io/otel/sdk/metric"
	"go.opentelemetry.io/otel/trace"
)

// ScopeName is the instrumentation scope of the gateway's own spans and
// metrics.
const ScopeName = "github.com/hopwise/hopwise/examples/gateway/gw"

// Metric names: the GenAI client metrics of the semantic conventions, and
// the gateway's route counter.
const (
	MetricOperationDuration = "gen_ai.client.operation.duration" // histogram, s
	MetricTokenUsage        = "gen_ai.client.token.usage"        // histogram, {token}
	MetricRoutes            = "hopwise.gateway.requests"         // counter, by route and reason
)

// instruments are the gateway's tracer and metric instruments.
type instruments struct {
	tracer   trace.Tracer
	provider string
	duration metric.Float64Histogram
	tokens   metric.Int64Histogram
	routes   metric.Int64Counter
}

func newInstruments(tp trace.TracerProvider, mp metric.MeterProvider, provider string) (*instruments, error) {
	m := mp.Meter(ScopeName)
	in := &instruments{tracer: tp.Tracer(ScopeName), provider: provider}
	var err error
	// Bucket boundaries as the GenAI metric conventions recommend.
	if in.duration, err = m.Float64Histogram(MetricOperationDuration, metric.WithUnit("s"),
		metric.WithDescription("Duration of the upstream model call as seen by the gateway"),
		metric.WithExplicitBucketBoundaries(0.01, 0.02, 0.04, 0.08, 0.16, 0.32, 0.64, 1.28, 2.56, 5.12, 10.24, 20.48, 40.96, 81.92)); err != nil {
		return nil, err
	}
	if in.tokens, err = m.Int64Histogram(MetricTokenUsage, metric.WithUnit("{token}"),
		metric.WithDescription("Input and output tokens the upstream reported"),
		metric.WithExplicitBucketBoundaries(1, 4, 16, 64, 256, 1024, 4096, 16384, 65536, 262144, 1048576, 4194304, 16777216, 67108864)); err != nil {
		return nil, err
	}
	if in.routes, err = m.Int64Counter(MetricRoutes, metric.WithUnit("{request}"),
		metric.WithDescription("Chat requests by route (chain, direct, pass) and reason")); err != nil {
		return nil, err
	}
	return in, nil
}

func (in *instruments) routed(ctx context.Context, rt route) {
	if in.routes.Enabled(ctx) {
		in.routes.Add(ctx, 1, metric.WithAttributes(attribute.String(KeyGatewayRoute, rt.mode), attribute.String(KeyGatewayReason, rt.reason)))
	}
}

// startCall starts the model-call span: kind client, named
// "chat {model}" as the GenAI span conventions say.
func (in *instruments) startCall(ctx context.Context, model string, rt route) (context.Context, trace.Span) {
	name := "chat"
	if model != "" {
		name += " " + model
	}
	ctx, span := in.tracer.Start(ctx, name, trace.WithSpanKind(trace.SpanKindClient))
	if span.IsRecording() {
		attrs := append(genAICallAttrs(model), attribute.String(KeyGatewayRoute, rt.mode), attribute.String(KeyGatewayReason, rt.reason))
		if in.provider != "" {
			attrs = append(attrs, attribute.String(KeyGenAIProvider, in.provider))
		}
		span.SetAttributes(attrs...)
	}
	return ctx, span
}

// endCall ends the model-call span with the response model and usage, and
// records the duration and token metrics.
func (in *instruments) endCall(ctx context.Context, span trace.Span, model string, u usage, errType string, el time.Duration) {
	if span.IsRecording() {
		if u.model != "" {
			span.SetAttributes(attribute.String(KeyGenAIRespModel, u.model))
		}
		if u.has {
			span.SetAttributes(attribute.Int64(KeyGenAIInputTokens, u.in), attribute.Int64(KeyGenAIOutputTokens, u.out))
		}
		if errType != "" {
			span.SetAttributes(attribute.String(KeyErrorType, errType))
		}
	}
	span.End()
	base := []attribute.KeyValue{attribute.String(KeyGenAIOperation, "chat"), attribute.String(KeyGenAIRequestModel, model)}
	if u.model != "" {
		base = append(base, attribute.String(KeyGenAIRespModel, u.model))
	}
	if in.duration.Enabled(ctx) {
		attrs := base
		if errType != "" {
			attrs = append(attrs[:len(attrs):len(attrs)], attribute.String(KeyErrorType, errType))
		}
		in.duration.Record(ctx, el.Seconds(), metric.WithAttributes(attrs...))
	}
	if u.has && in.tokens.Enabled(ctx) {
		in.tokens.Record(ctx, u.in, metric.WithAttributes(append(base[:len(base):len(base)], attribute.String(KeyGenAITokenType, "input"))...))
		in.tokens.Record(ctx, u.out, metric.WithAttributes(append(base[:len(base):len(base)], attribute.String(KeyGenAITokenType, "output"))...))
	}
}

// outcomeAttrs are the GenAI attributes of the model call that the
// outcome span of p carries beside its hopwise.outcome.* attributes: the
// operation, the request and response models, the provider when set, and
// the tokens of the outcome (what the caller reported, else what the
// upstream did).
func (in *instruments) outcomeAttrs(p pending, o otelx.Outcome) []attribute.KeyValue {
	attrs := append(genAICallAttrs(p.reqModel),
		attribute.Int64(KeyGenAIInputTokens, o.InputTokens), attribute.Int64(KeyGenAIOutputTokens, o.OutputTokens))
	if p.respModel != "" {
		attrs = append(attrs, attribute.String(KeyGenAIRespModel, p.respModel))
	}
	if in.provider != "" {
		attrs = append(attrs, attribute.String(KeyGenAIProvider, in.provider))
	}
	return attrs
}

// NewPrometheus returns a MeterProvider whose histograms and counters are
// served for scraping by the returned handler (Prometheus text format,
// through the OpenTelemetry Prometheus exporter on a registry of its own).
// Give the provider to otelx (WithMeterProvider) and to Config, and the
// handler to Config.Metrics.
func NewPrometheus() (*sdkmetric.MeterProvider, http.Handler, error) {
	reg := prometheus.NewRegistry()
	exp, err := otelprom.New(otelprom.WithRegisterer(reg))
	if err != nil {
		return nil, nil, err
	}
	mp := sdkmetric.NewMeterProvider(sdkmetric.WithReader(exp))
	return mp, promhttp.HandlerFor(reg, promhttp.HandlerOpts{}), nil
}
