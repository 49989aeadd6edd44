package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/simmodel"
	"github.com/hopwise/hopwise/examples/internal/ghtest"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/otelx"
)

const farChat = `{"model":"greenhouse-sim","messages":[{"role":"user","content":"bed-11/moisture-probe is reads-wet. What is bed-10/leaf-wilt?"}]}`

// start runs the command on a loopback listener in front of the simulated
// model, and returns its URL and a stop function that returns run's error.
func start(t *testing.T, o options) (string, func() error) {
	t.Helper()
	dir := t.TempDir()
	if o.index == "" {
		index, err := ghtest.Build(dir, "index.hwx", 1, 3000, 1)
		if err != nil {
			t.Fatal(err)
		}
		o.index = index
	}
	ix, err := graphidx.Open(o.index)
	if err != nil {
		t.Fatal(err)
	}
	m, err := simmodel.New(ix, simmodel.Options{})
	if err != nil {
		t.Fatal(err)
	}
	up := httptest.NewServer(m)
	t.Cleanup(func() { up.Close(); ix.Close() })
	o.upstream = up.URL + "/v1"
	if o.listener == nil {
		if o.listener, err = net.Listen("tcp", "127.0.0.1:0"); err != nil {
			t.Fatal(err)
		}
	}
	if o.traceFile == "" {
		o.traceFile = filepath.Join(dir, "gw.otlp.jsonl")
	}
	for _, d := range []*time.Duration{&o.decide, &o.upstreamTimeout, &o.body, &o.shutdown} {
		if *d == 0 {
			*d = 5 * time.Second
		}
	}
	if o.maxBody == 0 {
		o.maxBody = 1 << 20
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- run(ctx, o) }()
	url := "http://" + o.listener.Addr().String()
	for i := 0; ; i++ {
		resp, err := http.Get(url + "/healthz")
		if err == nil {
			resp.Body.Close()
			break
		}
		select {
		case rerr := <-done:
			cancel()
			t.Fatalf("run: %v", rerr)
		case <-time.After(20 * time.Millisecond):
		}
		if i > 500 {
			cancel()
			t.Fatal(err)
		}
	}
	return url, func() error {
		cancel()
		select {
		case err := <-done:
			return err
		case <-time.After(10 * time.Second):
			return fmt.Errorf("run did not return after cancel")
		}
	}
}

// TestRunGracefulShutdown holds a chat request in flight while the context
// is cancelled, and checks that it completes, run returns cleanly and the
// decision reached the trace file.
func TestRunGracefulShutdown(t *testing.T) {
	t.Parallel()
	traces := filepath.Join(t.TempDir(), "gw.otlp.jsonl")
	url, stop := start(t, options{traceFile: traces, traceMaxBytes: 1 << 20, traceBackups: 2})
	pr, pw := io.Pipe()
	got := make(chan int, 1)
	go func() {
		req, _ := http.NewRequest(http.MethodPost, url+"/v1/chat/completions", pr)
		req.Header.Set("Hopwise-Unit", "late")
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			got <- -1
			return
		}
		io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
		got <- resp.StatusCode
	}()
	io.WriteString(pw, farChat[:40])
	time.Sleep(50 * time.Millisecond)
	errc := make(chan error, 1)
	go func() { errc <- stop() }()
	time.Sleep(50 * time.Millisecond)
	io.WriteString(pw, farChat[40:])
	pw.Close()
	if code := <-got; code != http.StatusOK {
		t.Errorf("in-flight request during shutdown: status %d", code)
	}
	if err := <-errc; err != nil {
		t.Fatalf("run: %v", err)
	}
	if _, err := http.Get(url + "/healthz"); err == nil {
		t.Error("server still accepting after shutdown")
	}
	log, err := otelx.ReadTraceFiles(traces)
	if err != nil {
		t.Fatal(err)
	}
	if len(log.Decisions) != 1 || log.Decisions[0].Key != "late" {
		t.Errorf("trace decisions %+v, want the in-flight one", log.Decisions)
	}
}

// TestRunOTLPHTTP points -otlp-endpoint at a stand-in collector and checks
// that the spans arrive as an OTLP/HTTP protobuf POST on /v1/traces.
func TestRunOTLPHTTP(t *testing.T) {
	t.Parallel()
	var mu sync.Mutex
	var posts []string
	collector := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		b, _ := io.ReadAll(r.Body)
		mu.Lock()
		posts = append(posts, fmt.Sprintf("%s %s %s %d", r.Method, r.URL.Path, r.Header.Get("Content-Type"), len(b)))
		mu.Unlock()
		w.Header().Set("Content-Type", "application/x-protobuf")
		w.WriteHeader(http.StatusOK)
	}))
	defer collector.Close()
	url, stop := start(t, options{endpoint: collector.URL})
	resp, err := http.Post(url+"/v1/chat/completions", "application/json", strings.NewReader(farChat))
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Fatalf("status %d", resp.StatusCode)
	}
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	mu.Lock()
	defer mu.Unlock()
	if len(posts) == 0 || !strings.HasPrefix(posts[0], "POST /v1/traces application/x-protobuf") {
		t.Errorf("collector saw %q", posts)
	}
}

