package gw

import (
	"errors"
	"fmt"
	"log"
	"net/http"
	"net/url"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	lru "github.com/hashicorp/golang-lru/v2"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/router/plan"
	"go.opentelemetry.io/otel"
	"go.opentelemetry.io/otel/metric"
	"go.opentelemetry.io/otel/trace"
)

// Defaults of Config.
const (
	DefaultDecideTimeout    = 50 * time.Millisecond
	DefaultUpstreamTimeout  = 60 * time.Second
	DefaultBodyTimeout      = 10 * time.Second
	DefaultMaxBodyBytes     = 1 << 20
	DefaultMaxResponseBytes = 16 << 20
	DefaultOutcomeSize      = 100_000
	// MaxUnitBytes bounds the unit key (the Hopwise-Unit header and the
	// outcome's "unit").
	MaxUnitBytes = 128
	// MaxNameBytes bounds from, value and to of POST /v1/route.
	MaxNameBytes = graphidx.MaxNameBytes
)

// Outcome bounds: larger values are rejected, naming the field. The token
// bound keeps any sum of up to a million outcomes inside int64.
const (
	MaxOutcomeTokens    = 1_000_000_000_000 // 10¹² tokens per request
	MaxOutcomeLatencyMs = 86_400_000        // one day
)

// Headers the gateway reads and writes.
const (
	// HeaderUnit carries the unit key: the A/B unit and the join key of
	// POST /v1/outcomes.
	HeaderUnit = "Hopwise-Unit"
	// HeaderRoute tells the client how the request was routed: chain,
	// direct or pass.
	HeaderRoute = "Hopwise-Route"
	// HeaderReason is the route's reason code (a router reason, a Pass*
	// code, or ReasonDecideTimeout).
	HeaderReason = "Hopwise-Reason"
	// HeaderArm is the A/B arm of the unit, when arms are configured.
	HeaderArm = "Hopwise-Arm"
)

// ValidUpstream reports whether raw is what Config.Upstream takes: an
// absolute http or https URL with a host (the base the chat-completions
// path is appended to).
func ValidUpstream(raw string) bool {
	u, err := url.Parse(raw)
	return err == nil && (u.Scheme == "http" || u.Scheme == "https") && u.Host != ""
}

// ErrBadConfig is returned by New for a Config it cannot run with; the
// message names the field (IndexPath, Upstream, a negative timeout or
// size).
var ErrBadConfig = errors.New("gw: bad config")

// ReasonDecideTimeout is the route reason of a request whose routing
// decision missed Config.DecideTimeout: it is forwarded with the direct
// instruction.
const ReasonDecideTimeout = "decide-timeout"

// Config configures New.
type Config struct {
	// IndexPath is the locality index file; /admin/reload-index reopens it.
	IndexPath string
	// LexiconPath is a lexicon TSV (surface form<TAB>entity id) for linking
	// prompts; "" links the index's entity names as written.
	LexiconPath string
	// RouterOptions configure the router (thresholds, arms, exploration).
	RouterOptions []router.Option
	// Upstream is the base URL of the model server, e.g.
	// http://127.0.0.1:9000/v1; requests go to Upstream + "/chat/completions".
	Upstream string
	// UpstreamAuth, when set, replaces the client's Authorization header
	// towards the upstream ("Bearer …").
	UpstreamAuth string
	// Transport carries upstream requests (default: a clone of
	// http.DefaultTransport with more idle connections per host).
	Transport http.RoundTripper
	// RoutingOff forwards every request untouched (reason routing-off):
	// the same proxy without routing, for comparisons.
	RoutingOff bool
	// Former and Renderer form the query and the instruction; nil uses
	// TextFormer and PlanRenderer (router/plan's default templates).
	Former   Former
	Renderer Renderer
	// Telemetry traces decisions and outcomes; nil uses otelx.New() over the
	// global providers. TracerProvider and MeterProvider carry the
	// gateway's own model-call spans and metrics (nil: the otel globals).
	Telemetry      *otelx.Instrumentation
	TracerProvider trace.TracerProvider
	MeterProvider  metric.MeterProvider
	// ProviderName, when set, is recorded as gen_ai.provider.name.
	ProviderName string
	// DecideTimeout bounds the routing decision, and the linking of the
	// prompt before it (each; default 50 ms);
	// UpstreamTimeout the whole upstream exchange, streaming included
	// (default 60 s); BodyTimeout the reading of a request body (default
	// 10 s; a slower body gets 408).
	DecideTimeout, UpstreamTimeout, BodyTimeout time.Duration
	// MaxBodyBytes bounds a request body (default 1 MiB);
	// MaxResponseBytes a non-streamed upstream response and one SSE line
	// (default 16 MiB).
	MaxBodyBytes, MaxResponseBytes int64
	// AdminToken, when set, is required as "Authorization: Bearer <token>"
	// on /admin/ routes. Without it the admin routes answer only when
	// AdminOpenOnLoopback is set (the command sets it when it listens on a
	// loopback address) and the caller is on loopback; otherwise 403.
	AdminToken          string
	AdminOpenOnLoopback bool
	// OutcomeSize is the number of recent routed requests kept for
	// POST /v1/outcomes (default 100 000; the oldest are forgotten first).
	OutcomeSize int
	// PlanCacheSize is the number of rendered instructions the built-in
	// renderer keeps (PlanCache; default DefaultPlanCacheSize, negative:
	// none). A custom Renderer is never cached.
	PlanCacheSize int
	// Metrics, when set, is served on GET /metrics.
	Metrics http.Handler
	// Logger receives failed admin logins (rate-limited) and upstream
	// faults; nil uses log.Default().
	Logger *log.Logger
}

