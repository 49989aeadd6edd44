package main

import (
	"bytes"
	"context"
	"strings"
	"testing"
	"time"

	"github.com/hopwise/hopwise/examples/internal/ghtest"
	"github.com/hopwise/hopwise/router"
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
	// Router options reach the routing gateway only: a gain threshold no
	// chain reaches routes every linked question directly.
	var out bytes.Buffer
	res, err := Run(context.Background(), Config{Index: index, Requests: 200, Clients: 4, Rounds: 2, Timeout: time.Minute, Out: &out,
		RouterOptions: []router.Option{router.WithGainThreshold(1e9), router.WithBeam(16)}})
	if err != nil {
		t.Fatal(err)
	}
	if res.On.Routes["chain"] != 0 || res.On.Routes["direct"] < 150 || res.Off.Routes["pass"] != 200 {
		t.Errorf("with τ = 1e9: routes on %v, off %v", res.On.Routes, res.Off.Routes)
	}
	if _, err := Run(context.Background(), Config{Index: index, Requests: 4, Clients: 8, Rounds: 1}); err == nil {
		t.Error("fewer requests than clients accepted")
	}
}
