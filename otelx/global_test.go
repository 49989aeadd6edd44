package otelx

import (
	"context"
	"os"
	"os/exec"
	"testing"

	"go.opentelemetry.io/otel"
	sdkmetric "go.opentelemetry.io/otel/sdk/metric"
	"go.opentelemetry.io/otel/sdk/metric/metricdata"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/sdk/trace/tracetest"

	"github.com/hopwise/hopwise/router"
)

// TestGlobalProviders: over the otel globals with no SDK installed, a
// decision records nothing; once an SDK is installed behind the globals,
// the same Instrumentation records spans and metrics, because the global
// tracer and meter forward to it. Installing a global provider cannot be
// undone, so the test runs in a child process of its own.
func TestGlobalProviders(t *testing.T) {
	if !*globalChild {
		t.Parallel()
		cmd := exec.Command(os.Args[0], "-test.run=^TestGlobalProviders$", "-test.v", "-global-child")
		out, err := cmd.CombinedOutput()
		if err != nil {
			t.Fatalf("child: %v\n%s", err, out)
		}
		return
	}
	ctx := context.Background()
	in, err := New()
	if err != nil {
		t.Fatal(err)
	}
	if in.off {
		t.Fatal("the otel global providers were taken for noop ones")
	}
	r := newRouter(t, router.WithCacheSize(16))
	q := router.Query{From: "vent-north", Value: "open", To: "bed-tomato", Key: "u"}
	if _, err := in.Decide(ctx, r, q); err != nil { // fills the cache
		t.Fatal(err)
	}

	rec := tracetest.NewSpanRecorder()
	otel.SetTracerProvider(sdktrace.NewTracerProvider(sdktrace.WithSpanProcessor(rec)))
	reader := sdkmetric.NewManualReader()
	otel.SetMeterProvider(sdkmetric.NewMeterProvider(sdkmetric.WithReader(reader)))
	for range 2 {
		if _, err := in.Decide(ctx, r, q); err != nil {
			t.Fatal(err)
		}
	}
	if n := len(rec.Ended()); n != 2 {
		t.Errorf("%d spans after installing an SDK, want 2", n)
	}
	var rm metricdata.ResourceMetrics
	if err := reader.Collect(ctx, &rm); err != nil {
		t.Fatal(err)
	}
	var decisions int64
	for _, sm := range rm.ScopeMetrics {
		for _, m := range sm.Metrics {
			if h, ok := m.Data.(metricdata.Histogram[float64]); ok && m.Name == MetricDecisionLatency {
				for _, dp := range h.DataPoints {
					decisions += int64(dp.Count)
				}
			}
		}
	}
	if decisions != 2 {
		t.Errorf("%d decisions counted after installing an SDK, want 2", decisions)
	}
}
