// Command gwload measures what routing adds to the gateway's latency and
// CPU: it starts the simulated model (answering at once) and two gateways
// in front of it on loopback, one routing and one with routing off (the same
// proxy, every request passed through), and sends the same chat requests to
// both, in alternating rounds so that both see the same machine load. It
// measures twice, in one run:
//
//   - closed loop: -clients concurrent clients, each sending its next
//     request when the last one is answered (20 000 requests from 32
//     clients by default). Latency is then mostly queueing: on c cores a
//     request waits for about clients/c others, so each microsecond of CPU
//     routing adds shows up about clients/c times at every percentile.
//   - open loop: requests sent at a fixed rate (-open times the routing
//     gateway's closed-loop throughput, or -rate), whatever the answers, and
//     each latency counted from the request's scheduled send time, so that
//     a late answer cannot hold back the requests behind it and hide their
//     wait (coordinated omission; common practice for latency under load).
//     Below capacity the queue is short, and the added p99 is what routing
//     costs a request.
//
// It prints p50, p99, max and throughput of each gateway in each mode, the
// errors, the routes, the process CPU per request (getrusage: clients,
// gateways and upstream together, the same work for both gateways except
// what routing does) and what routing adds to each. A third pass (Linux;
// -handler-cpu) runs each request's gateway handler locked to its OS
// thread and sums the thread's CPU time (CLOCK_THREAD_CPUTIME_ID): the
// gateway's own CPU per request, which other processes on the machine do
// not inflate, and the routing's share of it.
//
//	cd examples/gateway
//	go run ./cmd/gwload                         # 20 000 requests, 32 clients, then open loop at 0.3 × capacity
//	go run ./cmd/gwload -distinct 100           # decisions from the router's cache
//	go run ./cmd/gwload -requests 2000 -clients 8 -open 0
//	go run ./cmd/gwload -config tuned.json      # the routing gateway with a router config
//
// Traffic stays on 127.0.0.1; every run is bounded by -requests and
// -timeout. The questions are about the greenhouse world of examples/
// internal/ghtest, which builds on github.com/hopwise/hopwise/internal/world:
// this program cannot be copied out of the repository as is (give it
// -index from `hopwise demo` and the questions still work, the index build
// is all that needs the internal package).
package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"log"
	"math/rand/v2"
	"net/http"
	"net/http/httptest"
	"os"
	"runtime"
	"runtime/pprof"
	"slices"
	"sync"
	"sync/atomic"
	"syscall"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/examples/gateway/simmodel"
	"github.com/hopwise/hopwise/examples/internal/ghtest"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/cpuclock"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
	"go.opentelemetry.io/otel/metric"
	"go.opentelemetry.io/otel/metric/noop"
	sdkmetric "go.opentelemetry.io/otel/sdk/metric"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/trace"
	tnoop "go.opentelemetry.io/otel/trace/noop"
)

// Config configures Run.
type Config struct {
	Index    string // "" builds a greenhouse index in a temp dir
	Requests int    // per gateway and mode
	Clients  int    // closed loop
	Rounds   int    // alternating rounds per gateway and mode
	// Distinct is the number of distinct questions (0: every request its
	// own); a small number lets the router's decision cache answer.
	Distinct int
	// Open is the open-loop rate as a fraction of the routing gateway's
	// closed-loop throughput (0 with Rate 0: no open-loop run); Rate, when
	// set, is the rate in requests per second instead.
	Open, Rate float64
	Timeout    time.Duration
	// Sim answers with the simulated model; false (the default of the
	// command) with one fixed completion, so that the upstream does the
	// same work whether or not the gateway added a plan.
	Sim bool
	// RouterOptions configure the routing gateway's router (the gateway's
	// -config); nil keeps the router's defaults.
	RouterOptions []router.Option
	// Telemetry is "off" (or ""), "sdk" (the OpenTelemetry SDK, default
	// decision spans) or "compact" (the SDK with otelx.WithCompactSpans).
	Telemetry string
	// HandlerCPU adds the handler CPU pass (Linux).
	HandlerCPU bool
	// Profile, when set, receives a CPU profile of the measured rounds
	// (not of the index build and warm-up).
	Profile io.Writer
	Out     io.Writer
}

