package gw_test

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/examples/gateway/simmodel"
	"github.com/hopwise/hopwise/otelx"
)

type chatReply struct {
	Model   string `json:"model"`
	Choices []struct {
		Message struct{ Content string } `json:"message"`
	} `json:"choices"`
	Usage struct {
		PromptTokens     int64 `json:"prompt_tokens"`
		CompletionTokens int64 `json:"completion_tokens"`
	} `json:"usage"`
}

// upstreamMessages are the messages of the last upstream request.
func upstreamMessages(t *testing.T, r *rig) []map[string]string {
	t.Helper()
	var req struct {
		Messages []map[string]string `json:"messages"`
	}
	if err := json.Unmarshal(r.lastBody(), &req); err != nil {
		t.Fatal(err)
	}
	return req.Messages
}

// TestChatRouting sends a far-apart question (chained: the plan reaches the
// model as a system message and the answer walks its steps) and a
// well-supported one (direct instruction, shorter answer).
func TestChatRouting(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{}, nil)
	code, b, h := post(t, r.url+"/v1/chat/completions", chatBody(farQuestion, "temperature", "0.25", "metadata", `{"tag":"é\u00e9"}`), gw.HeaderUnit, "u-far")
	if code != 200 {
		t.Fatalf("status %d: %s", code, b)
	}
	if h.Get(gw.HeaderRoute) != "chain" {
		t.Fatalf("route %q (%s), want chain", h.Get(gw.HeaderRoute), h.Get(gw.HeaderReason))
	}
	msgs := upstreamMessages(t, r)
	if len(msgs) != 2 || msgs[0]["role"] != "system" || !strings.Contains(msgs[0]["content"], "Step 1:") || msgs[1]["content"] != farQuestion {
		t.Fatalf("upstream messages %q", msgs)
	}
	var sent struct {
		Temperature float64           `json:"temperature"`
		Metadata    map[string]string `json:"metadata"`
	}
	if err := json.Unmarshal(r.lastBody(), &sent); err != nil || sent.Temperature != 0.25 || sent.Metadata["tag"] != "éé" {
		t.Errorf("other fields not forwarded as sent: %s (%v)", r.lastBody(), err)
	}
	var far chatReply
	if err := json.Unmarshal(b, &far); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(far.Choices[0].Message.Content, "Step 1:") {
		t.Errorf("chained answer has no steps: %q", far.Choices[0].Message.Content)
	}
	if v, ok := simmodel.ParseAnswer(far.Choices[0].Message.Content); !ok || (v != "firm" && v != "wilted") {
		t.Errorf("answer %q", far.Choices[0].Message.Content)
	}

	code, b, h = post(t, r.url+"/v1/chat/completions", chatBody(nearQuestion), gw.HeaderUnit, "u-near")
	if code != 200 || h.Get(gw.HeaderRoute) != "direct" {
		t.Fatalf("near: status %d route %q: %s", code, h.Get(gw.HeaderRoute), b)
	}
	if msgs := upstreamMessages(t, r); len(msgs) != 2 || !strings.Contains(msgs[0]["content"], "Answer directly") {
		t.Fatalf("near upstream messages %q", msgs)
	}
	var near chatReply
	if err := json.Unmarshal(b, &near); err != nil {
		t.Fatal(err)
	}
	if !(far.Usage.CompletionTokens > near.Usage.CompletionTokens) || near.Usage.CompletionTokens <= 0 {
		t.Errorf("output tokens: chained %d, direct %d; step-by-step answers should cost more", far.Usage.CompletionTokens, near.Usage.CompletionTokens)
	}
}

// TestPassThrough forwards a request that links nothing byte for byte, and
// records why.
func TestPassThrough(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{}, nil)
	cases := []struct{ body, reason string }{
		{chatBody(plainQuestion), gw.PassNoMention},
		{chatBody("zone-3/air-temp is hot, is it not?"), gw.PassOneEntity},
		{chatBody("Compare zone-3/air-temp with zone-3/vent-a."), gw.PassNoValue},
		{`{"model":"m","messages":[{"role":"system","content":"hi"}]}`, gw.PassNoUserMessage},
	}
	for _, c := range cases {
		code, b, h := post(t, r.url+"/v1/chat/completions", c.body)
		if code != 200 || h.Get(gw.HeaderRoute) != "pass" || h.Get(gw.HeaderReason) != c.reason {
			t.Errorf("%s: status %d route %q reason %q, want pass/%s: %s", c.body, code, h.Get(gw.HeaderRoute), h.Get(gw.HeaderReason), c.reason, b)
		}
		if got := string(r.lastBody()); got != c.body {
			t.Errorf("passed-through body changed:\n got %s\nwant %s", got, c.body)
		}
	}
}

