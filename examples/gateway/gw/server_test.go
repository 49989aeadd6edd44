package gw_test

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"net"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/examples/internal/ghtest"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
)

// Queries of the greenhouse (seed 1): a held-out pair (never observed
// together) and a parent–child edge.
var (
	farQuery  = gw.AskRequest{From: "bed-11/moisture-probe", Value: "reads-wet", To: "bed-10/leaf-wilt", Key: "unit-1"}
	nearQuery = gw.AskRequest{From: "zone-3/air-temp", Value: "hot", To: "zone-3/vent-a", Key: "unit-2"}
)

func newIndex(t testing.TB, dir string) string {
	t.Helper()
	p, err := ghtest.Build(dir, "index.hwx", 1, 8000, 1)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// newServer returns a gateway over a fresh index whose decisions are traced
// to a file, and a function that flushes the traces and returns the file.
func newServer(t testing.TB, cfg gw.Config) (*gw.Server, func() string) {
	t.Helper()
	dir := t.TempDir()
	if cfg.IndexPath == "" {
		cfg.IndexPath = newIndex(t, dir)
	}
	tracePath := filepath.Join(dir, "traces.otlp.jsonl")
	exp, err := otlpfile.NewExporter(context.Background(), tracePath)
	if err != nil {
		t.Fatal(err)
	}
	tp := sdktrace.NewTracerProvider(sdktrace.WithBatcher(exp))
	if cfg.Telemetry, err = otelx.New(otelx.WithTracerProvider(tp)); err != nil {
		t.Fatal(err)
	}
	s, err := gw.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close(); tp.Shutdown(context.Background()) })
	return s, func() string {
		if err := tp.Shutdown(context.Background()); err != nil {
			t.Fatal(err)
		}
		return tracePath
	}
}

