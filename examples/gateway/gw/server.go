package gw

import (
	"context"
	"crypto/subtle"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"net/http"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	lru "github.com/hashicorp/golang-lru/v2"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
)

// Defaults of Config.
const (
	DefaultDecideTimeout  = 50 * time.Millisecond
	DefaultRequestTimeout = 5 * time.Second
	DefaultMaxBodyBytes   = 64 << 10
	// MaxNameBytes bounds from, value, to and key in a request.
	MaxNameBytes = graphidx.MaxNameBytes
)

// ReasonDecideTimeout is the route reason of a request whose routing
// decision missed Config.DecideTimeout: it is answered directly.
const ReasonDecideTimeout = "decide-timeout"

// Config configures New.
type Config struct {
	// IndexPath is the locality index file; /admin/reload-index reopens it.
	IndexPath string
	// RouterOptions configure the router (thresholds, arms, exploration).
	RouterOptions []router.Option
	// Answerer answers routed queries; nil uses a Sim over its own handle of
	// the index, with SimOptions.
	Answerer   Answerer
	SimOptions SimOptions
	// Telemetry traces and measures decisions; nil uses otelx.New() over the
	// global OpenTelemetry providers.
	Telemetry *otelx.Instrumentation
	// DecideTimeout bounds the routing decision (default 50 ms);
	// RequestTimeout bounds a whole /v1/answer request (default 5 s).
	DecideTimeout, RequestTimeout time.Duration
	// MaxBodyBytes bounds a request body (default 64 KiB).
	MaxBodyBytes int64
	// AdminToken, when set, is required as "Authorization: Bearer <token>"
	// on /admin/ endpoints.
	AdminToken string
	// FeedbackSize is the number of recent keyed decisions kept for
	// POST /v1/feedback (default 100 000; the oldest are forgotten first).
	FeedbackSize int
}

// DefaultFeedbackSize is the default of Config.FeedbackSize.
const DefaultFeedbackSize = 100_000

// pending is a keyed decision awaiting its outcome.
type pending struct {
	d       router.Decision
	in, out int64
	latency time.Duration
}

// Server is the gateway: router + answerer behind an HTTP API.
type Server struct {
	cfg      Config
	rt       *router.Router
	tel      *otelx.Instrumentation
	ans      Answerer
	ownsSim  bool
	reloadMu sync.Mutex
	reloads  atomic.Int64
	started  time.Time
	mux      *http.ServeMux
	recent   *lru.Cache[string, pending]
}

// New opens the index and returns a Server. Close releases it.
func New(cfg Config) (*Server, error) {
	if cfg.IndexPath == "" {
		return nil, errors.New("gw: Config.IndexPath is empty")
	}
	if cfg.DecideTimeout == 0 {
		cfg.DecideTimeout = DefaultDecideTimeout
	}
	if cfg.RequestTimeout == 0 {
		cfg.RequestTimeout = DefaultRequestTimeout
	}
	if cfg.MaxBodyBytes == 0 {
		cfg.MaxBodyBytes = DefaultMaxBodyBytes
	}
	if cfg.DecideTimeout < 0 || cfg.RequestTimeout < 0 || cfg.MaxBodyBytes < 0 {
		return nil, errors.New("gw: timeouts and body limit must be ≥ 0")
	}
	if cfg.FeedbackSize == 0 {
		cfg.FeedbackSize = DefaultFeedbackSize
	}
	if cfg.FeedbackSize < 0 {
		return nil, errors.New("gw: FeedbackSize must be ≥ 0")
	}
	s := &Server{cfg: cfg, tel: cfg.Telemetry, ans: cfg.Answerer, started: time.Now()}
	var err error
	if s.recent, err = lru.New[string, pending](cfg.FeedbackSize); err != nil {
		return nil, fmt.Errorf("gw: %w", err)
	}
	if s.tel == nil {
		if s.tel, err = otelx.New(); err != nil {
			return nil, fmt.Errorf("gw: %w", err)
		}
	}
	idx, err := graphidx.Open(cfg.IndexPath)
	if err != nil {
		return nil, fmt.Errorf("gw: %w", err)
	}
	if s.rt, err = router.New(idx, cfg.RouterOptions...); err != nil {
		idx.Close()
		return nil, fmt.Errorf("gw: %w", err)
	}
	if s.ans == nil {
		idx2, err := graphidx.Open(cfg.IndexPath)
		if err != nil {
			s.rt.Close()
			return nil, fmt.Errorf("gw: %w", err)
		}
		sim, err := NewSim(idx2, cfg.SimOptions)
		if err != nil {
			idx2.Close()
			s.rt.Close()
			return nil, err
		}
		s.ans, s.ownsSim = sim, true
	}
	s.mux = http.NewServeMux()
	s.mux.HandleFunc("POST /v1/answer", s.handleAnswer)
	s.mux.HandleFunc("/v1/answer", methodNotAllowed("POST"))
	s.mux.HandleFunc("POST /v1/feedback", s.handleFeedback)
	s.mux.HandleFunc("/v1/feedback", methodNotAllowed("POST"))
	s.mux.HandleFunc("GET /healthz", s.handleHealth)
	s.mux.HandleFunc("/healthz", methodNotAllowed("GET"))
	s.mux.HandleFunc("POST /admin/reload-index", s.admin(s.handleReload))
	s.mux.HandleFunc("/admin/reload-index", methodNotAllowed("POST"))
	s.mux.HandleFunc("/", func(w http.ResponseWriter, r *http.Request) {
		writeError(w, http.StatusNotFound, "not_found", fmt.Sprintf("no endpoint %s %s", r.Method, r.URL.Path))
	})
	return s, nil
}

