package main

import (
	"context"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/hopwise/hopwise/examples/internal/ghtest"
	"github.com/hopwise/hopwise/otelx"
)

// TestRunGracefulShutdown serves on loopback, holds a request in flight while
// the context is cancelled, and checks that the request completes, run
// returns cleanly and the decision reached the trace file.
func TestRunGracefulShutdown(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	index, err := ghtest.Build(dir, "index.hwx", 1, 5000, 1)
	if err != nil {
		t.Fatal(err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	traces := filepath.Join(dir, "gw.otlp.jsonl")
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() {
		done <- run(ctx, options{index: index, traceFile: traces, listener: ln,
			decide: 50 * time.Millisecond, request: 5 * time.Second, shutdown: 5 * time.Second})
	}()
	url := "http://" + ln.Addr().String()
	// Wait for the server.
	for i := 0; ; i++ {
		resp, err := http.Get(url + "/healthz")
		if err == nil {
			resp.Body.Close()
			break
		}
		if i > 100 {
			t.Fatal(err)
		}
		time.Sleep(20 * time.Millisecond)
	}
	// A request whose body arrives slowly is in flight during shutdown.
	pr, pw := io.Pipe()
	got := make(chan int, 1)
	go func() {
		resp, err := http.Post(url+"/v1/answer", "application/json", pr)
		if err != nil {
			got <- -1
			return
		}
		io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
		got <- resp.StatusCode
	}()
	io.WriteString(pw, `{"from":"zone-3/air-temp","value":"hot",`)
	time.Sleep(50 * time.Millisecond)
	cancel()
	time.Sleep(50 * time.Millisecond)
	io.WriteString(pw, `"to":"zone-3/vent-a","key":"late"}`)
	pw.Close()
	if code := <-got; code != http.StatusOK {
		t.Errorf("in-flight request during shutdown: status %d", code)
	}
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("run: %v", err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("run did not return after cancel")
	}
	if _, err := http.Get(url + "/healthz"); err == nil || !strings.Contains(err.Error(), "refused") {
		t.Errorf("server still accepting after shutdown: %v", err)
	}
	log, err := otelx.ReadTraceFiles(traces)
	if err != nil {
		t.Fatal(err)
	}
	if len(log.Decisions) != 1 || log.Decisions[0].Key != "late" {
		t.Errorf("trace decisions %+v, want the in-flight one", log.Decisions)
	}
}

// TestRunOTLPHTTP points the exporter at a stand-in collector and checks
// that the decision spans arrive as an OTLP/HTTP protobuf POST on /v1/traces.
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
	dir := t.TempDir()
	index, err := ghtest.Build(dir, "index.hwx", 1, 3000, 1)
	if err != nil {
		t.Fatal(err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() {
		done <- run(ctx, options{index: index, endpoint: collector.URL, listener: ln,
			decide: 50 * time.Millisecond, request: 5 * time.Second, shutdown: 5 * time.Second})
	}()
	url := "http://" + ln.Addr().String()
	var resp *http.Response
	for i := 0; ; i++ {
		resp, err = http.Post(url+"/v1/answer", "application/json",
			strings.NewReader(`{"from":"zone-3/air-temp","value":"hot","to":"zone-3/vent-a","key":"k"}`))
		if err == nil {
			break
		}
		if i > 100 {
			t.Fatal(err)
		}
		time.Sleep(20 * time.Millisecond)
	}
	resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Fatalf("status %d", resp.StatusCode)
	}
	cancel()
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	mu.Lock()
	defer mu.Unlock()
	if len(posts) == 0 || !strings.HasPrefix(posts[0], "POST /v1/traces application/x-protobuf") {
		t.Errorf("collector saw %q", posts)
	}
}