func post(t testing.TB, c *http.Client, url, body string, header ...string) (int, []byte, http.Header) {
	t.Helper()
	req, err := http.NewRequest(http.MethodPost, url, strings.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i+1 < len(header); i += 2 {
		req.Header.Set(header[i], header[i+1])
	}
	resp, err := c.Do(req)
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

func mustJSON(v any) string {
	b, err := json.Marshal(v)
	if err != nil {
		panic(err)
	}
	return string(b)
}

// TestEndToEnd drives the API over HTTP: a far-apart query is chained step by
// step, a supported one answered directly, and every decision is traced.
func TestEndToEnd(t *testing.T) {
	t.Parallel()
	s, flush := newServer(t, gw.Config{})
	ts := httptest.NewServer(s.Handler())
	defer ts.Close()

	code, body, hdr := post(t, ts.Client(), ts.URL+"/v1/answer", mustJSON(farQuery))
	if code != http.StatusOK {
		t.Fatalf("far query: %d %s", code, body)
	}
	if ct := hdr.Get("Content-Type"); ct != "application/json" {
		t.Errorf("Content-Type %q", ct)
	}
	var far gw.AskResponse
	if err := json.Unmarshal(body, &far); err != nil {
		t.Fatal(err)
	}
	if far.Route.Mode != "chain" || len(far.Route.Bridges) == 0 || far.Route.Support != 0 {
		t.Errorf("far query route %+v, want a chain over a pair of support 0", far.Route)
	}
	if len(far.Answer.Steps) != len(far.Route.Bridges) {
		t.Errorf("%d steps for %d bridges", len(far.Answer.Steps), len(far.Route.Bridges))
	}
	for i, st := range far.Answer.Steps {
		if st.Entity != far.Route.Bridges[i] {
			t.Errorf("step %d is %s, bridge %s", i, st.Entity, far.Route.Bridges[i])
		}
	}
	checkDist(t, far.Answer.Distribution, far.Answer.Value)
	if far.Key != farQuery.Key {
		t.Errorf("key %q", far.Key)
	}

	code, body, _ = post(t, ts.Client(), ts.URL+"/v1/answer", mustJSON(nearQuery))
	if code != http.StatusOK {
		t.Fatalf("near query: %d %s", code, body)
	}
	var near gw.AskResponse
	if err := json.Unmarshal(body, &near); err != nil {
		t.Fatal(err)
	}
	if near.Route.Mode != "direct" || len(near.Answer.Steps) != 0 || near.Route.Support == 0 {
		t.Errorf("near query route %+v steps %d, want direct with support", near.Route, len(near.Answer.Steps))
	}
	checkDist(t, near.Answer.Distribution, near.Answer.Value)
	// Chained answers spell out their steps: they cost more tokens.
	if !(far.Usage.OutputTokens > near.Usage.OutputTokens) {
		t.Errorf("usage chain %+v, direct %+v", far.Usage, near.Usage)
	}

	resp, err := ts.Client().Get(ts.URL + "/healthz")
	if err != nil {
		t.Fatal(err)
	}
	var health map[string]any
	if err := json.NewDecoder(resp.Body).Decode(&health); err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 200 || health["status"] != "ok" || health["generation"] != far.Route.Generation {
		t.Errorf("healthz %d %v (generation of answers %s)", resp.StatusCode, health, far.Route.Generation)
	}

	log, err := otelx.ReadTraceFiles(flush())
	if err != nil {
		t.Fatal(err)
	}
	if len(log.Decisions) != 2 {
		t.Fatalf("%d decision spans, want 2", len(log.Decisions))
	}
	for i, want := range []gw.AskResponse{far, near} {
		d := log.Decisions[i]
		if d.Key != want.Key || d.Mode != want.Route.Mode || (d.Mode == "chain" && !slices.Equal(d.Bridges, want.Route.Bridges)) {
			t.Errorf("span %d: key %s mode %s bridges %v; response %s %s %v", i, d.Key, d.Mode, d.Bridges, want.Key, want.Route.Mode, want.Route.Bridges)
		}
	}
}

func checkDist(t *testing.T, d map[string]float64, value string) {
	t.Helper()
	var sum float64
	best := ""
	for v, p := range d {
		if p < 0 || p > 1 {
			t.Errorf("probability %v of %s", p, v)
		}
		sum += p
		if best == "" || p > d[best] {
			best = v
		}
	}
	if math.Abs(sum-1) > 1e-9 {
		t.Errorf("distribution %v sums to %v", d, sum)
	}
	if value != best {
		t.Errorf("answer value %q, most likely %q", value, best)
	}
}

// TestBadRequests checks that client mistakes get a 4xx status and a JSON
// error naming the problem.
func TestBadRequests(t *testing.T) {
	t.Parallel()
	s, _ := newServer(t, gw.Config{MaxBodyBytes: 1 << 10})
	ts := httptest.NewServer(s.Handler())
	defer ts.Close()
	long := strings.Repeat("x", gw.MaxNameBytes+1)
	for _, c := range []struct {
		name, method, path, body string
		status                   int
		code, msg                string
	}{
		{"empty body", "POST", "/v1/answer", "", 400, "empty_body", "empty"},
		{"malformed", "POST", "/v1/answer", `{"from":`, 400, "invalid_json", "truncated"},
		{"syntax", "POST", "/v1/answer", `{"from" "a"}`, 400, "invalid_json", "byte"},
		{"unknown field", "POST", "/v1/answer", `{"from":"a","value":"b","to":"c","tenant":"x"}`, 400, "invalid_json", "tenant"},
		{"wrong type", "POST", "/v1/answer", `{"from":7,"value":"b","to":"c"}`, 400, "invalid_field", `"from"`},
		{"trailing", "POST", "/v1/answer", `{"from":"a","value":"b","to":"c"} {}`, 400, "invalid_json", "trailing"},
		{"missing to", "POST", "/v1/answer", `{"from":"zone-1/vent-a","value":"open"}`, 400, "missing_field", `"to"`},
		{"missing value", "POST", "/v1/answer", `{"from":"zone-1/vent-a","to":"bed-1/yield"}`, 400, "missing_field", `"value"`},
		{"too long", "POST", "/v1/answer", mustJSON(gw.AskRequest{From: long[:900], Value: "b", To: "c"}) + strings.Repeat(" ", 200), 413, "body_too_large", "1024"},
		{"field too long", "POST", "/v1/answer", mustJSON(map[string]string{"from": "a", "value": "b", "to": "c", "key": long}), 413, "body_too_large", "bytes"},
		{"same entity", "POST", "/v1/answer", `{"from":"zone-1/vent-a","value":"open","to":"zone-1/vent-a"}`, 400, "same_entity", "zone-1/vent-a"},
		{"unknown entity", "POST", "/v1/answer", `{"from":"zone-9/vent-z","value":"open","to":"bed-1/yield"}`, 422, "unknown_entity", "zone-9/vent-z"},
		{"unknown value", "POST", "/v1/answer", `{"from":"zone-1/vent-a","value":"ajar","to":"bed-1/yield"}`, 422, "unknown_value", "ajar"},
		{"wrong method", "GET", "/v1/answer", "", 405, "method_not_allowed", "POST"},
		{"wrong method admin", "GET", "/admin/reload-index", "", 405, "method_not_allowed", "POST"},
		{"no such endpoint", "POST", "/v1/chat", "{}", 404, "not_found", "/v1/chat"},
	} {
		req, _ := http.NewRequest(c.method, ts.URL+c.path, strings.NewReader(c.body))
		resp, err := ts.Client().Do(req)
		if err != nil {
			t.Fatal(err)
		}
		var e struct {
			Error struct{ Code, Message string }
		}
		err = json.NewDecoder(resp.Body).Decode(&e)
		resp.Body.Close()
		if err != nil {
			t.Errorf("%s: body is not JSON: %v", c.name, err)
			continue
		}
		if resp.StatusCode != c.status || e.Error.Code != c.code || !strings.Contains(e.Error.Message, c.msg) {
			t.Errorf("%s: %d %s %q; want %d %s containing %q", c.name, resp.StatusCode, e.Error.Code, e.Error.Message, c.status, c.code, c.msg)
		}
	}
	// A field over the name limit inside a body that fits.
	if err := (gw.AskRequest{From: long, Value: "v", To: "t"}).Validate(); err == nil || !strings.Contains(err.Error(), "limit") {
		t.Errorf("Validate(long from) = %v", err)
	}
}

// slowAnswerer waits for its context: it stands for a model that hangs.
type slowAnswerer struct{}

func (slowAnswerer) Answer(ctx context.Context, _ gw.Request) (gw.Answer, error) {
	<-ctx.Done()
	return gw.Answer{}, ctx.Err()
}

// TestTimeouts: a decide deadline that passes before the search starts
// degrades to a direct answer; the request deadline turns a hanging answerer
// into a 504.
func TestTimeouts(t *testing.T) {
	t.Parallel()
	s, _ := newServer(t, gw.Config{DecideTimeout: time.Nanosecond, RouterOptions: []router.Option{router.WithCacheSize(0)}})
	resp, err := s.Ask(context.Background(), farQuery)
	if err != nil {
		t.Fatalf("1 ns decide deadline: %v", err)
	}
	if resp.Route.Mode != "direct" || resp.Route.Reason != gw.ReasonDecideTimeout || len(resp.Answer.Distribution) != 2 {
		t.Errorf("1 ns decide deadline: route %+v answer %+v", resp.Route, resp.Answer)
	}

	slow, _ := newServer(t, gw.Config{Answerer: slowAnswerer{}, RequestTimeout: 30 * time.Millisecond})
	ts := httptest.NewServer(slow.Handler())
	defer ts.Close()
	start := time.Now()
	code, body, _ := post(t, ts.Client(), ts.URL+"/v1/answer", mustJSON(nearQuery))
	if code != http.StatusGatewayTimeout || !bytes.Contains(body, []byte(`"timeout"`)) {
		t.Errorf("hanging answerer: %d %s", code, body)
	}
	if el := time.Since(start); el > 5*time.Second {
		t.Errorf("request took %v with a 30 ms timeout", el)
	}
}

// TestReload rebuilds the index file in place and hot-reloads it while
// clients keep asking: no request fails and the generation changes.
func TestReload(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	path := newIndex(t, dir)
	s, _ := newServer(t, gw.Config{IndexPath: path, AdminToken: "s3cret-token"})
	ts := httptest.NewServer(s.Handler())
	defer ts.Close()
	gen0 := s.Router().Generation()

	code, body, _ := post(t, ts.Client(), ts.URL+"/admin/reload-index", "")
	if code != http.StatusUnauthorized {
		t.Errorf("reload without token: %d %s", code, body)
	}

	var failures atomic.Int64
	var wg sync.WaitGroup
	stop := make(chan struct{})
	for i := range 4 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for n := 0; ; n++ {
				select {
				case <-stop:
					return
				default:
				}
				q := farQuery
				q.Key = fmt.Sprintf("w%d-%d", i, n)
				if _, err := s.Ask(context.Background(), q); err != nil {
					failures.Add(1)
					t.Errorf("ask during reload: %v", err)
					return
				}
			}
		}()
	}
	for round := range 3 {
		// Rebuild with another corpus seed; Build renames over the file.
		if _, err := ghtest.Build(dir, "index.hwx", 1, 6000+1000*round, int64(10+round)); err != nil {
			t.Fatal(err)
		}
		code, body, _ = post(t, ts.Client(), ts.URL+"/admin/reload-index", "", "Authorization", "Bearer s3cret-token")
		if code != http.StatusOK {
			t.Fatalf("reload: %d %s", code, body)
		}
	}
	close(stop)
	wg.Wait()
	if failures.Load() != 0 {
		t.Fatalf("%d failed requests during reloads", failures.Load())
	}
	if g := s.Router().Generation(); g == gen0 {
		t.Errorf("generation %016x unchanged after reloads", g)
	}
	resp, err := s.Ask(context.Background(), nearQuery)
	if err != nil || resp.Route.Generation != fmt.Sprintf("%016x", s.Router().Generation()) {
		t.Errorf("after reload: %v, generation %s", err, resp.Route.Generation)
	}

	// A damaged file is refused and the old index keeps serving.
	if err := writeFile(path, []byte("not an index")); err != nil {
		t.Fatal(err)
	}
	if _, _, err := s.Reload(); err == nil {
		t.Error("reload of a damaged index succeeded")
	}
	if _, err := s.Ask(context.Background(), nearQuery); err != nil {
		t.Errorf("after a failed reload: %v", err)
	}
}