// Stats are one gateway's figures in one mode.
type Stats struct {
	Name          string
	N, Errors     int
	P50, P99, Max time.Duration
	// Late is the open loop's p99 lateness of the sends behind their
	// schedule (the load generator's own delay, inside the latencies).
	Late    time.Duration
	Elapsed time.Duration
	// CPU is the process CPU time (user + system) of the rounds: clients,
	// gateway and simulated model together, the same for both gateways
	// except for what routing does.
	CPU    time.Duration
	Routes map[string]int
	// RoundP99 is the p99 of each round alone: a pause of the whole
	// machine shows as one round far above the others.
	RoundP99 []time.Duration
}

// CPUPerRequest is the process CPU time per request.
func (s Stats) CPUPerRequest() time.Duration { return s.CPU / time.Duration(max(s.N, 1)) }

// cpuTime is the process's user + system CPU time (getrusage(2)).
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// Throughput is requests per second of wall time.
func (s Stats) Throughput() float64 { return float64(s.N) / s.Elapsed.Seconds() }

// Result is what Run measured.
type Result struct {
	On, Off  Stats         // closed loop
	AddedP99 time.Duration // On.P99 − Off.P99
	// OpenOn and OpenOff are the open-loop figures at Rate requests per
	// second (zero when no open-loop run was asked for).
	OpenOn, OpenOff Stats
	Rate            float64
	OpenAddedP99    time.Duration
	// HandlerOn and HandlerOff are the gateways' handler thread CPU per
	// request (zero without the handler CPU pass).
	HandlerOn, HandlerOff time.Duration
}

// AddedCPU is the process CPU per request routing adds (closed loop).
func (r *Result) AddedCPU() time.Duration { return r.On.CPUPerRequest() - r.Off.CPUPerRequest() }

// cannedReply answers every request with the same completion at once,
// after reading the body.
var cannedReply = http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
	_, _ = io.Copy(io.Discard, r.Body)
	w.Header().Set("Content-Type", "application/json")
	_, _ = w.Write(canned)
})

var canned = []byte(`{"id":"chatcmpl-load","object":"chat.completion","created":0,"model":"greenhouse-sim","choices":[{"index":0,"message":{"role":"assistant","content":"Given the readings, the most likely state is firm.\nAnswer: firm"},"finish_reason":"stop"}],"usage":{"prompt_tokens":96,"completion_tokens":16,"total_tokens":112}}`)

// makeBodies words n chat requests from the index's own vocabulary:
// seeded random (entity, value, other entity) questions, so that most
// decisions miss the router's decision cache, and one prompt in ten names
// nothing (passed through).
func makeBodies(ix *graphidx.Index, n int, seed uint64) [][]byte {
	rng := rand.New(rand.NewPCG(seed, 0x10ad))
	ne := ix.NumEntities()
	out := make([][]byte, n)
	for i := range out {
		q := "Write a short note on watering tomatoes."
		if i%10 != 9 {
			a := graphidx.EntityID(rng.IntN(ne))
			b := graphidx.EntityID(rng.IntN(ne - 1))
			if b >= a {
				b++
			}
			vals := ix.Values(a)
			q = fmt.Sprintf("In the greenhouse, %s is %s. What is the most likely state of %s?", ix.Name(a), vals[rng.IntN(len(vals))], ix.Name(b))
		}
		out[i], _ = json.Marshal(map[string]any{"model": "greenhouse-sim", "messages": []any{map[string]string{"role": "user", "content": q}}})
	}
	return out
}