// Handler returns the HTTP handler of the API.
func (s *Server) Handler() http.Handler { return s.mux }

// Router returns the embedded router (for example to Reconfigure it).
func (s *Server) Router() *router.Router { return s.rt }

// Close stops the router and releases the indexes. In-flight requests
// finish on the index they hold.
func (s *Server) Close() error {
	err := s.rt.Close()
	if sw, ok := s.ans.(IndexSwapper); ok && s.ownsSim {
		if c, ok := sw.SwapIndex(nil).(io.Closer); ok {
			if e := c.Close(); err == nil {
				err = e
			}
		}
	}
	return err
}

// AskRequest is the body of POST /v1/answer.
type AskRequest struct {
	From  string `json:"from"`
	Value string `json:"value"`
	To    string `json:"to"`
	Key   string `json:"key,omitempty"`
}

// AskResponse is the reply of POST /v1/answer.
type AskResponse struct {
	Key       string           `json:"key"`
	Answer    AnswerJSON       `json:"answer"`
	Route     RouteJSON        `json:"route"`
	Usage     UsageJSON        `json:"usage"`
	ElapsedMs float64          `json:"elapsed_ms"`
	Decision  *router.Decision `json:"-"`
}

// AnswerJSON is the answer part of AskResponse.
type AnswerJSON struct {
	Value        string             `json:"value"`
	Distribution map[string]float64 `json:"distribution"`
	Steps        []StepJSON         `json:"steps,omitempty"`
}

// StepJSON is one chain step of AnswerJSON.
type StepJSON struct {
	Entity       string             `json:"entity"`
	Distribution map[string]float64 `json:"distribution"`
}

// RouteJSON explains the routing decision.
type RouteJSON struct {
	Mode        string   `json:"mode"`
	Bridges     []string `json:"bridges,omitempty"`
	Reason      string   `json:"reason"`
	Explanation string   `json:"explanation"`
	Gain        float64  `json:"gain"`
	DirectErr   float64  `json:"direct_error"`
	ChainErr    *float64 `json:"chain_error,omitempty"`
	Support     uint64   `json:"support"`
	Arm         string   `json:"arm,omitempty"`
	Propensity  float64  `json:"propensity"`
	Explored    bool     `json:"explored"`
	Truncated   bool     `json:"truncated"`
	Cached      bool     `json:"cached"`
	Generation  string   `json:"generation"`
}

// UsageJSON is the answerer's token usage.
type UsageJSON struct {
	InputTokens  int64 `json:"input_tokens"`
	OutputTokens int64 `json:"output_tokens"`
}

// RequestError is a client error with its HTTP status and stable code.
type RequestError struct {
	Status int
	Code   string
	Msg    string
}

func (e *RequestError) Error() string { return e.Msg }

func badRequest(code, format string, a ...any) *RequestError {
	return &RequestError{Status: http.StatusBadRequest, Code: code, Msg: fmt.Sprintf(format, a...)}
}

// Validate checks an AskRequest's fields.
func (q AskRequest) Validate() error {
	for _, f := range []struct{ name, v string }{{"from", q.From}, {"value", q.Value}, {"to", q.To}} {
		if f.v == "" {
			return badRequest("missing_field", "field %q is required", f.name)
		}
	}
	for _, f := range []struct{ name, v string }{{"from", q.From}, {"value", q.Value}, {"to", q.To}, {"key", q.Key}} {
		if len(f.v) > MaxNameBytes {
			return badRequest("field_too_long", "field %q is %d bytes, the limit is %d", f.name, len(f.v), MaxNameBytes)
		}
	}
	return nil
}