// TestOutcomes covers POST /v1/outcomes: recorded once per routed request,
// validated whole before the pending request is taken (a rejected outcome
// can be retried), every number range-checked, naming the field.
func TestOutcomes(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{}, nil)
	for _, u := range []string{"u1", "u2"} {
		if code, b, _ := post(t, r.url+"/v1/chat/completions", chatBody(farQuestion), gw.HeaderUnit, u); code != 200 {
			t.Fatalf("status %d: %s", code, b)
		}
	}
	bad := []struct{ body, code, field string }{
		{`{"unit":"u1","score":1,"latency_ms":1e300}`, "out_of_range", "latency_ms"},
		{`{"unit":"u1","score":1,"latency_ms":-1}`, "out_of_range", "latency_ms"},
		{`{"unit":"u1","score":1,"input_tokens":9e18}`, "out_of_range", "input_tokens"},
		{`{"unit":"u1","score":1,"output_tokens":9000000000000000000}`, "out_of_range", "output_tokens"},
		{`{"unit":"u1","score":1,"input_tokens":1.5}`, "invalid_field", "input_tokens"},
		{`{"unit":"u1","score":1.01}`, "out_of_range", "score"},
		{`{"unit":"u1","score":"1"}`, "invalid_field", "score"},
		{`{"unit":"u1"}`, "missing_field", "score"},
		{`{"unit":"u1","score":1,"Score":0}`, "invalid_json", "Score"},
		{`{"unit":"u1","score":1,"key":"u1"}`, "unknown_field", "key"},
		{`{"unit":"` + strings.Repeat("x", gw.MaxUnitBytes+1) + `","score":1}`, "field_too_long", "unit"},
	}
	for _, c := range bad {
		code, b, _ := post(t, r.url+"/v1/outcomes", c.body)
		ec, msg := errorCode(b)
		if code != 400 || ec != c.code || !strings.Contains(msg, c.field) {
			t.Errorf("%.80s: %d %s %q, want 400 %s naming %s", c.body, code, ec, msg, c.code, c.field)
		}
	}
	// The rejected outcomes left u1 pending: the corrected retry records.
	if code, b, _ := post(t, r.url+"/v1/outcomes", `{"unit":"u1","score":1,"latency_ms":12.5,"input_tokens":1000000000000}`); code != 200 {
		t.Fatalf("retry after rejected outcomes: %d %s", code, b)
	}
	if code, b, _ := post(t, r.url+"/v1/outcomes", `{"unit":"u1","score":1}`); code != 404 {
		t.Errorf("second outcome for u1: %d %s, want 404", code, b)
	}
	if code, b, _ := post(t, r.url+"/v1/outcomes", `{"unit":"u2","score":0}`); code != 200 {
		t.Errorf("u2: %d %s", code, b)
	}
	// Pass-through requests have no decision to join.
	post(t, r.url+"/v1/chat/completions", chatBody(plainQuestion), gw.HeaderUnit, "u3")
	if code, _, _ := post(t, r.url+"/v1/outcomes", `{"unit":"u3","score":1}`); code != 404 {
		t.Errorf("outcome of a pass-through: %d, want 404", code)
	}
	// Unit keys are bounded on the request too.
	if code, _, _ := post(t, r.url+"/v1/chat/completions", chatBody(farQuestion), gw.HeaderUnit, strings.Repeat("u", gw.MaxUnitBytes+1)); code != 400 {
		t.Errorf("long unit header: %d, want 400", code)
	}
}

// TestDuplicateKeys rejects duplicate and case-variant keys before anything
// acts on the body.
func TestDuplicateKeys(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{}, nil)
	cases := []struct{ path, body string }{
		{"/v1/route", `{"from":"zzz","From":"zone-1/air-temp","value":"hot","to":"zone-3/vent-a"}`},
		{"/v1/route", `{"from":"zone-1/air-temp","value":"hot","to":"zone-3/vent-a","to":"zone-2/air-temp"}`},
		{"/v1/route", `{"From":"zone-1/air-temp","value":"hot","to":"zone-3/vent-a"}`},
		{"/v1/chat/completions", `{"model":"m","messages":[{"role":"user","content":"a"}],"Messages":[]}`},
		{"/v1/chat/completions", `{"model":"m","messages":[{"role":"user","content":"a","Content":"b"}]}`},
		{"/v1/chat/completions", `{"model":"m","messages":[{"role":"user","content":"a"}],"model":"n"}`},
	}
	for _, c := range cases {
		code, b, _ := post(t, r.url+c.path, c.body)
		if code != 400 {
			t.Errorf("%s %s: %d %s, want 400", c.path, c.body, code, b)
		}
	}
	if n := r.upstreamCalls(); n != 0 {
		t.Errorf("%d rejected bodies reached the upstream", n)
	}
	if code, b, _ := post(t, r.url+"/v1/route", `{"from":"zone-3/air-temp","value":"hot","to":"zone-3/vent-a"}`); code != 200 {
		t.Errorf("valid route: %d %s", code, b)
	}
}