func main() {
	var cfg Config
	flag.StringVar(&cfg.Index, "index", "", "locality index (default: build a 30 000-context greenhouse index in a temp dir)")
	flag.IntVar(&cfg.Requests, "requests", 20000, "requests per gateway, in each mode")
	flag.IntVar(&cfg.Clients, "clients", 32, "concurrent clients of the closed loop")
	flag.IntVar(&cfg.Rounds, "rounds", 4, "alternating rounds per gateway, in each mode")
	flag.IntVar(&cfg.Distinct, "distinct", 0, "distinct questions, repeated in turn (0: every request its own; small: decisions come from the router's cache)")
	flag.Float64Var(&cfg.Open, "open", 0.3, "open-loop rate as a fraction of the routing gateway's closed-loop throughput (0: no open-loop run)")
	flag.Float64Var(&cfg.Rate, "rate", 0, "open-loop rate in requests per second (overrides -open)")
	flag.DurationVar(&cfg.Timeout, "timeout", 5*time.Minute, "stop after this long whatever is left")
	flag.StringVar(&cfg.Telemetry, "telemetry", "off", "telemetry of both gateways: off (noop providers), sdk (OpenTelemetry SDK, spans batched to an exporter that drops them) or compact (sdk with otelx.WithCompactSpans)")
	flag.BoolVar(&cfg.HandlerCPU, "handler-cpu", true, "measure the gateway handlers' own thread CPU per request in a third pass (Linux)")
	flag.BoolVar(&cfg.Sim, "sim", false, "answer with the simulated model (default: one fixed completion, the same work for both gateways)")
	prof := flag.String("cpuprofile", "", "write a CPU profile of the measured rounds to this file")
	config := flag.String("config", "", "router config JSON for the routing gateway (router.Config, as the gateway's -config; default: the router's defaults)")
	flag.Parse()
	cfg.Out = os.Stdout
	if *config != "" {
		c, err := router.LoadConfig(*config)
		if err != nil {
			log.Fatalf("gwload: %v", err)
		}
		if cfg.RouterOptions, err = c.Options(); err != nil {
			log.Fatalf("gwload: %s: %v", *config, err)
		}
	}
	if *prof != "" {
		f, err := os.Create(*prof)
		if err != nil {
			log.Fatalf("gwload: %v", err)
		}
		defer f.Close()
		cfg.Profile = f
	}
	res, err := Run(context.Background(), cfg)
	if err != nil {
		log.Fatalf("gwload: %v", err)
	}
	if n := res.On.Errors + res.Off.Errors + res.OpenOn.Errors + res.OpenOff.Errors; n > 0 {
		log.Printf("gwload: %d errors", n)
	}
}

