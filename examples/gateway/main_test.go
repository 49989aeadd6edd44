package main

import (
	"context"
	"io"
	"net"
	"net/http"
	"path/filepath"
	"strings"
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