// Ask routes and answers one request: the in-process form of POST /v1/answer.
// Errors are *RequestError for client mistakes and timeouts.
func (s *Server) Ask(ctx context.Context, q AskRequest) (AskResponse, error) {
	start := time.Now()
	if err := q.Validate(); err != nil {
		return AskResponse{}, err
	}
	ctx, cancel := context.WithTimeout(ctx, s.cfg.RequestTimeout)
	defer cancel()
	dctx, dcancel := context.WithTimeout(ctx, s.cfg.DecideTimeout)
	rq := router.Query{From: q.From, Value: q.Value, To: q.To, Key: q.Key}
	d, err := s.tel.Decide(dctx, s.rt, rq)
	dcancel()
	if err != nil {
		if !errors.Is(err, context.DeadlineExceeded) || ctx.Err() != nil {
			return AskResponse{}, classify(err)
		}
		// The decide deadline passed before the search could start (one
		// reached during the search only truncates it): degrade to the
		// cheap direct answer rather than fail the request.
		d = router.Decision{Mode: router.ModeDirect, Key: q.Key, Propensity: 1, Generation: s.rt.Generation(),
			Reason: router.Reason{Code: ReasonDecideTimeout, Text: fmt.Sprintf("no routing decision within %v; answered directly", s.cfg.DecideTimeout)}}
	}
	a, err := s.ans.Answer(ctx, Request{Query: rq, Mode: d.Mode, Bridges: d.Bridges})
	if err != nil {
		return AskResponse{}, classify(err)
	}
	if len(a.Dist) != len(a.Values) {
		return AskResponse{}, fmt.Errorf("gw: answerer returned %d probabilities for %d values", len(a.Dist), len(a.Values))
	}
	resp := AskResponse{
		Key:    d.Key,
		Answer: AnswerJSON{Value: a.Value(), Distribution: distMap(a.Values, a.Dist)},
		Route: RouteJSON{
			Mode: d.Mode.String(), Bridges: d.Bridges, Reason: d.Reason.Code, Explanation: d.Reason.Text,
			Gain: d.Gain, DirectErr: d.Direct.Err, Support: d.Direct.Support, Arm: d.Arm,
			Propensity: d.Propensity, Explored: d.Explored, Truncated: d.Truncated, Cached: d.Cached,
			Generation: fmt.Sprintf("%016x", d.Generation),
		},
		Usage:    UsageJSON{InputTokens: a.InputTokens, OutputTokens: a.OutputTokens},
		Decision: &d,
	}
	if resp.Key == "" {
		resp.Key = q.Key
	}
	if d.Chain != nil {
		e := d.Chain.Err
		resp.Route.ChainErr = &e
	}
	for _, st := range a.Steps {
		resp.Answer.Steps = append(resp.Answer.Steps, StepJSON{Entity: st.Entity, Distribution: distMap(st.Values, st.Dist)})
	}
	el := time.Since(start)
	resp.ElapsedMs = float64(el.Microseconds()) / 1000
	if d.Key != "" && q.Key != "" {
		s.recent.Add(d.Key, pending{d: d, in: a.InputTokens, out: a.OutputTokens, latency: el})
	}
	return resp, nil
}

// FeedbackRequest is the body of POST /v1/feedback: the outcome of an
// earlier /v1/answer call with the same key.
type FeedbackRequest struct {
	Key   string   `json:"key"`
	Score *float64 `json:"score"`
	// Optional overrides of what the gateway measured itself.
	InputTokens  *int64   `json:"input_tokens,omitempty"`
	OutputTokens *int64   `json:"output_tokens,omitempty"`
	LatencyMs    *float64 `json:"latency_ms,omitempty"`
}