// Run measures both gateways and prints the tables.
func Run(ctx context.Context, cfg Config) (*Result, error) {
	if cfg.Requests < cfg.Clients || cfg.Clients < 1 || cfg.Clients > 256 || cfg.Rounds < 1 || cfg.Requests > 1_000_000 {
		return nil, fmt.Errorf("need 1 ≤ clients ≤ 256, clients ≤ requests ≤ 1000000 and rounds ≥ 1 (got %d clients, %d requests, %d rounds)",
			cfg.Clients, cfg.Requests, cfg.Rounds)
	}
	if !(cfg.Open >= 0 && cfg.Open <= 1) || !(cfg.Rate >= 0 && cfg.Rate <= 1e6) {
		return nil, fmt.Errorf("need 0 ≤ open ≤ 1 and 0 ≤ rate ≤ 1000000 (got open %v, rate %v)", cfg.Open, cfg.Rate)
	}
	if cfg.Timeout <= 0 {
		cfg.Timeout = 5 * time.Minute
	}
	if cfg.Out == nil {
		cfg.Out = io.Discard
	}
	ctx, cancel := context.WithTimeout(ctx, cfg.Timeout)
	defer cancel()
	if cfg.Index == "" {
		dir, err := os.MkdirTemp("", "gwload-")
		if err != nil {
			return nil, err
		}
		defer os.RemoveAll(dir)
		if cfg.Index, err = ghtest.Build(dir, "index.hwx", 1, 30000, 1); err != nil {
			return nil, err
		}
	}
	ix, err := graphidx.Open(cfg.Index)
	if err != nil {
		return nil, err
	}
	defer ix.Close()
	var upstream http.Handler = cannedReply
	if cfg.Sim {
		if upstream, err = simmodel.New(ix, simmodel.Options{}); err != nil {
			return nil, err
		}
	}
	up := httptest.NewServer(upstream)
	defer up.Close()
	// The same telemetry on both sides: off (noop providers, the figure is
	// the cost of linking, deciding and rewriting the body), or the SDK
	// (spans batched to an exporter that drops them, metrics into a reader
	// nobody collects), so that the figure includes what recording the
	// decision and model-call spans and the metrics costs.
	tp, mp := trace.TracerProvider(tnoop.NewTracerProvider()), metric.MeterProvider(noop.NewMeterProvider())
	topts := []otelx.Option{}
	switch cfg.Telemetry {
	case "", "off":
	case "sdk", "compact":
		stp := sdktrace.NewTracerProvider(sdktrace.WithBatcher(dropSpans{}))
		smp := sdkmetric.NewMeterProvider(sdkmetric.WithReader(sdkmetric.NewManualReader()))
		defer stp.Shutdown(context.Background())
		defer smp.Shutdown(context.Background())
		tp, mp = stp, smp
		if cfg.Telemetry == "compact" {
			topts = append(topts, otelx.WithCompactSpans())
		}
	default:
		return nil, fmt.Errorf("telemetry %q: want off, sdk or compact", cfg.Telemetry)
	}
	tel, err := otelx.New(append(topts, otelx.WithTracerProvider(tp), otelx.WithMeterProvider(mp))...)
	if err != nil {
		return nil, err
	}
	var meters []*meter // routing on, routing off
	start := func(off bool) (*gw.Server, *httptest.Server, error) {
		s, err := gw.New(gw.Config{IndexPath: cfg.Index, Upstream: up.URL + "/v1", RoutingOff: off, Telemetry: tel, RouterOptions: cfg.RouterOptions,
			TracerProvider: tp, MeterProvider: mp, Logger: log.New(io.Discard, "", 0)})
		if err != nil {
			return nil, nil, err
		}
		m := &meter{h: s.Handler()}
		if cfg.Profile != nil {
			m.label = map[bool]string{false: "on", true: "off"}[off]
		}
		meters = append(meters, m)
		return s, httptest.NewServer(m), nil
	}
	son, hon, err := start(false)
	if err != nil {
		return nil, err
	}
	defer son.Close()
	defer hon.Close()
	soff, hoff, err := start(true)
	if err != nil {
		return nil, err
	}
	defer soff.Close()
	defer hoff.Close()

	tr := http.DefaultTransport.(*http.Transport).Clone()
	tr.MaxIdleConnsPerHost = maxInFlight
	tr.MaxIdleConns = 2 * maxInFlight
	client := &http.Client{Transport: tr}
	defer tr.CloseIdleConnections()
	// Warm both up (connections, page cache of the index) on questions
	// the measured run does not ask.
	warm := makeBodies(ix, min(cfg.Requests, 1000), 2)
	for _, h := range []*httptest.Server{hon, hoff} {
		if _, err := load(ctx, client, h.URL, warm, cfg.Clients, 0); err != nil {
			return nil, err
		}
	}
	// Each pass asks questions of its own (seeds 1, 3, 4) and starts with
	// the router's decision cache empty (a Reconfigure with no change
	// starts a new configuration generation, which no cached decision
	// matches), so that no pass finds the decisions of the warm-up or of
	// another pass; the same (entity, value, target) asked twice within a
	// pass is served from the cache, as in a gateway's traffic. With
	// -distinct every pass asks the same questions, asked once each before
	// the passes, so that all decisions come from the cache.
	bodies := makeBodies(ix, cfg.Requests, 1)
	openBodies, cpuBodies := bodies, bodies
	if cfg.Distinct > 0 && cfg.Distinct < len(bodies) {
		for i := cfg.Distinct; i < len(bodies); i++ {
			bodies[i] = bodies[i%cfg.Distinct]
		}
		for _, h := range []*httptest.Server{hon, hoff} {
			if _, err := load(ctx, client, h.URL, bodies[:cfg.Distinct], min(cfg.Clients, cfg.Distinct), 3*len(bodies)); err != nil {
				return nil, err
			}
		}
	} else {
		openBodies, cpuBodies = makeBodies(ix, cfg.Requests, 3), makeBodies(ix, cfg.Requests, 4)
	}
	coldCache := func() error {
		if cfg.Distinct > 0 {
			return nil
		}
		return son.Router().Reconfigure()
	}
	if cfg.Profile != nil {
		if err := pprof.StartCPUProfile(cfg.Profile); err != nil {
			return nil, err
		}
		defer pprof.StopCPUProfile()
	}
	gws := [2]string{hoff.URL, hon.URL}
	res := &Result{}
	if err := coldCache(); err != nil {
		return nil, err
	}
	closed, err := alternate(ctx, gws, bodies, cfg.Rounds, func(url string, b [][]byte, offset int) ([]sample, error) {
		return load(ctx, client, url, b, cfg.Clients, offset)
	})
	if err != nil {
		return nil, err
	}
	res.Off, res.On = closed[0].stats("routing off"), closed[1].stats("routing on")
	res.AddedP99 = res.On.P99 - res.Off.P99
	res.Rate = cfg.Rate
	if res.Rate == 0 {
		res.Rate = cfg.Open * res.On.Throughput()
	}
	if res.Rate > 0 {
		if err := coldCache(); err != nil {
			return nil, err
		}
		// The open-loop units follow the closed loop's, so that no unit
		// key repeats (the gateway keeps one pending decision per unit).
		open, err := alternate(ctx, gws, openBodies, cfg.Rounds, func(url string, b [][]byte, offset int) ([]sample, error) {
			return loadOpen(ctx, client, url, b, res.Rate, len(bodies)+offset)
		})
		if err != nil {
			return nil, err
		}
		res.OpenOff, res.OpenOn = open[0].stats("routing off"), open[1].stats("routing on")
		res.OpenAddedP99 = res.OpenOn.P99 - res.OpenOff.P99
	}
	if _, ok := cpuclock.Thread(); ok && cfg.HandlerCPU {
		if err := coldCache(); err != nil {
			return nil, err
		}
		for _, m := range meters {
			m.on.Store(true)
		}
		if _, err := alternate(ctx, gws, cpuBodies, cfg.Rounds, func(url string, b [][]byte, offset int) ([]sample, error) {
			return load(ctx, client, url, b, cfg.Clients, 2*len(bodies)+offset)
		}); err != nil {
			return nil, err
		}
		res.HandlerOn, res.HandlerOff = meters[0].perRequest(), meters[1].perRequest()
	}
	report(cfg, res)
	return res, nil
}

