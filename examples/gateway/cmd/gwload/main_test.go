package main

import (
	"bytes"
	"context"
	"math"
	"strings"
	"testing"
	"time"

	"github.com/hopwise/hopwise/examples/internal/ghtest"
	"github.com/hopwise/hopwise/internal/cpuclock"
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
		// The open loop at a fixed low rate: 400 requests at 2 000/s are
		// 0.2 s a gateway, far below capacity even under -race.
		res, err := Run(context.Background(), Config{Index: index, Requests: 400, Clients: 8, Rounds: 2, Distinct: 0, Sim: sim,
			Rate: 2000, HandlerCPU: true, Timeout: 2 * time.Minute, Out: &out})
		if err != nil {
			t.Fatal(err)
		}
		t.Log("\n" + out.String())
		for _, s := range []Stats{res.On, res.Off, res.OpenOn, res.OpenOff} {
			if s.Errors != 0 || s.N != 400 {
				t.Errorf("%s: %d errors, %d requests", s.Name, s.Errors, s.N)
			}
			if s.P99 < s.P50 || s.Max < s.P99 || s.CPU <= 0 {
				t.Errorf("%s: figures %+v", s.Name, s)
			}
		}
		for _, r := range [][2]Stats{{res.On, res.Off}, {res.OpenOn, res.OpenOff}} {
			on, off := r[0], r[1]
			if off.Routes["pass"] != 400 || on.Routes["chain"]+on.Routes["direct"] < 300 || on.Routes["pass"] < 30 {
				t.Errorf("routes: on %v, off %v", on.Routes, off.Routes)
			}
		}
		if res.Rate != 2000 || !strings.Contains(out.String(), "closed loop: routing adds") || !strings.Contains(out.String(), "open loop at 2000 req/s") {
			t.Errorf("rate %v, report:\n%s", res.Rate, out.String())
		}
		if _, ok := cpuclock.Thread(); ok && (res.HandlerOn <= 0 || res.HandlerOff <= 0 || !strings.Contains(out.String(), "handler thread CPU")) {
			t.Errorf("handler CPU: on %v, off %v", res.HandlerOn, res.HandlerOff)
		}
	}
	// Router options reach the routing gateway only: a gain threshold no
	// chain reaches routes every linked question directly.
	var out bytes.Buffer
	res, err := Run(context.Background(), Config{Index: index, Requests: 200, Clients: 4, Rounds: 2, Distinct: 20, Timeout: time.Minute, Out: &out,
		RouterOptions: []router.Option{router.WithGainThreshold(1e9), router.WithBeam(16)}})
	if err != nil {
		t.Fatal(err)
	}
	if res.On.Routes["chain"] != 0 || res.On.Routes["direct"] < 150 || res.Off.Routes["pass"] != 200 {
		t.Errorf("with τ = 1e9: routes on %v, off %v", res.On.Routes, res.Off.Routes)
	}
	// With the SDK recording spans and metrics (dropped at export).
	var sdkOut bytes.Buffer
	sdkRes, err := Run(context.Background(), Config{Index: index, Requests: 100, Clients: 4, Rounds: 2, Telemetry: "compact", Timeout: time.Minute, Out: &sdkOut})
	if err != nil {
		t.Fatal(err)
	}
	if sdkRes.On.Errors+sdkRes.Off.Errors != 0 || sdkRes.On.Routes["pass"] == 100 || !strings.Contains(sdkOut.String(), "compact decision spans") {
		t.Errorf("telemetry compact: %+v\n%s", sdkRes.On, sdkOut.String())
	}
	if res.OpenOn.N != 0 || res.HandlerOn != 0 || strings.Contains(out.String(), "open loop") {
		t.Errorf("open loop or handler pass run without being asked for: %+v", res.OpenOn)
	}
	for _, c := range []Config{
		{Index: index, Requests: 4, Clients: 8, Rounds: 1},             // fewer requests than clients
		{Index: index, Requests: 40, Clients: 8, Rounds: 1, Open: 1.5}, // a fraction above 1
		{Index: index, Requests: 40, Clients: 8, Rounds: 1, Rate: -1},  // a negative rate
		{Index: index, Requests: 40, Clients: 8, Rounds: 1, Open: math.NaN()},
		{Index: index, Requests: 40, Clients: 8, Rounds: 1, Telemetry: "loud"},
	} {
		if _, err := Run(context.Background(), c); err == nil {
			t.Errorf("%+v accepted", c)
		}
	}
}