// Feedback records the outcome of the decision made for req.Key as a
// hopwise.outcome span joined to the decision by key (otelx.RecordOutcome).
// Tokens and latency default to what the gateway measured for that request.
// Each decision takes one outcome: the key is forgotten afterwards.
func (s *Server) Feedback(ctx context.Context, req FeedbackRequest) error {
	if req.Key == "" {
		return badRequest("missing_field", "field %q is required", "key")
	}
	if req.Score == nil {
		return badRequest("missing_field", "field %q is required", "score")
	}
	if sc := *req.Score; !(sc >= 0 && sc <= 1) {
		return badRequest("invalid_field", "field %q must be in [0, 1], got %v", "score", sc)
	}
	p, ok := s.recent.Peek(req.Key)
	if !ok {
		return &RequestError{http.StatusNotFound, "unknown_key", fmt.Sprintf("no recent decision with key %q (already reported, forgotten, or never keyed)", req.Key)}
	}
	o := otelx.Outcome{Score: *req.Score, InputTokens: p.in, OutputTokens: p.out, Latency: p.latency}
	if req.InputTokens != nil {
		o.InputTokens = *req.InputTokens
	}
	if req.OutputTokens != nil {
		o.OutputTokens = *req.OutputTokens
	}
	if req.LatencyMs != nil {
		if *req.LatencyMs < 0 || math.IsNaN(*req.LatencyMs) || math.IsInf(*req.LatencyMs, 0) {
			return badRequest("invalid_field", "field %q must be a finite number ≥ 0", "latency_ms")
		}
		o.Latency = time.Duration(*req.LatencyMs * float64(time.Millisecond))
	}
	if o.InputTokens < 0 || o.OutputTokens < 0 {
		return badRequest("invalid_field", "token counts must be ≥ 0")
	}
	// Remove before recording: of two concurrent reports for one key, only
	// the one whose Remove finds it records.
	if !s.recent.Remove(req.Key) {
		return &RequestError{http.StatusNotFound, "unknown_key", fmt.Sprintf("no recent decision with key %q (already reported)", req.Key)}
	}
	if err := s.tel.RecordOutcome(ctx, p.d, o); err != nil {
		if errors.Is(err, otelx.ErrBadOutcome) {
			return badRequest("invalid_field", "%v", err)
		}
		return err
	}
	return nil
}

func (s *Server) handleFeedback(w http.ResponseWriter, r *http.Request) {
	var q FeedbackRequest
	if err := decodeBody(w, r, s.cfg.MaxBodyBytes, &q); err != nil {
		writeErr(w, err)
		return
	}
	if err := s.Feedback(r.Context(), q); err != nil {
		writeErr(w, err)
		return
	}
	writeJSON(w, http.StatusOK, map[string]string{"status": "recorded", "key": q.Key})
}

func distMap(values []string, dist []float64) map[string]float64 {
	m := make(map[string]float64, len(values))
	for i, v := range values {
		if i < len(dist) {
			m[v] = dist[i]
		}
	}
	return m
}

// classify maps router, answerer and context errors to request errors.
func classify(err error) error {
	var re *RequestError
	switch {
	case errors.As(err, &re):
		return re
	case errors.Is(err, router.ErrSameEntity):
		return &RequestError{http.StatusBadRequest, "same_entity", err.Error()}
	case errors.Is(err, router.ErrUnknownEntity):
		return &RequestError{http.StatusUnprocessableEntity, "unknown_entity", err.Error()}
	case errors.Is(err, router.ErrUnknownValue):
		return &RequestError{http.StatusUnprocessableEntity, "unknown_value", err.Error()}
	case errors.Is(err, ErrUnknown):
		return &RequestError{http.StatusUnprocessableEntity, "unknown_entity", err.Error()}
	case errors.Is(err, router.ErrClosed):
		return &RequestError{http.StatusServiceUnavailable, "closed", "the gateway is shutting down"}
	case errors.Is(err, context.DeadlineExceeded):
		return &RequestError{http.StatusGatewayTimeout, "timeout", "the request timed out: " + err.Error()}
	case errors.Is(err, context.Canceled):
		return &RequestError{499, "canceled", "the request was cancelled"}
	}
	return err
}

func (s *Server) handleAnswer(w http.ResponseWriter, r *http.Request) {
	var q AskRequest
	if err := decodeBody(w, r, s.cfg.MaxBodyBytes, &q); err != nil {
		writeErr(w, err)
		return
	}
	resp, err := s.Ask(r.Context(), q)
	if err != nil {
		writeErr(w, err)
		return
	}
	writeJSON(w, http.StatusOK, resp)
}

func (s *Server) handleHealth(w http.ResponseWriter, _ *http.Request) {
	g := s.rt.Generation()
	status, code := "ok", http.StatusOK
	if g == 0 {
		status, code = "closed", http.StatusServiceUnavailable
	}
	writeJSON(w, code, map[string]any{
		"status": status, "generation": fmt.Sprintf("%016x", g), "reloads": s.reloads.Load(),
		"uptime_seconds": time.Since(s.started).Seconds(),
	})
}

