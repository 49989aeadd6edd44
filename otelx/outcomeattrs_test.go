package otelx

import (
	"context"
	"errors"
	"testing"

	"go.opentelemetry.io/otel/attribute"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/sdk/trace/tracetest"

	"github.com/hopwise/hopwise/router"
)

// WithOutcomeAttributes puts the caller's attributes on the outcome span
// beside the hopwise.* ones, and refuses keys otelx owns (the readers of
// tune and ab would read the caller's value).
func TestOutcomeAttributes(t *testing.T) {
	t.Parallel()
	genAI := []attribute.KeyValue{
		attribute.String("gen_ai.operation.name", "chat"),
		attribute.String("gen_ai.request.model", "greenhouse-sim"),
		attribute.Int64("gen_ai.usage.input_tokens", 96),
	}
	for _, tc := range []struct {
		name    string
		opts    []OutcomeOption
		want    map[attribute.Key]attribute.Value // extra attributes on the span
		wantErr bool
	}{
		{name: "none", want: map[attribute.Key]attribute.Value{}},
		{name: "genai", opts: []OutcomeOption{WithOutcomeAttributes(genAI...)},
			want: map[attribute.Key]attribute.Value{genAI[0].Key: genAI[0].Value, genAI[1].Key: genAI[1].Value, genAI[2].Key: genAI[2].Value}},
		{name: "two options add up, nil skipped", opts: []OutcomeOption{WithOutcomeAttributes(genAI[0]), nil, WithOutcomeAttributes(genAI[1])},
			want: map[attribute.Key]attribute.Value{genAI[0].Key: genAI[0].Value, genAI[1].Key: genAI[1].Value}},
		{name: "reserved score", opts: []OutcomeOption{WithOutcomeAttributes(attribute.Float64(KeyOutcomeScore, 0))}, wantErr: true},
		{name: "reserved join key", opts: []OutcomeOption{WithOutcomeAttributes(genAI[0], attribute.String(KeyQueryKey, "other"))}, wantErr: true},
		{name: "empty key", opts: []OutcomeOption{WithOutcomeAttributes(attribute.String("", "x"))}, wantErr: true},
		{name: "no value", opts: []OutcomeOption{WithOutcomeAttributes(attribute.KeyValue{Key: "gen_ai.system"})}, wantErr: true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			ctx := context.Background()
			rec := tracetest.NewSpanRecorder()
			tp := sdktrace.NewTracerProvider(sdktrace.WithSpanProcessor(rec))
			in, err := New(WithTracerProvider(tp))
			if err != nil {
				t.Fatal(err)
			}
			d := router.Decision{Key: "u1", Mode: router.ModeChain, Arm: router.ArmRouted}
			err = in.RecordOutcome(ctx, d, Outcome{Score: 1, InputTokens: 7}, tc.opts...)
			if tc.wantErr {
				if !errors.Is(err, ErrBadOutcome) {
					t.Fatalf("want ErrBadOutcome, got %v", err)
				}
				if n := len(rec.Ended()); n != 0 {
					t.Errorf("a rejected outcome recorded %d spans", n)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if len(rec.Ended()) != 1 {
				t.Fatalf("%d spans", len(rec.Ended()))
			}
			got := spanAttrs(rec.Ended()[0])
			for k, v := range tc.want {
				if got[k] != v {
					t.Errorf("%s = %v, want %v", k, got[k].Emit(), v.Emit())
				}
			}
			extra := 0
			for k := range got {
				if !reservedKeys[k] {
					extra++
				}
			}
			if extra != len(tc.want) {
				t.Errorf("%d attributes outside otelx's keys, want %d: %v", extra, len(tc.want), got)
			}
			// The hopwise.* attributes are untouched.
			if got[KeyQueryKey].AsString() != "u1" || got[KeyOutcomeScore].AsFloat64() != 1 || got[KeyOutcomeInputTokens].AsInt64() != 7 ||
				got[KeyABArm].AsString() != router.ArmRouted {
				t.Errorf("outcome attributes changed: %v", got)
			}
		})
	}
}

// Rejection happens whether or not anything records: the same call fails
// the same way with telemetry off.
func TestOutcomeAttributesRejectedWhenOff(t *testing.T) {
	t.Parallel()
	in, err := New(WithTracerProvider(nil), WithMeterProvider(nil))
	if err != nil {
		t.Fatal(err)
	}
	err = in.RecordOutcome(context.Background(), router.Decision{Key: "k"}, Outcome{Score: 1}, WithOutcomeAttributes(attribute.Bool(KeyRouteCached, true)))
	if !errors.Is(err, ErrBadOutcome) {
		t.Fatalf("want ErrBadOutcome, got %v", err)
	}
}