// noLeak fails when an error body shows a socket address, a path or a Go
// type name.
var leak = regexp.MustCompile(`127\.0\.0\.1|:\d{4,5}\b|/tmp/|\*?\b(?:gw|http|net|json|url|os|router)\.[A-Z]|\b(?:float64|int64|uint64|float32|\[\]string|map\[)`)

func noLeak(t *testing.T, what string, b []byte) {
	t.Helper()
	if leak.Match(b) {
		t.Errorf("%s: error body shows internals: %s", what, b)
	}
}

// TestUpstreamFaults: refused connection → 502, timeout → 504, upstream
// 4xx/5xx pass through with their body; no message names an address or a
// Go type.
func TestUpstreamFaults(t *testing.T) {
	t.Parallel()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	dead := "http://" + ln.Addr().String() + "/v1"
	ln.Close()
	refused := newRig(t, gw.Config{Upstream: dead}, nil)
	code, b, _ := post(t, refused.url+"/v1/chat/completions", chatBody(farQuestion))
	if ec, _ := errorCode(b); code != 502 || ec != "upstream_refused" {
		t.Errorf("refused: %d %s", code, b)
	}
	noLeak(t, "refused", b)

	slow := newRig(t, gw.Config{UpstreamTimeout: 100 * time.Millisecond}, http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		select {
		case <-time.After(5 * time.Second):
		case <-r.Context().Done():
		}
	}))
	code, b, _ = post(t, slow.url+"/v1/chat/completions", chatBody(farQuestion))
	if ec, _ := errorCode(b); code != 504 || ec != "upstream_timeout" {
		t.Errorf("timeout: %d %s", code, b)
	}
	noLeak(t, "timeout", b)

	for _, status := range []int{429, 500, 400} {
		body := fmt.Sprintf(`{"error":{"message":"upstream says %d","type":"x","code":"c%d"}}`, status, status)
		r := newRig(t, gw.Config{}, http.HandlerFunc(func(w http.ResponseWriter, _ *http.Request) {
			w.Header().Set("Content-Type", "application/json")
			w.Header().Set("Retry-After", "7")
			w.WriteHeader(status)
			io.WriteString(w, body)
		}))
		code, b, h := post(t, r.url+"/v1/chat/completions", chatBody(farQuestion))
		if code != status || string(b) != body {
			t.Errorf("upstream %d: got %d %s", status, code, b)
		}
		if status == 429 && h.Get("Retry-After") != "7" {
			t.Errorf("429 lost Retry-After: %q", h.Get("Retry-After"))
		}
	}
}

// TestSlowBody answers 408 to a body slower than BodyTimeout, naming no
// address.
func TestSlowBody(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{BodyTimeout: 150 * time.Millisecond}, nil)
	conn, err := net.Dial("tcp", strings.TrimPrefix(r.url, "http://"))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	fmt.Fprintf(conn, "POST /v1/chat/completions HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: 500\r\n\r\n{\"model\":")
	conn.SetReadDeadline(time.Now().Add(5 * time.Second))
	b, _ := io.ReadAll(conn)
	if !strings.HasPrefix(string(b), "HTTP/1.1 408") || !strings.Contains(string(b), "body_timeout") {
		t.Fatalf("slow body answered %q", b)
	}
	noLeak(t, "slow body", b[strings.Index(string(b), "\r\n\r\n"):])
}

// TestErrorMessages checks that client errors name JSON kinds and fields,
// never Go types, paths or addresses.
func TestErrorMessages(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{}, nil)
	for _, c := range []struct{ path, body string }{
		{"/v1/route", `{"from":1,"value":"hot","to":"x"}`},
		{"/v1/route", `{"from":"a","value":["hot"],"to":"x"}`},
		{"/v1/outcomes", `{"unit":5,"score":1}`},
		{"/v1/outcomes", `{"unit":"u","score":{"a":1}}`},
		{"/v1/chat/completions", `{"messages":"hi"}`},
		{"/v1/chat/completions", `{"messages":[],"stream":"yes"}`},
		{"/v1/chat/completions", `{"messages":[`},
		{"/v1/route", `{"from":"nope","value":"hot","to":"zone-3/vent-a"}`},
		{"/v1/route", `[` + strings.Repeat("[", 100) + strings.Repeat("]", 101)},
	} {
		code, b, _ := post(t, r.url+c.path, c.body)
		if code < 400 || code >= 500 {
			t.Errorf("%s %s: %d %s", c.path, c.body, code, b)
		}
		noLeak(t, c.body, b)
	}
	code, b, _ := post(t, r.url+"/v1/chat/completions", strings.Repeat(" ", gw.DefaultMaxBodyBytes+1))
	if code != 413 {
		t.Errorf("oversized body: %d %s", code, b)
	}
}

