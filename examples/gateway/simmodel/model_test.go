package simmodel_test

import (
	"bufio"
	"context"
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/examples/gateway/simmodel"
	"github.com/hopwise/hopwise/examples/internal/ghtest"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// newModel builds a greenhouse index of n contexts (seed 1) and a model
// over it; the index closes with the test.
func newModel(t *testing.T, n int, opt simmodel.Options) (string, *graphidx.Index, *simmodel.Model) {
	t.Helper()
	path, err := ghtest.Build(t.TempDir(), "index.hwx", 1, n, 1)
	if err != nil {
		t.Fatal(err)
	}
	idx, err := graphidx.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { idx.Close() })
	m, err := simmodel.New(idx, opt)
	if err != nil {
		t.Fatal(err)
	}
	return path, idx, m
}

// TestThink checks the simulated model against the greenhouse's exact
// answers: direct answers on pairs never seen together are much worse than
// on well-supported pairs, and following the router's chain step by step
// repairs most of that.
func TestThink(t *testing.T) {
	t.Parallel()
	path, idx, m := newModel(t, 20000, simmodel.Options{Seed: 7})
	idx2, err := graphidx.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	rt, err := router.New(idx2)
	if err != nil {
		t.Fatal(err)
	}
	defer rt.Close()
	w, err := ghtest.World(1)
	if err != nil {
		t.Fatal(err)
	}
	mse := func(pairs [][2]int, chain bool) (float64, int) {
		var sum float64
		n := 0
		for _, p := range pairs {
			for u := range w.Card(p[0]) {
				truth, err := w.TrueConditional(p[0], u, p[1])
				if err != nil {
					t.Fatal(err)
				}
				q := router.Query{From: w.Name(p[0]), Value: w.Labels(p[0])[u], To: w.Name(p[1])}
				var bridges []string
				if chain {
					d, err := rt.Decide(context.Background(), q)
					if err != nil {
						t.Fatal(err)
					}
					if d.Chain == nil {
						continue
					}
					bridges = d.Chain.Bridges
				}
				a, err := m.Think(q, bridges)
				if err != nil {
					t.Fatal(err)
				}
				if len(a.Steps) != len(bridges) {
					t.Fatalf("%d steps for bridges %v", len(a.Steps), bridges)
				}
				for v := range truth {
					e := a.Dist[v] - truth[v]
					sum += e * e / float64(len(truth))
				}
				n++
			}
		}
		return sum / float64(max(n, 1)), n
	}
	heldDirect, n1 := mse(w.HeldOut(), false)
	heldChain, n2 := mse(w.HeldOut(), true)
	supDirect, n3 := mse(w.Supported(), false)
	t.Logf("MSE: held-out direct %.4f (%d), held-out chained %.4f (%d), supported direct %.5f (%d)", heldDirect, n1, heldChain, n2, supDirect, n3)
	if n2 < n1/2 {
		t.Errorf("chains for only %d of %d held-out queries", n2, n1)
	}
	if !(supDirect*5 < heldDirect) {
		t.Errorf("direct answers barely degrade without support: supported %.5f vs held-out %.4f", supDirect, heldDirect)
	}
	if !(heldChain < heldDirect/2) {
		t.Errorf("chained %.4f does not repair direct %.4f on held-out pairs", heldChain, heldDirect)
	}
	if _, err := m.Think(router.Query{From: "nope", Value: "x", To: "bed-1/yield"}, nil); err == nil {
		t.Error("unknown entity answered")
	}
	if _, err := simmodel.New(idx, simmodel.Options{Sigma: -1}); err == nil {
		t.Error("negative sigma accepted")
	}
}

// TestServe speaks the wire format: JSON with usage; SSE with a final
// usage chunk only when asked; a plan in a system message makes a
// step-by-step answer that costs more output tokens.
func TestServe(t *testing.T) {
	t.Parallel()
	_, _, m := newModel(t, 5000, simmodel.Options{})
	hs := httptest.NewServer(m)
	defer hs.Close()
	const q = "bed-11/moisture-probe is reads-wet. What is bed-10/leaf-wilt?"
	call := func(body string) *http.Response {
		resp, err := http.Post(hs.URL+"/v1/chat/completions", "application/json", strings.NewReader(body))
		if err != nil {
			t.Fatal(err)
		}
		return resp
	}
	var direct, chained simmodel.Completion
	for _, c := range []struct {
		body string
		dst  *simmodel.Completion
	}{
		{`{"model":"m","messages":[{"role":"user","content":"` + q + `"}]}`, &direct},
		{`{"model":"m","messages":[{"role":"system","content":"Step 1: work out bed-10/soil-moisture."},{"role":"user","content":"` + q + `"}]}`, &chained},
	} {
		resp := call(c.body)
		err := json.NewDecoder(resp.Body).Decode(c.dst)
		resp.Body.Close()
		if err != nil || len(c.dst.Choices) != 1 {
			t.Fatalf("%s: %v %+v", c.body, err, c.dst)
		}
	}
	if strings.Contains(direct.Choices[0].Message.Content, "Step") || !strings.Contains(chained.Choices[0].Message.Content, "Step 1: bed-10/soil-moisture") {
		t.Errorf("direct %q / chained %q", direct.Choices[0].Message.Content, chained.Choices[0].Message.Content)
	}
	if !(chained.Usage.CompletionTokens > direct.Usage.CompletionTokens && chained.Usage.PromptTokens > direct.Usage.PromptTokens && direct.Usage.CompletionTokens > 0) {
		t.Errorf("usage: direct %+v, chained %+v", direct.Usage, chained.Usage)
	}
	for _, include := range []bool{false, true} {
		body := `{"model":"m","stream":true,"messages":[{"role":"user","content":"` + q + `"}]}`
		if include {
			body = strings.Replace(body, `"stream":true`, `"stream":true,"stream_options":{"include_usage":true}`, 1)
		}
		resp := call(body)
		sc := bufio.NewScanner(resp.Body)
		var text strings.Builder
		usage, done := 0, false
		for sc.Scan() {
			data, ok := strings.CutPrefix(sc.Text(), "data: ")
			if !ok {
				continue
			}
			if data == "[DONE]" {
				done = true
				continue
			}
			var ch struct {
				Choices []struct{ Delta struct{ Content string } }
				Usage   *struct{ CompletionTokens int64 } `json:"usage"`
			}
			if err := json.Unmarshal([]byte(data), &ch); err != nil {
				t.Fatal(err)
			}
			for _, c := range ch.Choices {
				text.WriteString(c.Delta.Content)
			}
			if ch.Usage != nil {
				usage++
			}
		}
		resp.Body.Close()
		if text.String() != direct.Choices[0].Message.Content || !done || (usage == 1) != include || usage > 1 {
			t.Errorf("stream (include_usage %v): text %q, done %v, %d usage chunks", include, text.String(), done, usage)
		}
	}
}
