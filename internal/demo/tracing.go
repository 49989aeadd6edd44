package demo

import (
	"context"
	"fmt"
	"os"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/metric/noop"
	"go.opentelemetry.io/otel/sdk/resource"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
)

// tracedRouter opens the index in a router configured as the eval
// harness's (the Bayes model with the fitted β, then cfg.RouterOptions,
// then extra) and wraps it in otelx instrumentation that exports every span
// to a new OTLP JSON Lines file at path. The batch processor blocks rather
// than drop spans, since tune and ab need all of them. done flushes the
// spans and closes the router and its index.
func tracedRouter(ctx context.Context, cfg Config, rep *Report, path string, extra ...router.Option) (r *router.Router, inst *otelx.Instrumentation, done func() error, err error) {
	idx, err := graphidx.Open(rep.Files.Index)
	if err != nil {
		return nil, nil, nil, fmt.Errorf("demo: %w", err)
	}
	model, err := scorer.NewBayes(scorer.WithBeta(rep.Eval.Beta))
	if err != nil {
		idx.Close()
		return nil, nil, nil, fmt.Errorf("demo: %w", err)
	}
	opts := append(append([]router.Option{router.WithModel(model)}, cfg.RouterOptions...), extra...)
	if r, err = router.New(idx, opts...); err != nil {
		idx.Close()
		return nil, nil, nil, fmt.Errorf("demo: %w", err)
	}
	_ = os.Remove(path) // the exporter appends; start fresh
	exp, err := otlpfile.NewExporter(ctx, path)
	if err != nil {
		r.Close()
		return nil, nil, nil, fmt.Errorf("demo: trace file %s: %w", path, err)
	}
	tp := sdktrace.NewTracerProvider(
		sdktrace.WithBatcher(exp, sdktrace.WithBlocking()),
		sdktrace.WithResource(resource.NewSchemaless(attribute.String("service.name", "hopwise-demo"))),
	)
	done = func() error {
		sctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), 10*time.Second)
		defer cancel()
		err := tp.Shutdown(sctx)
		r.Close() // closes idx
		if err != nil {
			return fmt.Errorf("demo: flushing traces to %s: %w", path, err)
		}
		return nil
	}
	inst, err = otelx.New(otelx.WithTracerProvider(tp), otelx.WithMeterProvider(noop.NewMeterProvider()))
	if err != nil {
		done()
		return nil, nil, nil, fmt.Errorf("demo: %w", err)
	}
	return r, inst, done, nil
}
