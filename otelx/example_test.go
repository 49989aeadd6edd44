package otelx

import (
	"context"
	"fmt"
	"os"
	"path/filepath"

	sdktrace "go.opentelemetry.io/otel/sdk/trace"

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
