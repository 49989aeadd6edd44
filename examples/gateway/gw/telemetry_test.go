package gw_test

import (
	"context"
	"io"
	"net/http"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/otelx"
	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/trace"
)

func attrs(kvs []attribute.KeyValue) map[string]attribute.Value {
	m := map[string]attribute.Value{}
	for _, kv := range kvs {
		m[string(kv.Key)] = kv.Value
	}
	return m
}

// TestGenAISpans checks the OpenTelemetry GenAI semantic-convention
// attributes on the model-call span and on the outcome span, and that the
// decision span keeps its hopwise.* attributes. Names as in the GenAI
// semantic conventions (opentelemetry.io/docs/specs/semconv/gen-ai/gen-ai-spans).
func TestGenAISpans(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{ProviderName: "greenhouse-sim-provider"}, nil)
	if code, b, _ := post(t, r.url+"/v1/chat/completions", chatBody(farQuestion), gw.HeaderUnit, "span-1"); code != 200 {
		t.Fatalf("%d %s", code, b)
	}
	if code, b, _ := post(t, r.url+"/v1/outcomes", `{"unit":"span-1","score":1}`); code != 200 {
		t.Fatalf("%d %s", code, b)
	}
	var call, outcome, decide map[string]attribute.Value
	for _, s := range r.endedSpans(t, "chat greenhouse-sim", otelx.SpanOutcome, otelx.SpanDecide) {
		switch s.Name {
		case "chat greenhouse-sim":
			if s.SpanKind != trace.SpanKindClient {
				t.Errorf("model-call span kind %v, want client", s.SpanKind)
			}
			call = attrs(s.Attributes)
		case otelx.SpanOutcome:
			outcome = attrs(s.Attributes)
		case otelx.SpanDecide:
			decide = attrs(s.Attributes)
		}
	}
	if call == nil || outcome == nil || decide == nil {
		t.Fatalf("spans: call %v, outcome %v, decide %v", call != nil, outcome != nil, decide != nil)
	}
	for name, a := range map[string]map[string]attribute.Value{"model call": call, "outcome": outcome} {
		if a[gw.KeyGenAIOperation].AsString() != "chat" || a[gw.KeyGenAIRequestModel].AsString() != "greenhouse-sim" ||
			a[gw.KeyGenAIRespModel].AsString() != "greenhouse-sim" {
			t.Errorf("%s span: operation %q, request model %q, response model %q", name,
				a[gw.KeyGenAIOperation].AsString(), a[gw.KeyGenAIRequestModel].AsString(), a[gw.KeyGenAIRespModel].AsString())
		}
		if a[gw.KeyGenAIInputTokens].AsInt64() <= 0 || a[gw.KeyGenAIOutputTokens].AsInt64() <= 0 {
			t.Errorf("%s span: usage %v/%v", name, a[gw.KeyGenAIInputTokens], a[gw.KeyGenAIOutputTokens])
		}
	}
	if call[gw.KeyGenAIInputTokens] != outcome[gw.KeyGenAIInputTokens] || outcome[otelx.KeyOutcomeInputTokens].AsInt64() != call[gw.KeyGenAIInputTokens].AsInt64() {
		t.Errorf("outcome tokens %v / %v differ from the call's %v", outcome[gw.KeyGenAIInputTokens], outcome[otelx.KeyOutcomeInputTokens], call[gw.KeyGenAIInputTokens])
	}
	if outcome[gw.KeyGenAIProvider].AsString() != "greenhouse-sim-provider" {
		t.Errorf("outcome span: provider %q", outcome[gw.KeyGenAIProvider].AsString())
	}
	if call[gw.KeyGenAIProvider].AsString() != "greenhouse-sim-provider" || call[gw.KeyGatewayRoute].AsString() != "chain" {
		t.Errorf("call span: provider %q route %q", call[gw.KeyGenAIProvider].AsString(), call[gw.KeyGatewayRoute].AsString())
	}
	if decide[otelx.KeyRouteMode].AsString() != "chain" || decide[otelx.KeyQueryKey].AsString() != "span-1" || decide[otelx.KeyRouteCached].AsBool() {
		t.Errorf("decision span lost its hopwise attributes: %v", decide)
	}
	if _, ok := decide[gw.KeyGenAIOperation]; ok {
		t.Error("decision span carries GenAI attributes")
	}
}

// TestMetricsEndpoint scrapes GET /metrics after a request: the GenAI
// client histograms, the route counter and otelx's decision histogram are
// there.
func TestMetricsEndpoint(t *testing.T) {
	t.Parallel()
	mp, h, err := gw.NewPrometheus()
	if err != nil {
		t.Fatal(err)
	}
	defer mp.Shutdown(context.Background())
	r := newRig(t, gw.Config{MeterProvider: mp, Metrics: h}, nil, otelx.WithMeterProvider(mp))
	post(t, r.url+"/v1/chat/completions", chatBody(farQuestion))
	post(t, r.url+"/v1/chat/completions", chatBody(plainQuestion))
	resp, err := http.Get(r.url + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	b, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	text := string(b)
	for _, want := range []string{"gen_ai_client_operation_duration_seconds_bucket", "gen_ai_client_token_usage_bucket",
		`hopwise_gateway_requests_total{hopwise_gateway_reason="no-mention",hopwise_gateway_route="pass"`, "hopwise_decision_"} {
		if !strings.Contains(text, want) {
			t.Errorf("/metrics lacks %s", want)
		}
	}
	if t.Failed() {
		t.Logf("%s", text)
	}
}