// pending is a routed request awaiting its outcome.
type pending struct {
	d                   router.Decision
	in, out             int64
	latency             time.Duration
	reqModel, respModel string
}

// linker is the index-dependent part of the request path, swapped whole
// on reload.
type linker struct {
	former   Former
	renderer Renderer
	vocab    *graphidx.Index // nil when Former and Renderer were given
}

// Server is the gateway: linking, routing and the reverse proxy.
type Server struct {
	cfg      Config
	rt       *router.Router
	tel      *otelx.Instrumentation
	upstream string // Upstream + "/chat/completions"
	client   *http.Client
	log      *log.Logger

	lmu sync.RWMutex // guards lk against reload
	lk  linker

	reloadMu sync.Mutex
	reloads  atomic.Int64
	started  time.Time
	mux      *http.ServeMux
	recent   *lru.Cache[string, pending]
	authFail *failLimiter
	ins      *instruments
	planR    *plan.Renderer
}

// New opens the index, builds the router and returns a Server. Close
// releases them.
func New(cfg Config) (*Server, error) {
	if cfg.IndexPath == "" {
		return nil, fmt.Errorf("%w: IndexPath is empty", ErrBadConfig)
	}
	if !ValidUpstream(cfg.Upstream) {
		return nil, fmt.Errorf("%w: Upstream %q is not an http or https base URL", ErrBadConfig, cfg.Upstream)
	}
	for _, f := range []struct {
		name string
		v    int64
		unit time.Duration // non-zero for durations
	}{
		{"DecideTimeout", int64(cfg.DecideTimeout), 1}, {"UpstreamTimeout", int64(cfg.UpstreamTimeout), 1},
		{"BodyTimeout", int64(cfg.BodyTimeout), 1}, {"MaxBodyBytes", cfg.MaxBodyBytes, 0},
		{"MaxResponseBytes", cfg.MaxResponseBytes, 0}, {"OutcomeSize", int64(cfg.OutcomeSize), 0},
	} {
		if f.v < 0 {
			shown := fmt.Sprint(f.v)
			if f.unit != 0 {
				shown = time.Duration(f.v).String()
			}
			return nil, fmt.Errorf("%w: %s is %s; want ≥ 0 (0: the default)", ErrBadConfig, f.name, shown)
		}
	}
	def := func(p *time.Duration, v time.Duration) {
		if *p == 0 {
			*p = v
		}
	}
	def(&cfg.DecideTimeout, DefaultDecideTimeout)
	def(&cfg.UpstreamTimeout, DefaultUpstreamTimeout)
	def(&cfg.BodyTimeout, DefaultBodyTimeout)
	if cfg.MaxBodyBytes == 0 {
		cfg.MaxBodyBytes = DefaultMaxBodyBytes
	}
	if cfg.MaxResponseBytes == 0 {
		cfg.MaxResponseBytes = DefaultMaxResponseBytes
	}
	if cfg.OutcomeSize == 0 {
		cfg.OutcomeSize = DefaultOutcomeSize
	}
	if cfg.PlanCacheSize == 0 {
		cfg.PlanCacheSize = DefaultPlanCacheSize
	}
	s := &Server{cfg: cfg, tel: cfg.Telemetry, started: time.Now(), log: cfg.Logger,
		upstream: strings.TrimSuffix(cfg.Upstream, "/") + "/chat/completions", authFail: newFailLimiter(5, time.Minute)}
	if s.log == nil {
		s.log = log.Default()
	}
	tr := cfg.Transport
	if tr == nil {
		t := http.DefaultTransport.(*http.Transport).Clone()
		t.MaxIdleConnsPerHost = 256
		t.MaxIdleConns = 256
		tr = t
	}
	s.client = &http.Client{Transport: tr, CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}
	var err error
	if s.recent, err = lru.New[string, pending](max(cfg.OutcomeSize, 1)); err != nil {
		return nil, fmt.Errorf("gw: %w", err)
	}
	if s.tel == nil {
		if s.tel, err = otelx.New(); err != nil {
			return nil, fmt.Errorf("gw: %w", err)
		}
	}
	tp, mp := cfg.TracerProvider, cfg.MeterProvider
	if tp == nil {
		tp = otel.GetTracerProvider()
	}
	if mp == nil {
		mp = otel.GetMeterProvider()
	}
	if s.ins, err = newInstruments(tp, mp, cfg.ProviderName); err != nil {
		return nil, fmt.Errorf("gw: %w", err)
	}
	idx, err := graphidx.Open(cfg.IndexPath)
	if err != nil {
		return nil, fmt.Errorf("gw: %w", err)
	}
	if s.rt, err = router.New(idx, cfg.RouterOptions...); err != nil {
		idx.Close()
		return nil, fmt.Errorf("gw: %w", err)
	}
	if s.planR, err = plan.NewRenderer(); err != nil {
		s.rt.Close()
		return nil, fmt.Errorf("gw: %w", err)
	}
	if s.lk, err = s.openLinker(); err != nil {
		s.rt.Close()
		return nil, err
	}
	s.routes()
	return s, nil
}