// meter wraps a gateway's handler: while on, each request's handler runs
// locked to its OS thread, and the thread's CPU time is summed. A locked
// goroutine has its thread to itself, so the sum is the handler's own CPU
// (reading the body, parsing, routing, the upstream call's share on this
// goroutine, writing the answer), not that of the server's connection
// reader, the client or the garbage collector's workers.
type meter struct {
	h   http.Handler
	on  atomic.Bool
	cpu atomic.Int64 // ns
	n   atomic.Int64
	// label, when set, labels the handler's profile samples (gateway=off
	// or gateway=on: go tool pprof -tagfocus gateway=on).
	label string
}

func (m *meter) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	if m.label != "" {
		pprof.Do(r.Context(), pprof.Labels("gateway", m.label), func(context.Context) { m.serve(w, r) })
		return
	}
	m.serve(w, r)
}

func (m *meter) serve(w http.ResponseWriter, r *http.Request) {
	if !m.on.Load() {
		m.h.ServeHTTP(w, r)
		return
	}
	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	t0, _ := cpuclock.Thread()
	m.h.ServeHTTP(w, r)
	t1, _ := cpuclock.Thread()
	m.cpu.Add(int64(t1 - t0))
	m.n.Add(1)
}

func (m *meter) perRequest() time.Duration {
	return time.Duration(m.cpu.Load() / max(m.n.Load(), 1))
}

// dropSpans is a span exporter that drops what it is given: the SDK's
// recording and batching are measured, no I/O.
type dropSpans struct{}

func (dropSpans) ExportSpans(context.Context, []sdktrace.ReadOnlySpan) error { return nil }
func (dropSpans) Shutdown(context.Context) error                             { return nil }

// maxInFlight bounds the open loop's requests in flight (and sizes the
// client's idle connection pool).
const maxInFlight = 256

// side is one gateway's samples, wall time and process CPU over the rounds.
type side struct {
	samples  []sample
	elapsed  time.Duration
	cpu      time.Duration
	roundP99 []time.Duration
}

func (s side) stats(name string) Stats {
	st := stats(name, s.samples, s.elapsed, s.cpu)
	st.RoundP99 = s.roundP99
	return st
}

