package gw_test

import (
	"bytes"
	"net/http"
	"net/http/httptest"
	"runtime"
	"testing"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/internal/cpuclock"
	"github.com/hopwise/hopwise/otelx"
	"go.opentelemetry.io/otel/metric/noop"
	tnoop "go.opentelemetry.io/otel/trace/noop"
)

// BenchmarkChat measures one chat request through the gateway's handler,
// routing on and off (the baseline, same run), against an upstream that
// answers a fixed completion at once: the difference is what linking,
// deciding and rewriting the body cost. The same body repeats, so
// decisions come from the router's cache. cpu-ns/op is the benchmark
// thread's CPU time per request (Linux), added-cpu-ns/op its excess over
// routing off: the upstream's and the transport's goroutines run on other
// threads and are not counted.
func BenchmarkChat(b *testing.B) {
	var baseCPU float64
	reply := []byte(`{"id":"x","object":"chat.completion","model":"m","choices":[{"index":0,"message":{"role":"assistant","content":"Answer: firm"},"finish_reason":"stop"}],"usage":{"prompt_tokens":50,"completion_tokens":5,"total_tokens":55}}`)
	up := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, _ *http.Request) {
		w.Header().Set("Content-Type", "application/json")
		w.Write(reply)
	}))
	defer up.Close()
	for _, tc := range []struct {
		name string
		off  bool
		q    string
	}{{"off", true, farQuestion}, {"on-far", false, farQuestion}, {"on-near", false, nearQuestion}, {"on-pass", false, plainQuestion}} {
		b.Run(tc.name, func(b *testing.B) {
			s := benchServer(b, up.URL, tc.off)
			h := s.Handler()
			body := []byte(chatBody(tc.q))
			b.ReportAllocs()
			var code int
			cpu := startThreadCPU()
			for b.Loop() {
				req := httptest.NewRequest(http.MethodPost, "/v1/chat/completions", bytes.NewReader(body))
				req.Header.Set(gw.HeaderUnit, "bench")
				w := httptest.NewRecorder()
				h.ServeHTTP(w, req)
				code = w.Code
			}
			cpu.report(b, &baseCPU, tc.off)
			if code != 200 {
				b.Fatalf("status %d", code)
			}
		})
	}
}

// BenchmarkPrepare measures the gateway's own work on a chat request up to
// the upstream call (parsing, linking, deciding, rendering, inserting the
// system message), routing off first as the baseline of the same run, then
// routing on for a chain, a direct and a pass-through question. The same
// body repeats, so decisions come from the router's cache: added-ns/op is
// what routing adds to a cached decision's request (wall time), and
// added-cpu-ns/op the same in thread CPU (Linux).
func BenchmarkPrepare(b *testing.B) {
	up := httptest.NewServer(http.NotFoundHandler())
	defer up.Close()
	var baseNs, baseCPU float64
	for _, tc := range []struct {
		name, route string
		off         bool
		q           string
	}{{"off", "pass", true, farQuestion}, {"on-chain", "chain", false, farQuestion}, {"on-direct", "direct", false, nearQuestion}, {"on-pass", "pass", false, plainQuestion}} {
		b.Run(tc.name, func(b *testing.B) {
			s := benchServer(b, up.URL, tc.off)
			body := []byte(chatBody(tc.q))
			var out []byte
			var route string
			b.ReportAllocs()
			var err error
			cpu := startThreadCPU()
			for b.Loop() {
				if out, route, err = s.Prepare(body, "bench"); err != nil {
					b.Fatal(err)
				}
			}
			cpu.report(b, &baseCPU, tc.off)
			if route != tc.route || (route == "pass") != bytes.Equal(out, body) {
				b.Fatalf("route %q (want %q), body changed %v", route, tc.route, !bytes.Equal(out, body))
			}
			ns := float64(b.Elapsed().Nanoseconds()) / float64(b.N)
			if tc.off {
				baseNs = ns
			} else if baseNs > 0 {
				b.ReportMetric(ns-baseNs, "added-ns/op")
			}
		})
	}
}

// threadClock measures a benchmark loop's thread CPU: the benchmark
// goroutine is locked to its OS thread from startThreadCPU to report.
type threadClock struct {
	t0 time.Duration
	ok bool
}

func startThreadCPU() threadClock {
	runtime.LockOSThread()
	t0, ok := cpuclock.Thread()
	return threadClock{t0, ok}
}

// report unlocks the thread and reports cpu-ns/op, and added-cpu-ns/op
// against *base (set by the baseline, which runs first).
func (c threadClock) report(b *testing.B, base *float64, baseline bool) {
	t1, ok := cpuclock.Thread()
	runtime.UnlockOSThread()
	if !c.ok || !ok {
		return
	}
	ns := float64(t1-c.t0) / float64(b.N)
	b.ReportMetric(ns, "cpu-ns/op")
	if baseline {
		*base = ns
	} else if *base > 0 {
		b.ReportMetric(ns-*base, "added-cpu-ns/op")
	}
}

// benchServer is a gateway with telemetry off (noop providers) in front of
// upstream, closed with the benchmark.
func benchServer(b *testing.B, upstream string, routingOff bool) *gw.Server {
	tel, err := otelx.New(otelx.WithTracerProvider(tnoop.NewTracerProvider()), otelx.WithMeterProvider(noop.NewMeterProvider()))
	if err != nil {
		b.Fatal(err)
	}
	s, err := gw.New(gw.Config{IndexPath: sharedIndex(b), Upstream: upstream + "/v1", RoutingOff: routingOff, Telemetry: tel,
		TracerProvider: tnoop.NewTracerProvider(), MeterProvider: noop.NewMeterProvider()})
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { s.Close() })
	return s
}
