package otelx

import (
	"context"
	"errors"
	"syscall"
	"testing"

	sdkmetric "go.opentelemetry.io/otel/sdk/metric"
	"go.opentelemetry.io/otel/sdk/metric/metricdata"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/sdk/trace/tracetest"
)

// failingExporter fails every export with ENOSPC, as a file on a full disk.
type failingExporter struct{ fail bool }

func (f *failingExporter) ExportSpans(context.Context, []sdktrace.ReadOnlySpan) error {
	if f.fail {
		return syscall.ENOSPC
	}
	return nil
}
func (f *failingExporter) Shutdown(context.Context) error { return nil }

// droppedTotal reads MetricSpansDropped from the reader (0 when absent).
func droppedTotal(t *testing.T, r *sdkmetric.ManualReader) int64 {
	t.Helper()
	var rm metricdata.ResourceMetrics
	if err := r.Collect(context.Background(), &rm); err != nil {
		t.Fatal(err)
	}
	var n int64
	for _, sm := range rm.ScopeMetrics {
		for _, m := range sm.Metrics {
			if m.Name == MetricSpansDropped {
				for _, dp := range m.Data.(metricdata.Sum[int64]).DataPoints {
					n += dp.Value
				}
			}
		}
	}
	return n
}

// TestDropCounter: every span of a failed export is counted, the error is
// passed through unchanged, and successful exports count nothing.
func TestDropCounter(t *testing.T) {
	t.Parallel()
	if _, err := NewDropCounter(nil); !errors.Is(err, ErrBadOption) {
		t.Fatalf("nil exporter: %v", err)
	}
	reader := sdkmetric.NewManualReader()
	mp := sdkmetric.NewMeterProvider(sdkmetric.WithReader(reader))
	inner := &failingExporter{}
	exp, err := NewDropCounter(inner, WithMeterProvider(mp))
	if err != nil {
		t.Fatal(err)
	}
	spans := tracetest.SpanStubs{{Name: "a"}, {Name: "b"}, {Name: "c"}}.Snapshots()
	ctx := context.Background()
	if err := exp.ExportSpans(ctx, spans); err != nil {
		t.Fatal(err)
	}
	if n := droppedTotal(t, reader); n != 0 {
		t.Fatalf("healthy export counted %d drops", n)
	}
	inner.fail = true
	for range 2 {
		if err := exp.ExportSpans(ctx, spans); !errors.Is(err, syscall.ENOSPC) {
			t.Fatalf("error not passed through: %v", err)
		}
	}
	if n := droppedTotal(t, reader); n != 6 {
		t.Fatalf("dropped = %d, want 6 (two failed batches of 3)", n)
	}
	if err := exp.Shutdown(ctx); err != nil {
		t.Fatal(err)
	}
}