// alternate sends bodies to both gateways (gws[0] off, gws[1] on) in
// rounds, alternating which goes first, and returns both sides.
func alternate(ctx context.Context, gws [2]string, bodies [][]byte, rounds int,
	run func(url string, b [][]byte, offset int) ([]sample, error)) ([2]side, error) {
	var out [2]side
	per := len(bodies) / rounds
	for r := range rounds {
		lo, hi := r*per, (r+1)*per
		if r == rounds-1 {
			hi = len(bodies)
		}
		for _, g := range [2]int{r % 2, 1 - r%2} {
			t0, c0 := time.Now(), cpuTime()
			s, err := run(gws[g], bodies[lo:hi], lo)
			out[g].elapsed += time.Since(t0)
			out[g].cpu += cpuTime() - c0
			if err != nil {
				return out, err
			}
			out[g].samples = append(out[g].samples, s...)
			out[g].roundP99 = append(out[g].roundP99, stats("", s, 0, 0).P99)
		}
	}
	return out, ctx.Err()
}

// report prints the tables and the summary lines.
func report(cfg Config, res *Result) {
	w := cfg.Out
	upName := "a fixed completion"
	if cfg.Sim {
		upName = "the simulated model"
	}
	telName := map[string]string{"": "off", "off": "off", "sdk": "on (SDK, spans dropped)", "compact": "on (SDK, compact decision spans, spans dropped)"}[cfg.Telemetry]
	distinct := "every question distinct"
	if cfg.Distinct > 0 {
		distinct = fmt.Sprintf("%d distinct questions repeated", cfg.Distinct)
	}
	fmt.Fprintf(w, "%d requests per gateway and mode (questions from the index's names, %s, 1 in 10 linking nothing) over loopback, %d alternating rounds; upstream: %s, at once; telemetry %s; GOMAXPROCS %d\n\n",
		cfg.Requests, distinct, cfg.Rounds, upName, telName, runtime.GOMAXPROCS(0))
	fmt.Fprintln(w, "mode                  gateway       requests  errors      p50       p99       max   req/s  CPU/request  routes")
	row := func(mode string, s Stats) {
		fmt.Fprintf(w, "%-20s  %-12s  %8d  %6d  %7.0fµs  %7.0fµs  %6.1fms  %6.0f  %9.1fµs  %v\n", mode, s.Name, s.N, s.Errors,
			us(s.P50), us(s.P99), float64(s.Max.Microseconds())/1000, s.Throughput(), us(s.CPUPerRequest()), s.Routes)
	}
	closed := fmt.Sprintf("closed, %d clients", cfg.Clients)
	row(closed, res.Off)
	row(closed, res.On)
	if res.Rate > 0 {
		open := fmt.Sprintf("open, %.0f req/s", res.Rate)
		row(open, res.OpenOff)
		row(open, res.OpenOn)
	}
	fmt.Fprintf(w, "\nclosed loop: routing adds %+.0fµs at p50 and %+.0fµs at p99 and %+.1fµs of CPU per request; throughput %.2f× the proxy without routing\n",
		us(res.On.P50-res.Off.P50), us(res.AddedP99), us(res.AddedCPU()), res.On.Throughput()/res.Off.Throughput())
	if res.Rate > 0 {
		fmt.Fprintf(w, "open loop at %.0f req/s (latency from the scheduled send; the sender's own p99 lateness %.0fµs off, %.0fµs on): routing adds %+.0fµs at p50 and %+.0fµs at p99 and %+.1fµs of CPU per request\n",
			res.Rate, us(res.OpenOff.Late), us(res.OpenOn.Late), us(res.OpenOn.P50-res.OpenOff.P50), us(res.OpenAddedP99),
			us(res.OpenOn.CPUPerRequest()-res.OpenOff.CPUPerRequest()))
		fmt.Fprintf(w, "open loop p99 of each round: routing off %s; routing on %s\n", usList(res.OpenOff.RoundP99), usList(res.OpenOn.RoundP99))
	}
	if res.HandlerOn > 0 {
		fmt.Fprintf(w, "gateway handler thread CPU per request (closed loop, each handler on its own OS thread): %.1fµs routing off, %.1fµs routing on: routing adds %+.1fµs (%.2f×)\n",
			us(res.HandlerOff), us(res.HandlerOn), us(res.HandlerOn-res.HandlerOff), float64(res.HandlerOn)/float64(max(res.HandlerOff, 1)))
	}
}

