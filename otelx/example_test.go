package otelx

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"go.opentelemetry.io/otel/attribute"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/sdk/trace/tracetest"

	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
)

// Decisions and outcomes of a greenhouse gateway go to an OTLP JSON Lines
// file through the SDK's batch processor, and come back as records joined
// by unit key.
func ExampleInstrumentation_Decide() {
	ctx := context.Background()
	dir, _ := os.MkdirTemp("", "otelx-example")
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "traces.jsonl")

	exp, _ := otlpfile.NewExporter(ctx, path)
	tp := sdktrace.NewTracerProvider(sdktrace.WithBatcher(exp))
	in, _ := New(WithTracerProvider(tp), WithSamplingRatio(1))

	r, _ := router.New(greenhouseGraph())
	defer r.Close()
	q := router.Query{From: "vent-north", Value: "open", To: "bed-tomato", Key: "request-1"}
	d, err := in.Decide(ctx, r, q)
	if err != nil {
		fmt.Println(err)
		return
	}
	_ = in.RecordOutcome(ctx, d, Outcome{Score: 1, InputTokens: 420, OutputTokens: 90})
	_ = tp.Shutdown(ctx) // flushes the batch and fsyncs the file

	lg, _ := ReadTraceFiles(path)
	joined, _ := Join(lg.Decisions, lg.Outcomes)
	for _, j := range joined {
		fmt.Printf("%s: %s via %v, outcome %.0f, %d tokens\n",
			j.Decision.Key, j.Decision.Mode, j.Decision.Bridges, j.Outcome.Score, j.Outcome.Tokens())
	}
	// Output: request-1: chain via [humidity-zone1], outcome 1, 510 tokens
}

// A high-rate gateway keeps the per-decision cost down with compact spans
// (what tuning and A/B analysis read, 8 attributes or fewer, no entity
// names) and trace sampling, recording the ratio so that readers weight
// each decision by its inverse.
func ExampleWithCompactSpans() {
	ctx := context.Background()
	rec := tracetest.NewSpanRecorder()
	// A gateway would sample, say, 0.1 of its traces and pass the same
	// ratio to WithSamplingRatio; 1 keeps this example's one span.
	const ratio = 1.0
	tp := sdktrace.NewTracerProvider(sdktrace.WithSpanProcessor(rec),
		sdktrace.WithSampler(sdktrace.ParentBased(sdktrace.TraceIDRatioBased(ratio))))
	in, _ := New(WithTracerProvider(tp), WithCompactSpans(), WithSamplingRatio(ratio))

	r, _ := router.New(greenhouseGraph())
	defer r.Close()
	if _, err := in.Decide(ctx, r, router.Query{From: "vent-north", Value: "open", To: "bed-tomato", Key: "request-1"}); err != nil {
		fmt.Println(err)
		return
	}
	var keys []string
	for _, kv := range rec.Ended()[0].Attributes() {
		keys = append(keys, string(kv.Key))
	}
	slices.Sort(keys)
	fmt.Println(strings.Join(keys, "\n"))
	// Output:
	// hopwise.chain.err
	// hopwise.chain.hops
	// hopwise.query.key
	// hopwise.route.gain
	// hopwise.route.mode
	// hopwise.route.propensity
	// hopwise.route.reason
	// hopwise.sampling.ratio
}

// A gateway puts the GenAI attributes of the model call on the outcome
// span, beside the hopwise.outcome.* ones.
func ExampleWithOutcomeAttributes() {
	ctx := context.Background()
	rec := tracetest.NewSpanRecorder()
	tp := sdktrace.NewTracerProvider(sdktrace.WithSpanProcessor(rec))
	in, _ := New(WithTracerProvider(tp))

	d := router.Decision{Key: "request-1", Mode: router.ModeChain}
	err := in.RecordOutcome(ctx, d, Outcome{Score: 1, InputTokens: 96, OutputTokens: 16},
		WithOutcomeAttributes(attribute.String("gen_ai.operation.name", "chat"), attribute.String("gen_ai.request.model", "greenhouse-sim")))
	fmt.Println(err)
	for _, kv := range rec.Ended()[0].Attributes() {
		if strings.HasPrefix(string(kv.Key), "gen_ai.") || kv.Key == KeyOutcomeScore {
			fmt.Printf("%s=%s\n", kv.Key, kv.Value.Emit())
		}
	}
	// Output:
	// <nil>
	// hopwise.outcome.score=1
	// gen_ai.operation.name=chat
	// gen_ai.request.model=greenhouse-sim
}
