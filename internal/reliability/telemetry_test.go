package reliability

import (
	"context"
	"math/rand/v2"
	"os"
	"sync/atomic"
	"testing"
	"time"

	"go.opentelemetry.io/otel"
	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/exporters/otlp/otlptrace/otlptracehttp"
	sdkmetric "go.opentelemetry.io/otel/sdk/metric"
	"go.opentelemetry.io/otel/sdk/metric/metricdata"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
)

// discardExporter is a healthy exporter that drops nothing and costs
// nothing: the baseline of an instrumented Decide.
type discardExporter struct{ spans atomic.Int64 }

func (d *discardExporter) ExportSpans(_ context.Context, s []sdktrace.ReadOnlySpan) error {
	d.spans.Add(int64(len(s)))
	return nil
}
func (d *discardExporter) Shutdown(context.Context) error { return nil }

// stalledExporter takes 40 ms per export: with a small blocking queue it
// stalls the callers, which the control arm uses to show the latency check
// detects a blocking telemetry path.
type stalledExporter struct{}

func (stalledExporter) ExportSpans(ctx context.Context, _ []sdktrace.ReadOnlySpan) error {
	select {
	case <-time.After(40 * time.Millisecond):
	case <-ctx.Done():
	}
	return nil
}
func (stalledExporter) Shutdown(context.Context) error { return nil }

// telemetryArm is one way of running Decide.
type telemetryArm struct {
	name   string
	decide func(context.Context, router.Query) (router.Decision, error)
	tp     *sdktrace.TracerProvider
	lat    []time.Duration
	rounds int // 0: every round
}

