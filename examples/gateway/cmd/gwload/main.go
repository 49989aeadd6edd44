// Command gwload measures what routing adds to the gateway's latency: it
// starts the simulated model (answering at once) and two gateways in front
// of it on loopback, one routing and one with routing off (the same proxy,
// every request passed through), and sends the same chat requests to both
// from concurrent clients, in alternating rounds so that both see the same
// machine load. It prints p50, p99 and throughput of each, the p99 routing
// adds, and the errors.
//
//	cd examples/gateway
//	go run ./cmd/gwload                         # 20 000 requests, 32 clients
//	go run ./cmd/gwload -requests 2000 -clients 8
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
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
	"go.opentelemetry.io/otel/metric/noop"
	tnoop "go.opentelemetry.io/otel/trace/noop"
)

// Config configures Run.
type Config struct {
	Index    string // "" builds a greenhouse index in a temp dir
	Requests int    // per gateway
	Clients  int
	Rounds   int // alternating rounds per gateway
	// Distinct is the number of distinct questions (0: every request its
	// own); a small number lets the router's decision cache answer.
	Distinct int
	Timeout  time.Duration
	// Sim answers with the simulated model; false (the default of the
	// command) with one fixed completion, so that the upstream does the
	// same work whether or not the gateway added a plan.
	Sim bool
	// RouterOptions configure the routing gateway's router (the gateway's
	// -config); nil keeps the router's defaults.
	RouterOptions []router.Option
	Out           io.Writer
}

// Stats are one gateway's figures.
type Stats struct {
	Name          string
	N, Errors     int
	P50, P99, Max time.Duration
	Elapsed       time.Duration
	// CPU is the process CPU time (user + system) of the rounds: clients,
	// gateway and simulated model together, the same for both gateways
	// except for what routing does.
	CPU    time.Duration
	Routes map[string]int
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
	On, Off  Stats
	AddedP99 time.Duration // On.P99 − Off.P99
}

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
	flag.IntVar(&cfg.Requests, "requests", 20000, "requests per gateway")
	flag.IntVar(&cfg.Clients, "clients", 32, "concurrent clients")
	flag.IntVar(&cfg.Rounds, "rounds", 4, "alternating rounds per gateway")
	flag.IntVar(&cfg.Distinct, "distinct", 0, "distinct questions, repeated in turn (0: every request its own; small: decisions come from the router's cache)")
	flag.DurationVar(&cfg.Timeout, "timeout", 3*time.Minute, "stop after this long whatever is left")
	flag.BoolVar(&cfg.Sim, "sim", false, "answer with the simulated model (default: one fixed completion, the same work for both gateways)")
	prof := flag.String("cpuprofile", "", "write a CPU profile of the run to this file")
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
		if err := pprof.StartCPUProfile(f); err != nil {
			log.Fatalf("gwload: %v", err)
		}
		defer f.Close()
		defer pprof.StopCPUProfile()
	}
	res, err := Run(context.Background(), cfg)
	if err != nil {
		log.Fatalf("gwload: %v", err)
	}
	if res.On.Errors+res.Off.Errors > 0 {
		log.Printf("gwload: %d errors", res.On.Errors+res.Off.Errors)
	}
}