// TestAdminRoutes: without a token the admin routes answer only on
// loopback when enabled; with a token, failures are logged and rate-limited.
func TestAdminRoutes(t *testing.T) {
	t.Parallel()
	closed := newRig(t, gw.Config{}, nil)
	if code, b, _ := post(t, closed.url+"/admin/reload-index", ""); code != 403 {
		t.Errorf("no token, not told loopback: %d %s, want 403", code, b)
	}
	open := newRig(t, gw.Config{AdminOpenOnLoopback: true}, nil)
	if code, b, _ := post(t, open.url+"/admin/reload-index", ""); code != 200 {
		t.Errorf("no token, loopback: %d %s, want 200", code, b)
	}
	tok := newRig(t, gw.Config{AdminToken: "s3cret-token"}, nil)
	for i := range 5 {
		if code, _, _ := post(t, tok.url+"/admin/reload-index", "", "Authorization", "Bearer wrong"); code != 401 {
			t.Fatalf("attempt %d: %d, want 401", i, code)
		}
	}
	code, _, h := post(t, tok.url+"/admin/reload-index", "", "Authorization", "Bearer s3cret-token")
	if code != 429 || h.Get("Retry-After") == "" {
		t.Errorf("6th attempt (right token, after 5 failures): %d, want 429 with Retry-After", code)
	}
	if n := strings.Count(tok.logs.String(), "failed admin login"); n != 5 {
		t.Errorf("%d failed logins logged, want 5:\n%s", n, tok.logs.String())
	}
	tok2 := newRig(t, gw.Config{AdminToken: "s3cret-token"}, nil)
	if code, b, _ := post(t, tok2.url+"/admin/reload-index", "", "Authorization", "Bearer s3cret-token"); code != 200 {
		t.Errorf("right token: %d %s", code, b)
	}
}

// TestEntityHashing: with a hash key the decision spans carry no entity
// name in clear.
func TestEntityHashing(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{}, nil, otelx.WithEntityHashKey([]byte("0123456789abcdef-test-key")))
	if code, b, _ := post(t, r.url+"/v1/chat/completions", chatBody(farQuestion), gw.HeaderUnit, "u"); code != 200 {
		t.Fatalf("%d %s", code, b)
	}
	found := false
	for _, s := range r.endedSpans(t, otelx.SpanDecide) {
		for _, a := range s.Attributes {
			v := a.Value.Emit()
			if strings.Contains(v, "bed-11") || strings.Contains(v, "bed-10") {
				t.Errorf("span %s attribute %s shows %q in clear", s.Name, a.Key, v)
			}
			if a.Key == otelx.KeyQueryFrom {
				found = true
			}
		}
	}
	if !found {
		t.Error("no decision span")
	}
}

// TestNewNamesBadField: New's errors wrap ErrBadConfig and name the field.
func TestNewNamesBadField(t *testing.T) {
	t.Parallel()
	idx := sharedIndex(t)
	for _, tc := range []struct {
		cfg  gw.Config
		want string
	}{
		{gw.Config{Upstream: "http://127.0.0.1:1/v1"}, "IndexPath is empty"},
		{gw.Config{IndexPath: idx, Upstream: "ftp://x"}, `Upstream "ftp://x"`},
		{gw.Config{IndexPath: idx, Upstream: "http://127.0.0.1:1/v1", DecideTimeout: -time.Second}, "DecideTimeout is -1s"},
		{gw.Config{IndexPath: idx, Upstream: "http://127.0.0.1:1/v1", MaxBodyBytes: -5}, "MaxBodyBytes is -5"},
		{gw.Config{IndexPath: idx, Upstream: "http://127.0.0.1:1/v1", OutcomeSize: -1}, "OutcomeSize is -1"},
	} {
		s, err := gw.New(tc.cfg)
		if err == nil {
			s.Close()
		}
		if !errors.Is(err, gw.ErrBadConfig) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%+v: %v, want ErrBadConfig naming %s", tc.cfg, err, tc.want)
		}
	}
}
