// Command gateway is a small HTTP service that embeds the hopwise router in
// front of an answerer (here the bundled simulated one), with OpenTelemetry
// traces of every decision.
//
//	go run ./cmd/hopwise demo                       # makes hopwise-demo/index.hwx
//	go run ./examples/gateway -index hopwise-demo/index.hwx
//	curl -s localhost:8080/v1/answer -d '{"from":"bed-11/moisture-probe","value":"reads-wet","to":"bed-10/leaf-wilt","key":"u1"}'
//
// Traces go to an OTLP JSON Lines file (-trace-file), or over OTLP/HTTP to
// -otlp-endpoint when it is set. SIGINT or SIGTERM shut it down gracefully:
// in-flight requests finish (up to -shutdown-timeout), then the trace
// exporter is flushed.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"log"
	"net"
	"net/http"
	"os"
	"os/signal"
	"syscall"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/exporters/otlp/otlptrace/otlptracehttp"
	"go.opentelemetry.io/otel/sdk/resource"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
)

// options are the command's settings.
type options struct {
	addr, index, config, traceFile, endpoint, token string
	decide, request, shutdown                       time.Duration
	// listener, when set, is used instead of listening on addr (tests).
	listener net.Listener
}

func main() {
	var o options
	flag.StringVar(&o.addr, "addr", "127.0.0.1:8080", "listen address")
	flag.StringVar(&o.index, "index", "hopwise-demo/index.hwx", "locality index file")
	flag.StringVar(&o.config, "config", "", "router config JSON (router.Config, as written by hopwise tune)")
	flag.StringVar(&o.traceFile, "trace-file", "gateway.otlp.jsonl", "OTLP JSON Lines trace file (when -otlp-endpoint is empty)")
	flag.StringVar(&o.endpoint, "otlp-endpoint", "", "OTLP/HTTP collector URL, e.g. http://localhost:4318 (overrides -trace-file)")
	flag.DurationVar(&o.decide, "decide-timeout", gw.DefaultDecideTimeout, "routing decision deadline")
	flag.DurationVar(&o.request, "request-timeout", gw.DefaultRequestTimeout, "whole-request deadline")
	flag.DurationVar(&o.shutdown, "shutdown-timeout", 10*time.Second, "graceful shutdown deadline")
	flag.StringVar(&o.token, "admin-token", os.Getenv("GATEWAY_ADMIN_TOKEN"), "bearer token for /admin/ (default $GATEWAY_ADMIN_TOKEN)")
	flag.Parse()

	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	if err := run(ctx, o); err != nil {
		log.Fatalf("gateway: %v", err)
	}
}

// run serves until ctx is done, then shuts down gracefully: stop accepting,
// let in-flight requests finish (up to o.shutdown), close the router, flush
// the traces.
func run(ctx context.Context, o options) error {
	tp, err := tracerProvider(ctx, o.traceFile, o.endpoint)
	if err != nil {
		return err
	}
	defer func() {
		sctx, cancel := context.WithTimeout(context.Background(), o.shutdown)
		defer cancel()
		if err := tp.Shutdown(sctx); err != nil {
			log.Printf("gateway: flushing traces: %v", err)
		}
	}()
	tel, err := otelx.New(otelx.WithTracerProvider(tp))
	if err != nil {
		return err
	}
	var ropts []router.Option
	if o.config != "" {
		c, err := router.LoadConfig(o.config)
		if err != nil {
			return err
		}
		if ropts, err = c.Options(); err != nil {
			return err
		}
	}
	srv, err := gw.New(gw.Config{IndexPath: o.index, RouterOptions: ropts, Telemetry: tel,
		DecideTimeout: o.decide, RequestTimeout: o.request, AdminToken: o.token})
	if err != nil {
		return err
	}
	defer srv.Close()

	hs := &http.Server{
		Handler:           srv.Handler(),
		ReadHeaderTimeout: 5 * time.Second,
		ReadTimeout:       o.request,
		WriteTimeout:      o.request + time.Second,
		IdleTimeout:       60 * time.Second,
	}
	ln := o.listener
	if ln == nil {
		if ln, err = net.Listen("tcp", o.addr); err != nil {
			return err
		}
	}
	log.Printf("gateway: listening on http://%s (index %s, generation %016x)", ln.Addr(), o.index, srv.Router().Generation())
	errc := make(chan error, 1)
	go func() { errc <- hs.Serve(ln) }()
	select {
	case err := <-errc:
		return err
	case <-ctx.Done():
	}
	log.Printf("gateway: shutting down")
	sctx, cancel := context.WithTimeout(context.Background(), o.shutdown)
	defer cancel()
	if err := hs.Shutdown(sctx); err != nil {
		return fmt.Errorf("shutdown: %w", err)
	}
	if err := <-errc; !errors.Is(err, http.ErrServerClosed) {
		return err
	}
	return nil
}

// tracerProvider exports spans over OTLP/HTTP when endpoint is set, else to
// an OTLP JSON Lines file.
func tracerProvider(ctx context.Context, traceFile, endpoint string) (*sdktrace.TracerProvider, error) {
	var exp sdktrace.SpanExporter
	var err error
	if endpoint != "" {
		exp, err = otlptracehttp.New(ctx, otlptracehttp.WithEndpointURL(endpoint+"/v1/traces"))
	} else {
		exp, err = otlpfile.NewExporter(ctx, traceFile)
	}
	if err != nil {
		return nil, err
	}
	// The batcher blocks rather than drop spans when its queue is full: a
	// dropped decision is unrecorded sampling and would bias hopwise tune.
	return sdktrace.NewTracerProvider(
		sdktrace.WithBatcher(exp, sdktrace.WithBlocking()),
		sdktrace.WithResource(resource.NewSchemaless(attribute.String("service.name", "hopwise-gateway"))),
	), nil
}