// Run measures both gateways and prints the table.
func Run(ctx context.Context, cfg Config) (*Result, error) {
	if cfg.Requests < cfg.Clients || cfg.Clients < 1 || cfg.Clients > 256 || cfg.Rounds < 1 || cfg.Requests > 1_000_000 {
		return nil, fmt.Errorf("need 1 ≤ clients ≤ 256, clients ≤ requests ≤ 1000000 and rounds ≥ 1 (got %d clients, %d requests, %d rounds)",
			cfg.Clients, cfg.Requests, cfg.Rounds)
	}
	if cfg.Timeout <= 0 {
		cfg.Timeout = 3 * time.Minute
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
	// Telemetry off on both sides (noop providers): the figure is the cost
	// of linking, deciding and rewriting the body, not of an exporter.
	tel, err := otelx.New(otelx.WithTracerProvider(tnoop.NewTracerProvider()), otelx.WithMeterProvider(noop.NewMeterProvider()))
	if err != nil {
		return nil, err
	}
	start := func(off bool) (*gw.Server, *httptest.Server, error) {
		s, err := gw.New(gw.Config{IndexPath: cfg.Index, Upstream: up.URL + "/v1", RoutingOff: off, Telemetry: tel, RouterOptions: cfg.RouterOptions,
			TracerProvider: tnoop.NewTracerProvider(), MeterProvider: noop.NewMeterProvider(),
			Logger: log.New(io.Discard, "", 0)})
		if err != nil {
			return nil, nil, err
		}
		return s, httptest.NewServer(s.Handler()), nil
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
	tr.MaxIdleConnsPerHost = cfg.Clients * 2
	tr.MaxIdleConns = cfg.Clients * 4
	client := &http.Client{Transport: tr}
	defer tr.CloseIdleConnections()
	// Warm both up (connections, page cache of the index) on questions
	// the measured run does not ask.
	warm := makeBodies(ix, min(cfg.Requests, 1000), 2)
	for _, h := range []*httptest.Server{hon, hoff} {
		if _, err := load(ctx, client, h.URL, warm, len(warm), cfg.Clients, 0); err != nil {
			return nil, err
		}
	}
	bodies := makeBodies(ix, cfg.Requests, 1)
	if cfg.Distinct > 0 && cfg.Distinct < len(bodies) {
		for i := cfg.Distinct; i < len(bodies); i++ {
			bodies[i] = bodies[i%cfg.Distinct]
		}
	}
	var on, off []sample
	var elOn, elOff, cpuOn, cpuOff time.Duration
	per := cfg.Requests / cfg.Rounds
	for r := range cfg.Rounds {
		lo, hi := r*per, (r+1)*per
		if r == cfg.Rounds-1 {
			hi = cfg.Requests
		}
		for _, side := range []bool{r%2 == 0, r%2 != 0} { // alternate which goes first
			h, dst, el := hoff, &off, &elOff
			if side {
				h, dst, el = hon, &on, &elOn
			}
			t0, c0 := time.Now(), cpuTime()
			s, err := load(ctx, client, h.URL, bodies[lo:hi], hi-lo, cfg.Clients, lo)
			*el += time.Since(t0)
			if side {
				cpuOn += cpuTime() - c0
			} else {
				cpuOff += cpuTime() - c0
			}
			if err != nil {
				return nil, err
			}
			*dst = append(*dst, s...)
		}
	}
	res := &Result{On: stats("routing on", on, elOn, cpuOn), Off: stats("routing off", off, elOff, cpuOff)}
	res.AddedP99 = res.On.P99 - res.Off.P99
	w := cfg.Out
	upName := "a fixed completion"
	if cfg.Sim {
		upName = "the simulated model"
	}
	distinct := "every question distinct"
	if cfg.Distinct > 0 {
		distinct = fmt.Sprintf("%d distinct questions repeated", cfg.Distinct)
	}
	fmt.Fprintf(w, "%d requests per gateway (questions from the index's names, %s, 1 in 10 linking nothing) from %d clients over loopback, %d alternating rounds; upstream: %s, at once; telemetry off\n\n",
		cfg.Requests, distinct, cfg.Clients, cfg.Rounds, upName)
	fmt.Fprintln(w, "gateway       requests  errors      p50       p99       max   req/s  CPU/request  routes")
	for _, s := range []Stats{res.Off, res.On} {
		fmt.Fprintf(w, "%-12s  %8d  %6d  %7.0fµs  %7.0fµs  %6.1fms  %6.0f  %9.0fµs  %v\n", s.Name, s.N, s.Errors,
			us(s.P50), us(s.P99), float64(s.Max.Microseconds())/1000, s.Throughput(), us(s.CPUPerRequest()), s.Routes)
	}
	fmt.Fprintf(w, "\nrouting adds %+.0fµs at p50 and %+.0fµs at p99 and %+.0fµs of CPU per request; throughput %.2f× the proxy without routing\n",
		us(res.On.P50-res.Off.P50), us(res.AddedP99), us(res.On.CPUPerRequest()-res.Off.CPUPerRequest()), res.On.Throughput()/res.Off.Throughput())
	return res, nil
}

func us(d time.Duration) float64 { return float64(d.Nanoseconds()) / 1000 }

type sample struct {
	took  time.Duration
	route string
	err   error
}

// load sends n requests from c clients and returns one sample each.
func load(ctx context.Context, client *http.Client, base string, bodies [][]byte, n, c, offset int) ([]sample, error) {
	out := make([]sample, n)
	var next atomic.Int64
	var wg sync.WaitGroup
	for range c {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i := int(next.Add(1) - 1)
				if i >= n || ctx.Err() != nil {
					return
				}
				out[i] = one(ctx, client, base, bodies[i], fmt.Sprintf("load-%d", i+offset))
			}
		}()
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("stopped by -timeout: %w", err)
	}
	return out, nil
}

func one(ctx context.Context, client *http.Client, url string, body []byte, unit string) sample {
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, url+"/v1/chat/completions", bytes.NewReader(body))
	if err != nil {
		return sample{err: err}
	}
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set(gw.HeaderUnit, unit)
	t0 := time.Now()
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
	for _, x := range s {
		if x.err != nil {
			st.Errors++
			continue
		}
		ts = append(ts, x.took)
		st.Routes[x.route]++
	}
	slices.Sort(ts)
	if len(ts) > 0 {
		st.P50 = ts[len(ts)/2]
		st.P99 = ts[min(len(ts)-1, len(ts)*99/100)]
		st.Max = ts[len(ts)-1]
	}
	return st
}
