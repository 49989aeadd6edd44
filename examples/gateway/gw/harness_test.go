package gw_test

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"log"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/examples/gateway/simmodel"
	"github.com/hopwise/hopwise/examples/internal/ghtest"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/otelx"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/sdk/trace/tracetest"
)

// Questions about the greenhouse of seed 1: a far-apart pair (never
// observed together, routed to a chain), a parent–child pair (direct) and
// one that names nothing the index knows.
const (
	farQuestion   = "In the greenhouse, bed-11/moisture-probe is reads-wet. What is the most likely state of bed-10/leaf-wilt?"
	nearQuestion  = "zone-3/air-temp is hot. What is zone-3/vent-a most likely to be?"
	plainQuestion = "Write a haiku about tomatoes."
)

var (
	indexOnce sync.Once
	indexPath string
	indexErr  error
)

// sharedIndex builds one 8 000-context greenhouse index for the package's
// tests (read-only; tests that rewrite the file build their own).
func sharedIndex(t testing.TB) string {
	t.Helper()
	indexOnce.Do(func() {
		dir, err := tempDirOutsideTest()
		if err != nil {
			indexErr = err
			return
		}
		indexPath, indexErr = ghtest.Build(dir, "index.hwx", 1, 8000, 1)
	})
	if indexErr != nil {
		t.Fatal(indexErr)
	}
	return indexPath
}

// rig is a gateway in front of an upstream, both on loopback.
type rig struct {
	gw       *gw.Server
	url      string // gateway base URL
	upstream *httptest.Server
	spans    *tracetest.InMemoryExporter
	tp       *sdktrace.TracerProvider
	logs     *syncBuffer
	mu       sync.Mutex
	bodies   [][]byte // request bodies the upstream received
}

type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// newRig starts the simulated model (or upstream, when given) and a
// gateway in front of it, traced to an in-memory exporter. cfg fields left
// zero take the rig's defaults.
func newRig(t testing.TB, cfg gw.Config, upstream http.Handler, topts ...otelx.Option) *rig {
	t.Helper()
	r := &rig{spans: tracetest.NewInMemoryExporter(), logs: &syncBuffer{}}
	if cfg.IndexPath == "" {
		cfg.IndexPath = sharedIndex(t)
	}
	if cfg.DecideTimeout == 0 {
		// A loaded machine under -race can stall a request past the
		// default 50 ms before its search starts (a decide-timeout); the
		// tests check routes, not that deadline.
		cfg.DecideTimeout = time.Minute
	}
	if upstream == nil {
		ix, err := graphidx.Open(cfg.IndexPath)
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { ix.Close() })
		m, err := simmodel.New(ix, simmodel.Options{Seed: 3})
		if err != nil {
			t.Fatal(err)
		}
		upstream = m
	}
	r.upstream = httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, req *http.Request) {
		b, _ := io.ReadAll(req.Body)
		r.mu.Lock()
		r.bodies = append(r.bodies, b)
		r.mu.Unlock()
		req.Body = io.NopCloser(bytes.NewReader(b))
		upstream.ServeHTTP(w, req)
	}))
	t.Cleanup(r.upstream.Close)
	if cfg.Upstream == "" {
		cfg.Upstream = r.upstream.URL + "/v1"
	}
	r.tp = sdktrace.NewTracerProvider(sdktrace.WithSyncer(r.spans))
	t.Cleanup(func() { r.tp.Shutdown(context.Background()) })
	var err error
	if cfg.Telemetry, err = otelx.New(append([]otelx.Option{otelx.WithTracerProvider(r.tp)}, topts...)...); err != nil {
		t.Fatal(err)
	}
	cfg.TracerProvider = r.tp
	if cfg.Logger == nil {
		cfg.Logger = log.New(r.logs, "", 0)
	}
	if r.gw, err = gw.New(cfg); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { r.gw.Close() })
	hs := httptest.NewServer(r.gw.Handler())
	t.Cleanup(hs.Close)
	r.url = hs.URL
	return r
}

// lastBody is the last request body the upstream received.
func (r *rig) lastBody() []byte {
	r.mu.Lock()
	defer r.mu.Unlock()
	if len(r.bodies) == 0 {
		return nil
	}
	return r.bodies[len(r.bodies)-1]
}

func (r *rig) upstreamCalls() int {
	r.mu.Lock()
	defer r.mu.Unlock()
	return len(r.bodies)
}

// post sends body with the header pairs and returns status, body, header.
func post(t testing.TB, url, body string, header ...string) (int, []byte, http.Header) {
	t.Helper()
	req, err := http.NewRequest(http.MethodPost, url, strings.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	req.Header.Set("Content-Type", "application/json")
	for i := 0; i+1 < len(header); i += 2 {
		req.Header.Set(header[i], header[i+1])
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return resp.StatusCode, b, resp.Header
}

func chatBody(question string, extra ...string) string {
	m := map[string]any{"model": "greenhouse-sim", "messages": []any{map[string]any{"role": "user", "content": question}}}
	for i := 0; i+1 < len(extra); i += 2 {
		var v any
		if err := json.Unmarshal([]byte(extra[i+1]), &v); err != nil {
			panic(err)
		}
		m[extra[i]] = v
	}
	b, _ := json.Marshal(m)
	return string(b)
}

// errorCode reads {"error":{"code":…}}.
func errorCode(b []byte) (code, msg string) {
	var e struct {
		Error struct{ Code, Message string } `json:"error"`
	}
	_ = json.Unmarshal(b, &e)
	return e.Error.Code, e.Error.Message
}

type getResp struct {
	code int
	body []byte
}

func httpGet(url string) (getResp, error) {
	resp, err := http.Get(url)
	if err != nil {
		return getResp{}, err
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	return getResp{resp.StatusCode, b}, err
}

// endedSpans returns the ended spans once every named one has ended. The
// client can hold the whole answer (the final stream chunk, or the last
// byte of a JSON body) a moment before the handler ends its spans, so a
// test that reads spans right after a call waits for them here (up to 10 s).
func (r *rig) endedSpans(t testing.TB, names ...string) tracetest.SpanStubs {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for {
		got := r.spans.GetSpans()
		missing := ""
		for _, n := range names {
			found := false
			for _, s := range got {
				if s.Name == n {
					found = true
					break
				}
			}
			if !found {
				missing = n
				break
			}
		}
		if missing == "" {
			return got
		}
		if time.Now().After(deadline) {
			t.Fatalf("span %q did not end within 10 s (%d spans ended)", missing, len(got))
		}
		time.Sleep(2 * time.Millisecond)
	}
}
