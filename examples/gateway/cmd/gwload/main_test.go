package main

import (
	"bytes"
	"context"
	"strings"
	"testing"
	"time"

	"github.com/hopwise/hopwise/examples/internal/ghtest"
)

// TestRunSmall runs the load on a small index with few requests: no
// errors, both gateways measured, the routing one routing.
func TestRunSmall(t *testing.T) {
	t.Parallel()
	index, err := ghtest.Build(t.TempDir(), "index.hwx", 1, 3000, 1)
	if err != nil {
		t.Fatal(err)
	}
	for _, sim := range []bool{false, true} {
		var out bytes.Buffer
		res, err := Run(context.Background(), Config{Index: index, Requests: 400, Clients: 8, Rounds: 2, Distinct: 0, Sim: sim, Timeout: time.Minute, Out: &out})
		if err != nil {
			t.Fatal(err)
		}
		t.Log("\n" + out.String())
		if res.On.Errors+res.Off.Errors != 0 || res.On.N != 400 || res.Off.N != 400 {
			t.Errorf("errors %d/%d, requests %d/%d", res.On.Errors, res.Off.Errors, res.On.N, res.Off.N)
		}
		if res.Off.Routes["pass"] != 400 || res.On.Routes["chain"]+res.On.Routes["direct"] < 300 || res.On.Routes["pass"] < 30 {
			t.Errorf("routes: on %v, off %v", res.On.Routes, res.Off.Routes)
		}
		if res.On.P99 < res.On.P50 || res.On.CPU <= 0 || !strings.Contains(out.String(), "routing adds") {
			t.Errorf("figures: %+v", res.On)
		}
	}
	if _, err := Run(context.Background(), Config{Index: index, Requests: 4, Clients: 8, Rounds: 1}); err == nil {
		t.Error("fewer requests than clients accepted")
	}
}
