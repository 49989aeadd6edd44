package gw_test

import (
	"bytes"
	"context"
	"errors"
	"net/http"
	"net/http/httptest"
	"sync"
	"testing"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/router/plan"
)

// planRig opens the shared index under a router (closed with the test) and
// returns it with the index's lexicon and the default plan renderer.
func planRig(t testing.TB) (*router.Router, *graphidx.Lexicon, *plan.Renderer) {
	t.Helper()
	ix, err := graphidx.Open(sharedIndex(t))
	if err != nil {
		t.Fatal(err)
	}
	rt, err := router.New(ix)
	if err != nil {
		ix.Close()
		t.Fatal(err)
	}
	t.Cleanup(func() { rt.Close() })
	lex, err := gw.IndexLexicon(ix)
	if err != nil {
		t.Fatal(err)
	}
	pr, err := plan.NewRenderer()
	if err != nil {
		t.Fatal(err)
	}
	return rt, lex, pr
}

// TestPlanCache: a cached instruction is the one rendering gives; the unit
// key, arm and propensity share an entry; any plan field of the decision,
// the index generation or the router's configuration makes a new one; a
// failed rendering is not kept; concurrent renderings agree.
func TestPlanCache(t *testing.T) {
	t.Parallel()
	rt, lex, pr := planRig(t)
	cache, err := gw.NewPlanCache(64)
	if err != nil {
		t.Fatal(err)
	}
	plain := gw.PlanRenderer{Router: rt, Namer: lex, Renderer: pr}
	cached := plain
	cached.Cache = cache
	ctx := context.Background()
	far := router.Query{From: "bed-11/moisture-probe", Value: "reads-wet", To: "bed-10/leaf-wilt"}
	near := router.Query{From: "zone-3/air-temp", Value: "hot", To: "zone-3/vent-a"}
	check := func(what string, q router.Query, d router.Decision, wantLen int) string {
		t.Helper()
		want, err := plain.Render(ctx, q, d)
		if err != nil {
			t.Fatalf("%s: %v", what, err)
		}
		got, err := cached.Render(ctx, q, d)
		if err != nil || got != want {
			t.Fatalf("%s: cached %q, %v; rendered %q", what, got, err, want)
		}
		if cache.Len() != wantLen {
			t.Fatalf("%s: %d entries, want %d", what, cache.Len(), wantLen)
		}
		return got
	}
	dFar, err := rt.Decide(ctx, far)
	if err != nil || dFar.Mode != router.ModeChain {
		t.Fatalf("far: %v %v, want a chain", dFar.Mode, err)
	}
	dNear, err := rt.Decide(ctx, near)
	if err != nil || dNear.Mode != router.ModeDirect {
		t.Fatalf("near: %v %v, want direct", dNear.Mode, err)
	}
	chainText := check("chain", far, dFar, 1)
	check("chain again", far, dFar, 1)
	check("direct", near, dNear, 2)
	other := dFar
	other.Key, other.Arm, other.Propensity, other.Cached = "unit-7", "b", 0.5, true
	if check("other unit", far, other, 2) != chainText {
		t.Fatal("the unit changed the text")
	}
	// Every plan field makes its own entry, and its own text where the
	// template shows it.
	n := 2
	for _, c := range []struct {
		name string
		edit func(d *router.Decision)
	}{
		{"mode", func(d *router.Decision) { d.Mode, d.Bridges = router.ModeDirect, nil }},
		{"error", func(d *router.Decision) { d.Err += 1e-12 }},
		{"reason", func(d *router.Decision) { d.Reason.Code = "explored" }},
		{"truncated", func(d *router.Decision) { d.Truncated = !d.Truncated }},
		{"estimate", func(d *router.Decision) { d.Estimate = append([]float64{0.99}, d.Estimate[1:]...) }},
		{"support", func(d *router.Decision) { d.Direct.Support++ }},
	} {
		d := dFar
		c.edit(&d)
		n++
		check(c.name, far, d, n)
	}
	// A stale decision cannot be planned: the error is returned, nothing kept.
	stale := dFar
	stale.Generation++
	if _, err := cached.Render(ctx, far, stale); !errors.Is(err, router.ErrStaleDecision) || cache.Len() != n {
		t.Fatalf("stale decision: %v, %d entries (want ErrStaleDecision, %d)", err, cache.Len(), n)
	}
	// A new configuration is a new key, even for the same decision.
	if err := rt.Reconfigure(router.WithGainThreshold(0.01)); err != nil {
		t.Fatal(err)
	}
	n++
	check("reconfigured", far, dFar, n)

	var wg sync.WaitGroup
	errs := make(chan error, 8)
	for range 8 {
		wg.Go(func() {
			for range 50 {
				if got, err := cached.Render(ctx, far, dFar); err != nil || got != chainText {
					errs <- errors.New("a concurrent rendering differs")
					return
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Fatal(err)
	}
	if _, err := gw.NewPlanCache(0); err == nil {
		t.Error("NewPlanCache(0) accepted")
	}
}

// TestPlanCacheGateway: the gateway forwards the same bytes with and
// without its plan cache, first and second time alike.
func TestPlanCacheGateway(t *testing.T) {
	t.Parallel()
	up := httptest.NewServer(http.NotFoundHandler())
	defer up.Close()
	var bodies [2][][]byte
	for i, size := range []int{-1, 0} {
		s, err := gw.New(gw.Config{IndexPath: sharedIndex(t), Upstream: up.URL + "/v1", PlanCacheSize: size, DecideTimeout: time.Minute})
		if err != nil {
			t.Fatal(err)
		}
		for range 2 {
			for _, q := range []string{farQuestion, nearQuestion, plainQuestion} {
				out, _, err := s.Prepare([]byte(chatBody(q)), "unit-1")
				if err != nil {
					t.Fatal(err)
				}
				bodies[i] = append(bodies[i], out)
			}
		}
		s.Close()
	}
	for i := range bodies[0] {
		if !bytes.Equal(bodies[0][i], bodies[1][i]) {
			t.Errorf("request %d: without the cache\n%s\nwith it\n%s", i, bodies[0][i], bodies[1][i])
		}
	}
	if !bytes.Contains(bodies[1][3], []byte(`"role":"system"`)) {
		t.Errorf("the repeated chain question got no plan: %s", bodies[1][3])
	}
}

// BenchmarkPlanRender compares rendering a decision's instruction (plan.Build
// with the chain's distributions, then the template) with a PlanCache hit,
// for a chain and a direct decision, in the same run: x-uncached is the
// rendering's time over the hit's.
func BenchmarkPlanRender(b *testing.B) {
	rt, lex, pr := planRig(b)
	cache, err := gw.NewPlanCache(16)
	if err != nil {
		b.Fatal(err)
	}
	ctx := context.Background()
	for _, q := range []router.Query{
		{From: "bed-11/moisture-probe", Value: "reads-wet", To: "bed-10/leaf-wilt"},
		{From: "zone-3/air-temp", Value: "hot", To: "zone-3/vent-a"},
	} {
		d, err := rt.Decide(ctx, q)
		if err != nil {
			b.Fatal(err)
		}
		var uncachedNs float64
		for _, cached := range []bool{false, true} {
			r := gw.PlanRenderer{Router: rt, Namer: lex, Renderer: pr}
			name := d.Mode.String() + "/rendered"
			if cached {
				r.Cache, name = cache, d.Mode.String()+"/cache-hit"
			}
			b.Run(name, func(b *testing.B) {
				want, err := r.Render(ctx, q, d)
				if err != nil {
					b.Fatal(err)
				}
				b.ReportAllocs()
				var got string
				for b.Loop() {
					if got, err = r.Render(ctx, q, d); err != nil {
						b.Fatal(err)
					}
				}
				if got != want {
					b.Fatalf("%q, want %q", got, want)
				}
				ns := float64(b.Elapsed().Nanoseconds()) / float64(b.N)
				if !cached {
					uncachedNs = ns
				} else if uncachedNs > 0 {
					b.ReportMetric(uncachedNs/ns, "x-uncached")
				}
			})
		}
	}
}