// TestClosed: after Close the API answers 503, never panics.
func TestClosed(t *testing.T) {
	t.Parallel()
	s, _ := newServer(t, gw.Config{})
	s.Close()
	_, err := s.Ask(context.Background(), nearQuery)
	var re *gw.RequestError
	if !errors.As(err, &re) || re.Status != http.StatusServiceUnavailable {
		t.Errorf("ask after close: %v", err)
	}
}

// TestLoad serves the API on a loopback socket and sends up to 2000 requests
// from 8 clients for at most 10 s, reporting throughput and p99 latency.
func TestLoad(t *testing.T) {
	if testing.Short() {
		t.Skip("load test skipped under -short")
	}
	s, _ := newServer(t, gw.Config{})
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	hs := &http.Server{Handler: s.Handler(), ReadHeaderTimeout: 5 * time.Second}
	go hs.Serve(ln)
	defer hs.Close()
	url := "http://" + ln.Addr().String() + "/v1/answer"
	client := &http.Client{Timeout: 5 * time.Second, Transport: &http.Transport{MaxIdleConnsPerHost: 16}}

	const maxRequests, workers = 2000, 8
	deadline := time.Now().Add(10 * time.Second)
	queries := []gw.AskRequest{farQuery, nearQuery,
		{From: "zone-2/thermometer", Value: "reads-cool", To: "zone-6/vent-a"},
		{From: "pump-1", Value: "running", To: "bed-3/soil-moisture"}}
	var next atomic.Int64
	lat := make([][]time.Duration, workers)
	var failed atomic.Int64
	start := time.Now()
	var wg sync.WaitGroup
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i := next.Add(1)
				if i > maxRequests || time.Now().After(deadline) {
					return
				}
				q := queries[i%int64(len(queries))]
				q.Key = fmt.Sprintf("load-%d", i)
				t0 := time.Now()
				resp, err := client.Post(url, "application/json", strings.NewReader(mustJSON(q)))
				if err != nil {
					failed.Add(1)
					continue
				}
				io.Copy(io.Discard, resp.Body)
				resp.Body.Close()
				if resp.StatusCode != 200 {
					failed.Add(1)
				}
				lat[w] = append(lat[w], time.Since(t0))
			}
		}()
	}
	wg.Wait()
	el := time.Since(start)
	var all []time.Duration
	for _, l := range lat {
		all = append(all, l...)
	}
	slices.Sort(all)
	if len(all) == 0 {
		t.Fatal("no requests completed")
	}
	p := func(q float64) time.Duration { return all[min(len(all)-1, int(q*float64(len(all))))] }
	t.Logf("%d requests in %v from %d clients over 127.0.0.1: %.0f req/s, p50 %v, p99 %v, max %v",
		len(all), el.Round(time.Millisecond), workers, float64(len(all))/el.Seconds(), p(0.50), p(0.99), all[len(all)-1])
	if failed.Load() != 0 {
		t.Errorf("%d requests failed", failed.Load())
	}
}

