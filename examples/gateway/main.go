// Command gateway is a chat-completions reverse proxy that routes each
// request with the hopwise router before it reaches the model: it links the
// last user message to the locality index, decides under a deadline whether
// the question should be answered directly or through a chain of bridge
// entities, adds the rendered plan (or the direct instruction) as a system
// message, and forwards the request to the upstream model server. Requests
// it cannot route pass through untouched, with the reason recorded.
//
//	go run ./cmd/hopwise demo                                  # (repository root) makes hopwise-demo/index.hwx
//	cd examples/gateway
//	go run ./cmd/simupstream -index ../../hopwise-demo/index.hwx &   # simulated model on 127.0.0.1:9090
//	go run . -index ../../hopwise-demo/index.hwx -upstream http://127.0.0.1:9090/v1
//
// Traces go to an OTLP JSON Lines file (-trace-file, rotated at
// -trace-max-bytes), or over OTLP/HTTP to -otlp-endpoint when it is set.
// Metrics are served on GET /metrics for scraping. The admin token is read
// from -admin-token-file or $GATEWAY_ADMIN_TOKEN, never from the command
// line. SIGINT or SIGTERM shut it down gracefully: in-flight requests finish
// (up to -shutdown-timeout), then the exporters are flushed.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log"
	"net"
	"net/http"
	"os"
	"os/signal"
	"strings"
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

// Environment variables the command reads.
const (
	envAdminToken = "GATEWAY_ADMIN_TOKEN"
	envHashKey    = "GATEWAY_ENTITY_HASH_KEY"
)

// options are the command's settings.
type options struct {
	addr, index, lexicon, config, upstream, traceFile, endpoint string
	tokenFile, hashKeyFile, provider                            string
	traceMaxBytes                                               int64
	traceBackups                                                int
	routingOff                                                  bool
	decide, upstreamTimeout, body, shutdown                     time.Duration
	maxBody                                                     int64
	// token and hashKey are read from files or the environment.
	token   string
	hashKey []byte
	// listener, when set, is used instead of listening on addr (tests).
	listener net.Listener
	logw     io.Writer
	// batchDelay, when set, replaces the span batcher's export delay
	// (tests of rotation).
	batchDelay time.Duration
}