// TestTelemetryFailureNeverBlocksDecide: an OTLP/HTTP exporter pointed at
// an unreachable loopback port (127.0.0.1:1, default retry policy, default
// non-blocking batch queue) and the OTLP JSON file exporter writing to a
// full disk (/dev/full: every write fails with ENOSPC; blocking batch queue,
// as recommended for tuning traces) never block or slow otelx's Decide
// beyond its budget: p99 stays within 3× the p99 with a healthy exporter
// (+5 ms for scheduling noise) and no call takes a second. The arms are
// interleaved in rounds so machine load hits them alike. A control arm (an
// exporter stalled 40 ms per batch behind a 4-span blocking queue) must
// fail the same check, which shows the check detects a blocking path.
//
// Drops must be visible: with the SDK's self-observability switched on
// (OTEL_GO_X_OBSERVABILITY=true, experimental in otel-go 1.47) the batch
// processor counts spans dropped on a full queue in
// otel.sdk.processor.span.processed{error.type=queue_full}, which this test
// requires for the unreachable endpoint; failed exports of the file
// exporter reach otel's error handler and, through otelx.NewDropCounter,
// the hopwise.trace.spans.dropped counter; this test requires both.
//
// Not parallel: it sets an environment variable and the otel globals.
func TestTelemetryFailureNeverBlocksDecide(t *testing.T) {
	t.Setenv("OTEL_GO_X_OBSERVABILITY", "true")
	reader := sdkmetric.NewManualReader()
	mp := sdkmetric.NewMeterProvider(sdkmetric.WithReader(reader))
	prevMP := otel.GetMeterProvider()
	otel.SetMeterProvider(mp)
	defer otel.SetMeterProvider(prevMP)
	var handled atomic.Int64
	var lastErr atomic.Value
	prevEH := otel.GetErrorHandler()
	otel.SetErrorHandler(otel.ErrorHandlerFunc(func(err error) {
		handled.Add(1)
		lastErr.Store(err.Error())
	}))
	defer otel.SetErrorHandler(prevEH)

	ix, err := graphidx.Open(writeIndex(t, t.TempDir(), "t.hwx", GridSource(400, 3, 21)))
	if err != nil {
		t.Fatal(err)
	}
	r, err := router.New(ix, router.WithCacheSize(0))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	ctx := context.Background()

	instrumented := func(name string, tp *sdktrace.TracerProvider) *telemetryArm {
		in, err := otelx.New(otelx.WithTracerProvider(tp), otelx.WithMeterProvider(mp))
		if err != nil {
			t.Fatal(err)
		}
		return &telemetryArm{name: name, tp: tp, decide: func(ctx context.Context, q router.Query) (router.Decision, error) {
			return in.Decide(ctx, r, q)
		}}
	}
	const batchTimeout = 5 * time.Millisecond
	healthy := &discardExporter{}
	arms := []*telemetryArm{
		{name: "bare", decide: r.Decide},
		instrumented("healthy", sdktrace.NewTracerProvider(sdktrace.WithBatcher(healthy, sdktrace.WithBatchTimeout(batchTimeout)))),
	}
	httpExp, err := otlptracehttp.New(ctx, otlptracehttp.WithEndpoint("127.0.0.1:1"), otlptracehttp.WithInsecure())
	if err != nil {
		t.Fatal(err)
	}
	unreachable := instrumented("unreachable-otlp-http", sdktrace.NewTracerProvider(
		sdktrace.WithBatcher(httpExp, sdktrace.WithBatchTimeout(batchTimeout), sdktrace.WithMaxQueueSize(256))))
	arms = append(arms, unreachable)
	var fullDisk *telemetryArm
	if _, err := os.Stat("/dev/full"); err == nil {
		rawFile, err := otlpfile.NewExporter(ctx, "/dev/full")
		if err != nil {
			t.Fatal(err)
		}
		fileExp, err := otelx.NewDropCounter(rawFile, otelx.WithMeterProvider(mp))
		if err != nil {
			t.Fatal(err)
		}
		fullDisk = instrumented("full-disk-otlp-file", sdktrace.NewTracerProvider(
			sdktrace.WithBatcher(fileExp, sdktrace.WithBatchTimeout(batchTimeout), sdktrace.WithBlocking())))
		arms = append(arms, fullDisk)
	} else {
		t.Logf("no /dev/full: full-disk arm skipped")
	}

	// Control: a stalled exporter behind a 4-span blocking queue must be
	// caught by the same check, or the check proves nothing.
	control := instrumented("control-stalled", sdktrace.NewTracerProvider(
		sdktrace.WithBatcher(stalledExporter{}, sdktrace.WithBatchTimeout(batchTimeout),
			sdktrace.WithMaxQueueSize(4), sdktrace.WithMaxExportBatchSize(4), sdktrace.WithBlocking())))
	control.rounds = 1
	arms = append(arms, control)

	rounds, per := 20, 100
	if stress() {
		rounds = 200
	}
	rng := rand.New(rand.NewPCG(5, 6))
	for round := range rounds {
		for _, a := range arms {
			if a.rounds > 0 && round >= a.rounds {
				continue
			}
			for range per {
				i, j := rng.IntN(400), rng.IntN(400)
				if i == j {
					j = (j + 1) % 400
				}
				q := router.Query{From: GridName(i), Value: twoValues[rng.IntN(2)], To: GridName(j)}
				start := time.Now()
				_, err := a.decide(ctx, q)
				a.lat = append(a.lat, time.Since(start))
				if err != nil {
					t.Fatalf("%s: %v", a.name, err)
				}
			}
		}
	}
	// Shut the providers down with a bound: a stuck exporter must not
	// hold the gateway's shutdown either.
	for _, a := range arms {
		if a.tp == nil {
			continue
		}
		sctx, cancel := context.WithTimeout(ctx, 2*time.Second)
		start := time.Now()
		err := a.tp.Shutdown(sctx)
		cancel()
		if el := time.Since(start); el > 3*time.Second {
			t.Errorf("%s: Shutdown took %v", a.name, el)
		}
		if a == arms[1] && err != nil {
			t.Errorf("healthy shutdown: %v", err)
		}
	}

	p99 := map[string]time.Duration{}
	for _, a := range arms {
		p50 := percentile(a.lat, 0.5)
		p99[a.name] = percentile(a.lat, 0.99)
		t.Logf("%-22s %5d decisions: p50 %8v  p99 %8v  max %8v", a.name, len(a.lat), p50, p99[a.name], percentile(a.lat, 1))
	}
	budget := 3*p99["healthy"] + 5*time.Millisecond
	if p99[control.name] <= budget {
		t.Errorf("control: a stalled blocking exporter gave p99 %v within the budget %v: the check cannot detect blocking", p99[control.name], budget)
	}
	for _, a := range arms[2:] {
		if a == control {
			continue
		}
		if p99[a.name] > budget {
			t.Errorf("%s: p99 %v exceeds 3 × healthy p99 + 5 ms = %v", a.name, p99[a.name], budget)
		}
		if mx := percentile(a.lat, 1); mx > time.Second {
			t.Errorf("%s: a Decide took %v: telemetry blocked it", a.name, mx)
		}
	}
	if healthy.spans.Load() == 0 {
		t.Errorf("healthy exporter received no spans: the arms are not tracing")
	}

	// Drops are counted.
	var rm metricdata.ResourceMetrics
	if err := reader.Collect(ctx, &rm); err != nil {
		t.Fatal(err)
	}
	queueFull := sumCounter(rm, "otel.sdk.processor.span.processed", attribute.String("error.type", "queue_full"))
	exportErr := sumCounterWithKey(rm, "otel.sdk.exporter.span.exported", "error.type")
	t.Logf("dropped spans counted: queue_full %d, exporter errors %d; otel error handler calls %d (last: %v)",
		queueFull, exportErr, handled.Load(), lastErr.Load())
	if queueFull+exportErr == 0 {
		t.Errorf("the unreachable endpoint dropped spans but no metric counts them")
	}
	fileDropped := sumCounterWithKey(rm, otelx.MetricSpansDropped, "")
	t.Logf("full-disk file exporter: %s = %d", otelx.MetricSpansDropped, fileDropped)
	if fullDisk != nil && (handled.Load() == 0 || fileDropped == 0) {
		t.Errorf("full-disk export failures: %d error-handler calls, %s = %d; want both > 0",
			handled.Load(), otelx.MetricSpansDropped, fileDropped)
	}
}

// sumCounter sums the int64 sum data points of the named metric that carry
// the attribute kv.
func sumCounter(rm metricdata.ResourceMetrics, name string, kv attribute.KeyValue) int64 {
	return sumPoints(rm, name, func(a attribute.Set) bool {
		v, ok := a.Value(kv.Key)
		return ok && v == kv.Value
	})
}

// sumCounterWithKey sums the data points of the named metric that carry the
// attribute key (any value; every point when key is "").
func sumCounterWithKey(rm metricdata.ResourceMetrics, name string, key attribute.Key) int64 {
	return sumPoints(rm, name, func(a attribute.Set) bool { return key == "" || a.HasValue(key) })
}

// sumPoints sums the int64 sum data points of the named metric whose
// attributes match.
func sumPoints(rm metricdata.ResourceMetrics, name string, match func(attribute.Set) bool) int64 {
	var n int64
	for _, sm := range rm.ScopeMetrics {
		for _, m := range sm.Metrics {
			if m.Name != name {
				continue
			}
			if s, ok := m.Data.(metricdata.Sum[int64]); ok {
				for _, dp := range s.DataPoints {
					if match(dp.Attributes) {
						n += dp.Value
					}
				}
			}
		}
	}
	return n
}