// TestRunTraceRotation bounds the trace file: past -trace-max-bytes it is
// rotated, and no more than -trace-backups old files are kept.
func TestRunTraceRotation(t *testing.T) {
	t.Parallel()
	traces := filepath.Join(t.TempDir(), "gw.otlp.jsonl")
	url, stop := start(t, options{traceFile: traces, traceMaxBytes: 2048, traceBackups: 2, batchDelay: time.Millisecond})
	for i := range 40 {
		time.Sleep(3 * time.Millisecond)
		req, _ := http.NewRequest(http.MethodPost, url+"/v1/chat/completions", strings.NewReader(farChat))
		req.Header.Set("Hopwise-Unit", fmt.Sprint("u", i))
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
	}
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	matches, _ := filepath.Glob(traces + "*")
	if len(matches) != 3 {
		t.Errorf("trace files %q, want the file and 2 backups", matches)
	}
	if _, err := os.Stat(traces + ".3"); err == nil {
		t.Error("a third backup was kept")
	}
}

// TestFlagsSecrets: the admin token has no flag (argv is visible to every
// user), it comes from a private file or the environment.
func TestFlagsSecrets(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	env := func(m map[string]string) func(string) string { return func(k string) string { return m[k] } }
	var errw bytes.Buffer
	if _, err := parseFlags([]string{"-admin-token", "s3cret"}, env(nil), &errw); err == nil {
		t.Error("-admin-token accepted on the command line")
	}
	o, err := parseFlags(nil, env(map[string]string{envAdminToken: "from-env\n"}), &errw)
	if err != nil || o.token != "from-env" {
		t.Errorf("env token: %q, %v", o.token, err)
	}
	priv := filepath.Join(dir, "token")
	os.WriteFile(priv, []byte("from-file\n"), 0o600)
	if o, err = parseFlags([]string{"-admin-token-file", priv}, env(map[string]string{envAdminToken: "from-env"}), &errw); err != nil || o.token != "from-file" {
		t.Errorf("file token: %q, %v", o.token, err)
	}
	pub := filepath.Join(dir, "token-public")
	os.WriteFile(pub, []byte("x"), 0o644)
	if _, err := parseFlags([]string{"-admin-token-file", pub}, env(nil), &errw); err == nil || !strings.Contains(err.Error(), "chmod 600") {
		t.Errorf("world-readable token file: %v", err)
	}
	if _, err := parseFlags([]string{"-admin-token-file", filepath.Join(dir, "missing")}, env(nil), &errw); err == nil || strings.Contains(err.Error(), dir) {
		t.Errorf("missing token file: %v (must fail without echoing the path)", err)
	}
	if _, err := parseFlags(nil, env(map[string]string{envHashKey: "short"}), &errw); err == nil {
		t.Error("a 5-byte entity hash key accepted")
	}
	if o, err := parseFlags(nil, env(map[string]string{envHashKey: "0123456789abcdef0123"}), &errw); err != nil || len(o.hashKey) != 20 {
		t.Errorf("hash key: %v", err)
	}
}

// TestRunAdminChoiceLogged: with no token on a loopback listener the start
// log says the admin routes are open to loopback callers, and they are.
func TestRunAdminChoiceLogged(t *testing.T) {
	t.Parallel()
	var logs bytes.Buffer
	var mu sync.Mutex
	url, stop := start(t, options{logw: writerFunc(func(p []byte) (int, error) { mu.Lock(); defer mu.Unlock(); return logs.Write(p) })})
	resp, err := http.Post(url+"/admin/reload-index", "", nil)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Errorf("loopback reload without token: %d", resp.StatusCode)
	}
	m, err := http.Get(url + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	mb, _ := io.ReadAll(m.Body)
	m.Body.Close()
	if !strings.Contains(string(mb), "hopwise_gateway_requests") && !strings.Contains(string(mb), "# HELP") {
		t.Errorf("/metrics: %.200s", mb)
	}
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	mu.Lock()
	defer mu.Unlock()
	if !strings.Contains(logs.String(), "open to loopback callers only") {
		t.Errorf("start log does not state the admin choice:\n%s", logs.String())
	}
}

type writerFunc func([]byte) (int, error)

func (f writerFunc) Write(p []byte) (int, error) { return f(p) }

// TestFlagsNamed: a bad flag value is an error naming the flag (it was
// "gw: timeouts, sizes and limits must be ≥ 0" for all of them, and a bad
// -upstream named a Go field).
func TestFlagsNamed(t *testing.T) {
	t.Parallel()
	var errw bytes.Buffer
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"-decide-timeout", "-1s"}, "-decide-timeout -1s"},
		{[]string{"-upstream-timeout", "-2s"}, "-upstream-timeout -2s"},
		{[]string{"-body-timeout", "-1ms"}, "-body-timeout -1ms"},
		{[]string{"-shutdown-timeout", "-1s"}, "-shutdown-timeout -1s"},
		{[]string{"-max-body-bytes", "-5"}, "-max-body-bytes -5"},
		{[]string{"-upstream", "ftp://x"}, `-upstream "ftp://x"`},
		{[]string{"-upstream", "localhost:9090"}, `-upstream "localhost:9090"`},
	} {
		_, err := parseFlags(tc.args, func(string) string { return "" }, &errw)
		if err == nil || !strings.Contains(err.Error(), tc.want) || strings.Contains(err.Error(), "Config.") {
			t.Errorf("%v: %v, want an error naming %s", tc.args, err, tc.want)
		}
	}
}