// openLinker opens the vocabulary handle and the lexicon for the current
// index file (or takes the configured Former and Renderer).
func (s *Server) openLinker() (linker, error) {
	if s.cfg.Former != nil && s.cfg.Renderer != nil {
		return linker{former: s.cfg.Former, renderer: s.cfg.Renderer}, nil
	}
	ix, err := graphidx.Open(s.cfg.IndexPath)
	if err != nil {
		return linker{}, fmt.Errorf("gw: %w", err)
	}
	var lex *graphidx.Lexicon
	if s.cfg.LexiconPath != "" {
		lex, err = graphidx.LoadLexicon(s.cfg.LexiconPath)
	} else {
		lex, err = IndexLexicon(ix)
	}
	if err != nil {
		ix.Close()
		return linker{}, fmt.Errorf("gw: lexicon: %w", err)
	}
	lk := linker{former: s.cfg.Former, renderer: s.cfg.Renderer, vocab: ix}
	if lk.former == nil {
		lk.former = TextFormer{Lex: lex, Router: s.rt, Vocab: ix}
	}
	if lk.renderer == nil {
		pr := PlanRenderer{Router: s.rt, Namer: lex, Renderer: s.planR}
		if s.cfg.PlanCacheSize > 0 { // a new cache with each lexicon
			if pr.Cache, err = NewPlanCache(s.cfg.PlanCacheSize); err != nil {
				ix.Close()
				return linker{}, fmt.Errorf("gw: %w", err)
			}
		}
		lk.renderer = pr
	}
	return lk, nil
}

func (s *Server) routes() {
	s.mux = http.NewServeMux()
	handle := func(method, path string, h http.HandlerFunc) {
		s.mux.HandleFunc(method+" "+path, h)
		s.mux.HandleFunc(path, methodNotAllowed(method))
	}
	handle("POST", "/v1/chat/completions", s.handleChat)
	handle("POST", "/v1/outcomes", s.handleOutcome)
	handle("POST", "/v1/route", s.handleRoute)
	handle("GET", "/healthz", s.handleHealth)
	handle("POST", "/admin/reload-index", s.admin(s.handleReload))
	if s.cfg.Metrics != nil {
		handle("GET", "/metrics", s.cfg.Metrics.ServeHTTP)
	}
	s.mux.HandleFunc("/", func(w http.ResponseWriter, r *http.Request) {
		writeError(w, http.StatusNotFound, "not_found", "no such endpoint")
	})
}

// Handler returns the HTTP handler of the gateway.
func (s *Server) Handler() http.Handler { return s.mux }

// Router returns the embedded router (for example to Reconfigure it).
func (s *Server) Router() *router.Router { return s.rt }

// Close stops the router and releases the indexes. In-flight requests
// finish on the index they hold.
func (s *Server) Close() error {
	err := s.rt.Close()
	s.lmu.Lock()
	defer s.lmu.Unlock()
	if s.lk.vocab != nil {
		if e := s.lk.vocab.Close(); err == nil {
			err = e
		}
		s.lk.vocab = nil
	}
	return err
}

// Reload reopens the index file and swaps it in: the router's handle via
// Router.Swap, and the linker's vocabulary and lexicon. It returns the
// previous and the new generation.
func (s *Server) Reload() (prev, cur uint64, err error) {
	s.reloadMu.Lock()
	defer s.reloadMu.Unlock()
	prev = s.rt.Generation()
	idx, err := graphidx.Open(s.cfg.IndexPath)
	if err != nil {
		return prev, prev, err
	}
	lk, err := s.openLinker()
	if err != nil {
		idx.Close()
		return prev, prev, err
	}
	if err := s.rt.Swap(idx); err != nil {
		idx.Close()
		if lk.vocab != nil {
			lk.vocab.Close()
		}
		return prev, prev, err
	}
	s.lmu.Lock()
	old := s.lk
	s.lk = lk
	s.lmu.Unlock()
	if old.vocab != nil {
		old.vocab.Close() // no request holds it: they hold lmu while using it
	}
	s.reloads.Add(1)
	return prev, s.rt.Generation(), nil
}
