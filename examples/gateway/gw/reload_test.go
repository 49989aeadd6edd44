package gw_test

import (
	"encoding/json"
	"os"
	"path/filepath"
	"sync"
	"sync/atomic"
	"testing"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/examples/internal/ghtest"
)

// TestReloadUnderLoad replaces the index file by rename while chat requests
// run, reloads, and checks that no request failed, the generation changed,
// and a damaged replacement is refused with the old index kept.
func TestReloadUnderLoad(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	path, err := ghtest.Build(dir, "index.hwx", 1, 4000, 1)
	if err != nil {
		t.Fatal(err)
	}
	next, err := ghtest.Build(dir, "next.hwx", 1, 4000, 2)
	if err != nil {
		t.Fatal(err)
	}
	r := newRig(t, gw.Config{IndexPath: path, AdminOpenOnLoopback: true}, nil)
	gen := func() string {
		var h struct{ Generation string }
		code, b, _ := get(t, r.url+"/healthz")
		if code != 200 || json.Unmarshal(b, &h) != nil {
			t.Fatalf("healthz %d %s", code, b)
		}
		return h.Generation
	}
	before := gen()
	var failed atomic.Int64
	var wg sync.WaitGroup
	stop := make(chan struct{})
	for range 4 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				select {
				case <-stop:
					return
				default:
				}
				if code, _, _ := post(t, r.url+"/v1/chat/completions", chatBody(farQuestion)); code != 200 {
					failed.Add(1)
				}
			}
		}()
	}
	// Replace by rename: readers of the old file keep their mapping.
	if err := os.Rename(next, path); err != nil {
		t.Fatal(err)
	}
	if code, b, _ := post(t, r.url+"/admin/reload-index", ""); code != 200 {
		t.Errorf("reload: %d %s", code, b)
	}
	after := gen()
	bad := filepath.Join(dir, "bad.hwx")
	if err := os.WriteFile(bad, []byte("not an index"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Rename(bad, path); err != nil {
		t.Fatal(err)
	}
	code, b, _ := post(t, r.url+"/admin/reload-index", "")
	close(stop)
	wg.Wait()
	if code != 500 {
		t.Errorf("reload of a damaged index: %d %s", code, b)
	}
	noLeak(t, "reload", b)
	if before == after || gen() != after {
		t.Errorf("generations %s → %s → %s", before, after, gen())
	}
	if n := failed.Load(); n != 0 {
		t.Errorf("%d requests failed during reloads", n)
	}
}

func get(t testing.TB, url string) (int, []byte, error) {
	t.Helper()
	resp, err := httpGet(url)
	if err != nil {
		t.Fatal(err)
	}
	return resp.code, resp.body, nil
}