// Reload reopens the index file and swaps it in: the router's handle via
// Router.Swap, and a fresh handle for the answerer when it implements
// IndexSwapper. It returns the previous and the new generation.
func (s *Server) Reload() (prev, cur uint64, err error) {
	s.reloadMu.Lock()
	defer s.reloadMu.Unlock()
	prev = s.rt.Generation()
	idx, err := graphidx.Open(s.cfg.IndexPath)
	if err != nil {
		return prev, prev, err
	}
	var idx2 *graphidx.Index
	sw, swaps := s.ans.(IndexSwapper)
	if swaps {
		if idx2, err = graphidx.Open(s.cfg.IndexPath); err != nil {
			idx.Close()
			return prev, prev, err
		}
	}
	if err := s.rt.Swap(idx); err != nil {
		idx.Close()
		if idx2 != nil {
			idx2.Close()
		}
		return prev, prev, err
	}
	if swaps {
		if c, ok := sw.SwapIndex(idx2).(io.Closer); ok {
			_ = c.Close() // no call uses it any more (IndexSwapper contract)
		}
	}
	s.reloads.Add(1)
	return prev, s.rt.Generation(), nil
}

func (s *Server) handleReload(w http.ResponseWriter, r *http.Request) {
	prev, cur, err := s.Reload()
	if err != nil {
		code := "reload_failed"
		if graphidx.IsCorruption(err) {
			code = "index_corrupt"
		}
		writeError(w, http.StatusInternalServerError, code, err.Error())
		return
	}
	writeJSON(w, http.StatusOK, map[string]any{
		"status": "reloaded", "generation": fmt.Sprintf("%016x", cur), "previous_generation": fmt.Sprintf("%016x", prev),
	})
}

func (s *Server) admin(h http.HandlerFunc) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		if s.cfg.AdminToken != "" {
			got, ok := strings.CutPrefix(r.Header.Get("Authorization"), "Bearer ")
			if !ok || subtle.ConstantTimeCompare([]byte(got), []byte(s.cfg.AdminToken)) != 1 {
				writeError(w, http.StatusUnauthorized, "unauthorized", "admin endpoints need Authorization: Bearer <token>")
				return
			}
		}
		h(w, r)
	}
}

func methodNotAllowed(allow string) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Allow", allow)
		writeError(w, http.StatusMethodNotAllowed, "method_not_allowed", fmt.Sprintf("%s %s: use %s", r.Method, r.URL.Path, allow))
	}
}

// decodeBody reads one JSON object whatever the Content-Type (so plain
// `curl -d` works): unknown fields, trailing data and bodies
// over limit are errors that name the problem.
func decodeBody(w http.ResponseWriter, r *http.Request, limit int64, v any) error {
	dec := json.NewDecoder(http.MaxBytesReader(w, r.Body, limit))
	dec.DisallowUnknownFields()
	err := dec.Decode(v)
	if err == nil {
		// Only whitespace may follow the object.
		if _, terr := dec.Token(); terr == nil {
			err = errors.New("trailing data after the JSON object")
		} else if !errors.Is(terr, io.EOF) {
			err = terr
		}
	}
	if err == nil {
		return nil
	}
	var mbe *http.MaxBytesError
	var se *json.SyntaxError
	var te *json.UnmarshalTypeError
	switch {
	case errors.As(err, &mbe):
		return &RequestError{http.StatusRequestEntityTooLarge, "body_too_large", fmt.Sprintf("request body over %d bytes", mbe.Limit)}
	case errors.Is(err, io.EOF):
		return badRequest("empty_body", "request body is empty; send a JSON object")
	case errors.As(err, &se):
		return badRequest("invalid_json", "malformed JSON at byte %d: %v", se.Offset, err)
	case errors.As(err, &te):
		return badRequest("invalid_field", "field %q must be a %s, got %s", te.Field, te.Type, te.Value)
	case errors.Is(err, io.ErrUnexpectedEOF):
		return badRequest("invalid_json", "truncated JSON body")
	}
	return badRequest("invalid_json", "%v", err)
}

type errorBody struct {
	Error struct {
		Code    string `json:"code"`
		Message string `json:"message"`
	} `json:"error"`
}

func writeErr(w http.ResponseWriter, err error) {
	var re *RequestError
	if errors.As(err, &re) {
		writeError(w, re.Status, re.Code, re.Msg)
		return
	}
	writeError(w, http.StatusInternalServerError, "internal", err.Error())
}

func writeError(w http.ResponseWriter, status int, code, msg string) {
	var b errorBody
	b.Error.Code, b.Error.Message = code, msg
	writeJSON(w, status, b)
}

func writeJSON(w http.ResponseWriter, status int, v any) {
	w.Header().Set("Content-Type", "application/json")
	w.WriteHeader(status)
	_ = json.NewEncoder(w).Encode(v)
}