// parseFlags reads the command line and the environment. The admin token
// has no flag: a command line is visible to every user of the machine.
func parseFlags(args []string, getenv func(string) string, errw io.Writer) (options, error) {
	var o options
	fs := flag.NewFlagSet("gateway", flag.ContinueOnError)
	fs.SetOutput(errw)
	fs.StringVar(&o.addr, "addr", "127.0.0.1:8080", "listen address")
	fs.StringVar(&o.index, "index", "hopwise-demo/index.hwx", "locality index file (replace it by rename, then POST /admin/reload-index)")
	fs.StringVar(&o.lexicon, "lexicon", "", "lexicon TSV (surface form<TAB>entity id) for linking prompts (default: the index's entity names)")
	fs.StringVar(&o.config, "config", "", "router config JSON (router.Config, as written by hopwise tune)")
	fs.StringVar(&o.upstream, "upstream", "http://127.0.0.1:9090/v1", "base URL of the upstream model server (requests go to <base>/chat/completions)")
	fs.StringVar(&o.provider, "provider", "", "gen_ai.provider.name recorded on model-call spans (empty: not recorded)")
	fs.BoolVar(&o.routingOff, "routing-off", false, "forward every request untouched (the same proxy without routing)")
	fs.StringVar(&o.traceFile, "trace-file", "gateway.otlp.jsonl", "OTLP JSON Lines trace file (when -otlp-endpoint is empty)")
	fs.Int64Var(&o.traceMaxBytes, "trace-max-bytes", 256<<20, "rotate the trace file before it grows past this many bytes")
	fs.IntVar(&o.traceBackups, "trace-backups", 4, "rotated trace files kept (file.1 … file.N)")
	fs.StringVar(&o.endpoint, "otlp-endpoint", "", "OTLP/HTTP collector base URL, e.g. http://127.0.0.1:4318 (traces go to <url>/v1/traces; overrides -trace-file)")
	fs.StringVar(&o.tokenFile, "admin-token-file", "", "file holding the bearer token for /admin/ routes (default $"+envAdminToken+")")
	fs.StringVar(&o.hashKeyFile, "entity-hash-key-file", "", "file holding a key (≥ 16 bytes) to replace entity names in traces by keyed hashes (default $"+envHashKey+"; empty: names in clear)")
	fs.DurationVar(&o.decide, "decide-timeout", gw.DefaultDecideTimeout, "routing decision deadline (0: the default)")
	fs.DurationVar(&o.upstreamTimeout, "upstream-timeout", gw.DefaultUpstreamTimeout, "deadline of the whole upstream exchange, streaming included")
	fs.DurationVar(&o.body, "body-timeout", gw.DefaultBodyTimeout, "deadline for receiving a request body (408 past it; 0: the default)")
	fs.Int64Var(&o.maxBody, "max-body-bytes", gw.DefaultMaxBodyBytes, "largest request body (413 past it; 0: the default)")
	fs.DurationVar(&o.shutdown, "shutdown-timeout", 10*time.Second, "graceful shutdown deadline")
	if err := fs.Parse(args); err != nil {
		return o, err
	}
	for _, d := range []struct {
		flag string
		v    time.Duration
	}{{"decide-timeout", o.decide}, {"upstream-timeout", o.upstreamTimeout}, {"body-timeout", o.body}, {"shutdown-timeout", o.shutdown}} {
		if d.v < 0 {
			return o, fmt.Errorf("-%s %v: want ≥ 0 (0: the default)", d.flag, d.v)
		}
	}
	if o.maxBody < 0 {
		return o, fmt.Errorf("-max-body-bytes %d: want ≥ 0 (0: the default)", o.maxBody)
	}
	if !gw.ValidUpstream(o.upstream) {
		return o, fmt.Errorf("-upstream %q: want an http or https base URL such as http://127.0.0.1:9090/v1", o.upstream)
	}
	if o.traceMaxBytes < 0 || o.traceBackups < 1 {
		return o, fmt.Errorf("-trace-max-bytes must be ≥ 0 and -trace-backups ≥ 1")
	}
	if fs.NArg() > 0 {
		return o, fmt.Errorf("unexpected argument %q", fs.Arg(0))
	}
	var err error
	if o.token, err = secret(o.tokenFile, getenv(envAdminToken), "admin token"); err != nil {
		return o, err
	}
	hk, err := secret(o.hashKeyFile, getenv(envHashKey), "entity hash key")
	if err != nil {
		return o, err
	}
	if hk != "" {
		if len(hk) < otelx.MinHashKeyLen {
			return o, fmt.Errorf("the entity hash key is %d bytes; it needs at least %d", len(hk), otelx.MinHashKeyLen)
		}
		o.hashKey = []byte(hk)
	}
	return o, nil
}

// secret reads a secret from path (trailing line break trimmed) or takes
// env. A file others can read is refused.
func secret(path, env, what string) (string, error) {
	if path == "" {
		return strings.TrimSpace(env), nil
	}
	st, err := os.Stat(path)
	if err != nil {
		return "", fmt.Errorf("reading the %s file: %w", what, errors.Unwrap(err))
	}
	if st.Mode().Perm()&0o077 != 0 {
		return "", fmt.Errorf("the %s file is readable by other users (mode %04o); chmod 600 it", what, st.Mode().Perm())
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return "", fmt.Errorf("reading the %s file: %w", what, errors.Unwrap(err))
	}
	s := strings.TrimRight(string(b), "\r\n")
	if s == "" {
		return "", fmt.Errorf("the %s file is empty", what)
	}
	return s, nil
}

