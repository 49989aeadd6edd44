package gw_test

import (
	"bytes"
	"net/http"
	"net/http/httptest"
	"testing"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/otelx"
	"go.opentelemetry.io/otel/metric/noop"
	tnoop "go.opentelemetry.io/otel/trace/noop"
)

// BenchmarkChat measures one chat request through the gateway's handler,
// routing on and off (the baseline, same run), against an upstream that
// answers a fixed completion at once: the difference is what linking,
// deciding and rewriting the body cost.
func BenchmarkChat(b *testing.B) {
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
			tel, _ := otelx.New(otelx.WithTracerProvider(tnoop.NewTracerProvider()), otelx.WithMeterProvider(noop.NewMeterProvider()))
			s, err := gw.New(gw.Config{IndexPath: sharedIndex(b), Upstream: up.URL + "/v1", RoutingOff: tc.off, Telemetry: tel,
				TracerProvider: tnoop.NewTracerProvider(), MeterProvider: noop.NewMeterProvider()})
			if err != nil {
				b.Fatal(err)
			}
			defer s.Close()
			h := s.Handler()
			body := []byte(chatBody(tc.q))
			b.ReportAllocs()
			var code int
			for b.Loop() {
				req := httptest.NewRequest(http.MethodPost, "/v1/chat/completions", bytes.NewReader(body))
				req.Header.Set(gw.HeaderUnit, "bench")
				w := httptest.NewRecorder()
				h.ServeHTTP(w, req)
				code = w.Code
			}
			if code != 200 {
				b.Fatalf("status %d", code)
			}
		})
	}
}