func us(d time.Duration) float64 { return float64(d.Nanoseconds()) / 1000 }

func usList(ds []time.Duration) string {
	var b bytes.Buffer
	for i, d := range ds {
		if i > 0 {
			b.WriteString(", ")
		}
		fmt.Fprintf(&b, "%.0fµs", us(d))
	}
	return b.String()
}

type sample struct {
	took  time.Duration
	late  time.Duration // open loop: the send's delay behind its schedule
	route string
	err   error
}

// load sends the bodies from c closed-loop clients and returns one sample
// each.
func load(ctx context.Context, client *http.Client, base string, bodies [][]byte, c, offset int) ([]sample, error) {
	n := len(bodies)
	out := make([]sample, n)
	var next atomic.Int64
	var wg sync.WaitGroup
	for range c {
		wg.Go(func() {
			for {
				i := int(next.Add(1) - 1)
				if i >= n || ctx.Err() != nil {
					return
				}
				out[i] = one(ctx, client, base, bodies[i], fmt.Sprintf("load-%d", i+offset), time.Now())
			}
		})
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("stopped by -timeout: %w", err)
	}
	return out, nil
}

// loadOpen sends the bodies at a fixed rate (request i scheduled at
// start + i/rate), whatever the answers, with at most maxInFlight in
// flight; a request that cannot start on time waits, and every latency
// counts from the scheduled send time.
func loadOpen(ctx context.Context, client *http.Client, base string, bodies [][]byte, rate float64, offset int) ([]sample, error) {
	n := len(bodies)
	out := make([]sample, n)
	interval := time.Duration(float64(time.Second) / rate)
	start := time.Now()
	sched := func(i int) time.Time { return start.Add(time.Duration(i) * interval) }
	jobs := make(chan int, n)
	var wg sync.WaitGroup
	for range maxInFlight {
		wg.Go(func() {
			for i := range jobs {
				if ctx.Err() != nil {
					continue
				}
				at := sched(i)
				late := max(time.Since(at), 0)
				out[i] = one(ctx, client, base, bodies[i], fmt.Sprintf("load-%d", i+offset), at)
				out[i].late = late
			}
		})
	}
	for i := 0; i < n && ctx.Err() == nil; {
		// Release every request whose time has come, then sleep until the
		// next one's.
		now := time.Now()
		for ; i < n && !sched(i).After(now); i++ {
			jobs <- i
		}
		if i < n {
			time.Sleep(time.Until(sched(i)))
		}
	}
	close(jobs)
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("stopped by -timeout: %w", err)
	}
	return out, nil
}

// one sends one request and times it from t0 (now, or its scheduled send
// time) to the last byte of the answer.
func one(ctx context.Context, client *http.Client, url string, body []byte, unit string, t0 time.Time) sample {
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, url+"/v1/chat/completions", bytes.NewReader(body))
	if err != nil {
		return sample{err: err}
	}
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set(gw.HeaderUnit, unit)
	resp, err := client.Do(req)
	if err != nil {
		return sample{err: err, took: time.Since(t0)}
	}
	_, err = io.Copy(io.Discard, resp.Body)
	resp.Body.Close()
	took := time.Since(t0)
	if err == nil && resp.StatusCode != http.StatusOK {
		err = errors.New(resp.Status)
	}
	return sample{took: took, route: resp.Header.Get(gw.HeaderRoute), err: err}
}

func stats(name string, s []sample, el, cpu time.Duration) Stats {
	st := Stats{Name: name, N: len(s), Elapsed: el, CPU: cpu, Routes: map[string]int{}}
	ts := make([]time.Duration, 0, len(s))
	late := make([]time.Duration, 0, len(s))
	for _, x := range s {
		if x.err != nil {
			st.Errors++
			continue
		}
		ts = append(ts, x.took)
		late = append(late, x.late)
		st.Routes[x.route]++
	}
	slices.Sort(ts)
	slices.Sort(late)
	if len(ts) > 0 {
		st.P50 = ts[len(ts)/2]
		st.P99 = ts[min(len(ts)-1, len(ts)*99/100)]
		st.Max = ts[len(ts)-1]
		st.Late = late[min(len(late)-1, len(late)*99/100)]
	}
	return st
}