func main() {
	o, err := parseFlags(os.Args[1:], os.Getenv, os.Stderr)
	if errors.Is(err, flag.ErrHelp) {
		return
	}
	if err != nil {
		log.Fatalf("gateway: %v", err)
	}
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
	logw := o.logw
	if logw == nil {
		logw = os.Stderr
	}
	lg := log.New(logw, "", log.LstdFlags)
	tp, err := tracerProvider(ctx, o)
	if err != nil {
		return err
	}
	defer func() {
		sctx, cancel := context.WithTimeout(context.Background(), o.shutdown)
		defer cancel()
		if err := tp.Shutdown(sctx); err != nil {
			lg.Printf("gateway: flushing traces: %v", err)
		}
	}()
	mp, metrics, err := gw.NewPrometheus()
	if err != nil {
		return err
	}
	defer mp.Shutdown(context.WithoutCancel(ctx))
	topts := []otelx.Option{otelx.WithTracerProvider(tp), otelx.WithMeterProvider(mp)}
	if o.hashKey != nil {
		topts = append(topts, otelx.WithEntityHashKey(o.hashKey))
	}
	tel, err := otelx.New(topts...)
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
	ln := o.listener
	if ln == nil {
		if ln, err = net.Listen("tcp", o.addr); err != nil {
			return err
		}
	}
	defer ln.Close()
	loopback := gw.IsLoopbackAddr(ln.Addr())
	srv, err := gw.New(gw.Config{IndexPath: o.index, LexiconPath: o.lexicon, RouterOptions: ropts, Upstream: o.upstream,
		RoutingOff: o.routingOff, Telemetry: tel, TracerProvider: tp, MeterProvider: mp, ProviderName: o.provider,
		DecideTimeout: o.decide, UpstreamTimeout: o.upstreamTimeout, BodyTimeout: o.body, MaxBodyBytes: o.maxBody,
		AdminToken: o.token, AdminOpenOnLoopback: loopback, Metrics: metrics, Logger: lg})
	if err != nil {
		return err
	}
	defer srv.Close()
	switch {
	case o.token != "":
		lg.Printf("gateway: admin routes need the bearer token")
	case loopback:
		lg.Printf("gateway: no admin token set; admin routes are open to loopback callers only (the listener is on loopback)")
	default:
		lg.Printf("gateway: no admin token set and the listener is not on loopback: admin routes are disabled")
	}
	if o.hashKey != nil {
		lg.Printf("gateway: entity names in traces are replaced by keyed hashes")
	}
	hs := &http.Server{
		Handler:           srv.Handler(),
		ReadHeaderTimeout: 5 * time.Second,
		WriteTimeout:      o.upstreamTimeout + o.body + 5*time.Second,
		IdleTimeout:       60 * time.Second,
		ErrorLog:          lg,
	}
	routing := "on"
	if o.routingOff {
		routing = "off"
	}
	lg.Printf("gateway: listening on http://%s (routing %s, generation %016x)", ln.Addr(), routing, srv.Router().Generation())
	errc := make(chan error, 1)
	go func() { errc <- hs.Serve(ln) }()
	select {
	case err := <-errc:
		return err
	case <-ctx.Done():
	}
	lg.Printf("gateway: shutting down")
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

// tracerProvider exports spans over OTLP/HTTP when o.endpoint is set, else
// to a rotated OTLP JSON Lines file.
func tracerProvider(ctx context.Context, o options) (*sdktrace.TracerProvider, error) {
	var exp sdktrace.SpanExporter
	var err error
	if o.endpoint != "" {
		exp, err = otlptracehttp.New(ctx, otlptracehttp.WithEndpointURL(strings.TrimSuffix(o.endpoint, "/")+"/v1/traces"))
	} else {
		fopts := []otlpfile.Option{otlpfile.WithMaxBytes(o.traceMaxBytes)}
		if o.traceBackups > 0 {
			fopts = append(fopts, otlpfile.WithMaxBackups(o.traceBackups))
		}
		exp, err = otlpfile.NewExporter(ctx, o.traceFile, fopts...)
	}
	if err != nil {
		return nil, err
	}
	// The batcher blocks rather than drop spans when its queue is full: a
	// dropped decision is unrecorded sampling and would bias hopwise tune.
	bopts := []sdktrace.BatchSpanProcessorOption{sdktrace.WithBlocking()}
	if o.batchDelay > 0 {
		bopts = append(bopts, sdktrace.WithBatchTimeout(o.batchDelay))
	}
	return sdktrace.NewTracerProvider(
		sdktrace.WithBatcher(exp, bopts...),
		sdktrace.WithResource(resource.NewSchemaless(attribute.String("service.name", "hopwise-gateway"))),
	), nil
}