func writeFile(path string, b []byte) error {
	// Replace atomically, as an index build does, so readers never see a
	// half-written file.
	tmp := path + ".tmp"
	if err := osWriteFile(tmp, b); err != nil {
		return err
	}
	return osRename(tmp, path)
}

var (
	osWriteFile = func(p string, b []byte) error { return os.WriteFile(p, b, 0o644) }
	osRename    = os.Rename
)

// TestFeedback reports outcomes for earlier answers: each becomes an outcome
// span that otelx.Join pairs with its decision by key, at most once per key.
func TestFeedback(t *testing.T) {
	t.Parallel()
	s, flush := newServer(t, gw.Config{})
	ts := httptest.NewServer(s.Handler())
	defer ts.Close()
	for _, q := range []gw.AskRequest{farQuery, nearQuery} {
		if code, body, _ := post(t, ts.Client(), ts.URL+"/v1/answer", mustJSON(q)); code != 200 {
			t.Fatalf("%d %s", code, body)
		}
	}
	for _, c := range []struct {
		body   string
		status int
		code   string
	}{
		{`{"key":"unit-1","score":1}`, 200, ""},
		{`{"key":"unit-1","score":1}`, 404, "unknown_key"}, // reported already
		{`{"key":"unit-2","score":1.5}`, 400, "invalid_field"},
		{`{"key":"unit-2"}`, 400, "missing_field"},
		{`{"key":"unit-2","score":0.25,"output_tokens":-1}`, 400, "invalid_field"},
		{`{"key":"nobody","score":1}`, 404, "unknown_key"},
		{`{"key":"unit-2","score":0.25,"latency_ms":12.5}`, 200, ""},
	} {
		code, body, _ := post(t, ts.Client(), ts.URL+"/v1/feedback", c.body)
		if code != c.status || (c.code != "" && !bytes.Contains(body, []byte(`"`+c.code+`"`))) {
			t.Errorf("%s: %d %s, want %d %s", c.body, code, body, c.status, c.code)
		}
	}
	log, err := otelx.ReadTraceFiles(flush())
	if err != nil {
		t.Fatal(err)
	}
	joined, st := otelx.Join(log.Decisions, log.Outcomes)
	if st.Joined != 2 || len(log.Outcomes) != 2 {
		t.Fatalf("join %+v with %d outcomes", st, len(log.Outcomes))
	}
	for _, j := range joined {
		if j.Outcome == nil {
			continue
		}
		switch j.Decision.Key {
		case "unit-1":
			if j.Outcome.Score != 1 || j.Outcome.OutputTokens <= 16 || j.Outcome.Mode != "chain" {
				t.Errorf("unit-1 outcome %+v", j.Outcome)
			}
		case "unit-2":
			if j.Outcome.Score != 0.25 || j.Outcome.LatencyMs != 12.5 || j.Outcome.Mode != "direct" {
				t.Errorf("unit-2 outcome %+v", j.Outcome)
			}
		}
	}
}
