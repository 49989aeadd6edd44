package simmodel

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"hash/fnv"
	"math"
	"math/rand/v2"
	"net/http"
	"strings"
	"sync/atomic"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// Corpus is what Model reads: the locality index (*graphidx.Index
// satisfies it).
type Corpus interface {
	router.Graph
	Marginal(id graphidx.EntityID) []uint64
}

// Options tune Model. Zero fields take the defaults named beside them.
type Options struct {
	// Sigma is the noise scale σ (default 0.5): a conditional learned from
	// n co-occurrences is perturbed by Normal(0, σ²/(n+1)) per value.
	Sigma float64
	// Alpha is the add-α smoothing of counts (default 1).
	Alpha float64
	// Seed mixes into the per-question noise stream (default 0).
	Seed uint64
	// Delay holds every answer this long before the first byte (tests of
	// upstream timeouts); 0 answers at once.
	Delay time.Duration
	// Lexicon links questions and plans; nil links the index's entity
	// names as written.
	Lexicon *graphidx.Lexicon
}

// Model is the simulated model server. It is an http.Handler.
type Model struct {
	opt    Options
	c      Corpus
	lex    *graphidx.Lexicon
	former gw.LexiconFormer
	calls  atomic.Int64
}

// New returns a simulated model over c.
func New(c Corpus, opt Options) (*Model, error) {
	if c == nil {
		return nil, errors.New("simmodel: nil corpus")
	}
	if opt.Sigma == 0 {
		opt.Sigma = 0.5
	}
	if opt.Alpha == 0 {
		opt.Alpha = 1
	}
	if !(opt.Sigma >= 0 && opt.Alpha >= 0) || math.IsInf(opt.Sigma, 0) || math.IsInf(opt.Alpha, 0) || opt.Delay < 0 {
		return nil, fmt.Errorf("simmodel: sigma %v, alpha %v and delay %v must be finite and ≥ 0", opt.Sigma, opt.Alpha, opt.Delay)
	}
	lex := opt.Lexicon
	if lex == nil {
		var err error
		if lex, err = gw.IndexLexicon(c); err != nil {
			return nil, fmt.Errorf("simmodel: %w", err)
		}
	}
	return &Model{opt: opt, c: c, lex: lex, former: gw.LexiconFormer{Lex: lex, Vocab: c}}, nil
}

// Calls is the number of chat requests answered.
func (m *Model) Calls() int64 { return m.calls.Load() }

// Step is one intermediate conclusion of a step-by-step answer.
type Step struct {
	Entity string
	Values []string
	Dist   []float64
}

// Answer is the model's belief about the target.
type Answer struct {
	Query  router.Query
	Values []string  // the target's labels
	Dist   []float64 // the answered distribution over Values
	Steps  []Step    // one per bridge followed, in order
}

// Value returns the most likely value.
func (a Answer) Value() string {
	best := 0
	for i, p := range a.Dist {
		if p > a.Dist[best] {
			best = i
		}
	}
	if best >= len(a.Values) {
		return ""
	}
	return a.Values[best]
}

// Think answers the question in text, through bridges when given (empty:
// directly). The noise comes from a stream seeded by the question, the
// bridges and Options.Seed, so equal requests get equal answers. Cost:
// O(Σ K_a K_b) over the hops.
//
// The model knows each co-occurring pair's conditional as well as its
// support allows:
//
//	P̃(b | a=u) = normalise(max(floor, (n_uv + α)/(n_u + αK_b) + ε_v)),  ε_v ~ N(0, σ²/(n+1))
//
// so a direct answer about a pair rarely seen together is a noisy guess
// around the target's marginal, and a chained answer carries only the
// noise of its well-supported local steps (d_(k+1) = d_kᵀ P̃(b_(k+1) | b_k)).
func (m *Model) Think(q router.Query, bridges []string) (Answer, error) {
	c := m.c
	from, ok := c.Lookup(q.From)
	if !ok {
		return Answer{}, fmt.Errorf("unknown entity %q", q.From)
	}
	to, ok := c.Lookup(q.To)
	if !ok {
		return Answer{}, fmt.Errorf("unknown entity %q", q.To)
	}
	u, ok := c.ValueIndex(from, q.Value)
	if !ok {
		return Answer{}, fmt.Errorf("unknown value %q of %q", q.Value, q.From)
	}
	h := fnv.New64a()
	for _, p := range append([]string{q.From, q.Value, q.To}, bridges...) {
		h.Write([]byte(p))
		h.Write([]byte{0})
	}
	rng := rand.New(rand.NewPCG(h.Sum64(), m.opt.Seed))
	d := make([]float64, c.NumValues(from))
	d[u] = 1
	path := []graphidx.EntityID{from}
	for _, name := range bridges {
		id, ok := c.Lookup(name)
		if !ok {
			return Answer{}, fmt.Errorf("unknown bridge %q", name)
		}
		path = append(path, id)
	}
	path = append(path, to)
	a := Answer{Query: q}
	for k := 1; k < len(path); k++ {
		d = m.push(rng, d, path[k-1], path[k])
		if k < len(path)-1 {
			a.Steps = append(a.Steps, Step{Entity: c.Name(path[k]), Values: c.Values(path[k]), Dist: d})
		}
	}
	a.Values, a.Dist = c.Values(to), d
	return a, nil
}

const floor = 1e-3

// push returns dᵀ P̃(b | a) for the learned, noisy conditional of the pair.
func (m *Model) push(rng *rand.Rand, d []float64, a, b graphidx.EntityID) []float64 {
	c := m.c
	ka, kb := c.NumValues(a), c.NumValues(b)
	ps, ok := c.Pair(a, b)
	var n uint64
	if ok {
		n = ps.Support()
	}
	marg := c.Marginal(b)
	var msum float64
	for _, x := range marg {
		msum += float64(x)
	}
	sd := m.opt.Sigma / math.Sqrt(float64(n)+1)
	out := make([]float64, kb)
	row := make([]float64, kb)
	for u := range ka {
		if d[u] == 0 {
			continue
		}
		var tot float64
		for v := range kb {
			var p float64
			switch {
			case ok && ps.RowSum(u) > 0:
				p = (float64(ps.Count(u, v)) + m.opt.Alpha) / (float64(ps.RowSum(u)) + m.opt.Alpha*float64(kb))
			case msum > 0 && v < len(marg):
				p = (float64(marg[v]) + m.opt.Alpha) / (msum + m.opt.Alpha*float64(kb))
			default:
				p = 1 / float64(kb)
			}
			p = max(p+sd*rng.NormFloat64(), floor)
			row[v] = p
			tot += p
		}
		for v := range kb {
			out[v] += d[u] * row[v] / tot
		}
	}
	return out
}

// Text writes the answer as the model's reply: one line per step, then
// "Answer: <value>".
func (a Answer) Text() string {
	var b strings.Builder
	for i, s := range a.Steps {
		v, p := top(s.Values, s.Dist)
		fmt.Fprintf(&b, "Step %d: %s is most likely %s (p = %.2f).\n", i+1, s.Entity, v, p)
	}
	v, p := top(a.Values, a.Dist)
	if len(a.Steps) > 0 {
		fmt.Fprintf(&b, "Step %d: so %s is most likely %s (p = %.2f).\n", len(a.Steps)+1, a.Query.To, v, p)
	} else {
		fmt.Fprintf(&b, "Given %s is %s, %s is most likely %s (p = %.2f).\n", a.Query.From, a.Query.Value, a.Query.To, v, p)
	}
	fmt.Fprintf(&b, "Answer: %s", v)
	return b.String()
}

func top(values []string, dist []float64) (string, float64) {
	best := 0
	for i, p := range dist {
		if p > dist[best] {
			best = i
		}
	}
	if best >= len(values) {
		return "", 0
	}
	return values[best], dist[best]
}

// ParseAnswer returns the value after the last "Answer:" in a reply.
func ParseAnswer(text string) (string, bool) {
	i := strings.LastIndex(text, "Answer:")
	if i < 0 {
		return "", false
	}
	v := strings.TrimSpace(text[i+len("Answer:"):])
	if j := strings.IndexAny(v, " \n\t.,"); j >= 0 {
		v = v[:j]
	}
	return v, v != ""
}

// Tokens estimates the tokens of a text: about four characters per token
// (common practice for English text), at least one for a non-empty text.
func Tokens(s string) int64 {
	if s == "" {
		return 0
	}
	return int64((len(s) + 3) / 4)
}

// Completion is the part of a non-streamed chat completion a client of
// the simulated model reads: the reply text and the usage.
type Completion struct {
	Choices []struct {
		Message struct {
			Content string `json:"content"`
		} `json:"message"`
	} `json:"choices"`
	Usage struct {
		PromptTokens     int64 `json:"prompt_tokens"`
		CompletionTokens int64 `json:"completion_tokens"`
	} `json:"usage"`
}

// request is the part of a chat-completions body the model reads.
type request struct {
	Model    string `json:"model"`
	Messages []struct {
		Role    string          `json:"role"`
		Content json.RawMessage `json:"content"`
	} `json:"messages"`
	Stream        bool `json:"stream"`
	StreamOptions *struct {
		IncludeUsage bool `json:"include_usage"`
	} `json:"stream_options"`
}

func content(raw json.RawMessage) string {
	var s string
	if json.Unmarshal(raw, &s) == nil {
		return s
	}
	var parts []struct {
		Type, Text string
	}
	if json.Unmarshal(raw, &parts) == nil {
		var b strings.Builder
		for _, p := range parts {
			if p.Type == "text" {
				b.WriteString(p.Text)
				b.WriteByte('\n')
			}
		}
		return b.String()
	}
	return ""
}

// plan reads the bridges of a plan from the system messages: the entities
// they name, in order, other than the question's endpoints, each once.
func (m *Model) plan(system string, q router.Query) []string {
	ms, err := m.lex.Link(system)
	if err != nil {
		return nil
	}
	var out []string
	seen := map[string]bool{q.From: true, q.To: true}
	for _, mt := range ms {
		if !seen[mt.Entity] {
			seen[mt.Entity] = true
			out = append(out, mt.Entity)
		}
	}
	return out
}

// reply answers one parsed request: the reply text and its usage.
func (m *Model) reply(req request) (text string, in, out int64) {
	var system, question strings.Builder
	in = 3 // every reply is primed with a few tokens (common practice)
	for _, msg := range req.Messages {
		t := content(msg.Content)
		in += 4 + Tokens(t) // per-message framing, common practice
		switch msg.Role {
		case "system", "developer":
			system.WriteString(t)
			system.WriteByte('\n')
		case "user":
			question.Reset()
			question.WriteString(t)
		}
	}
	q, _, ok := m.former.Form(question.String())
	if !ok {
		text = "I can answer questions about the greenhouse: name a sensor, vent or bed and its state, and ask about another."
		return text, in, Tokens(text)
	}
	a, err := m.Think(q, m.plan(system.String(), q))
	if err != nil {
		text = "I do not know " + err.Error() + "."
		return text, in, Tokens(text)
	}
	text = a.Text()
	return text, in, Tokens(text)
}

// ServeHTTP implements http.Handler: POST /v1/chat/completions (also
// /chat/completions).
func (m *Model) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	if r.Method != http.MethodPost || !strings.HasSuffix(r.URL.Path, "/chat/completions") {
		writeErr(w, http.StatusNotFound, "not_found", "POST /v1/chat/completions only")
		return
	}
	var req request
	if err := json.NewDecoder(http.MaxBytesReader(w, r.Body, 4<<20)).Decode(&req); err != nil {
		writeErr(w, http.StatusBadRequest, "invalid_request", "the body is not a chat-completions request")
		return
	}
	if len(req.Messages) == 0 {
		writeErr(w, http.StatusBadRequest, "invalid_request", "messages is empty")
		return
	}
	if m.opt.Delay > 0 {
		select {
		case <-time.After(m.opt.Delay):
		case <-r.Context().Done():
			return
		}
	}
	m.calls.Add(1)
	text, in, out := m.reply(req)
	id := fmt.Sprintf("chatcmpl-sim%d", m.calls.Load())
	created := time.Now().Unix()
	model := req.Model
	if model == "" {
		model = "greenhouse-sim"
	}
	if !req.Stream {
		w.Header().Set("Content-Type", "application/json")
		_ = json.NewEncoder(w).Encode(map[string]any{
			"id": id, "object": "chat.completion", "created": created, "model": model,
			"choices": []any{map[string]any{"index": 0, "finish_reason": "stop",
				"message": map[string]any{"role": "assistant", "content": text}}},
			"usage": map[string]any{"prompt_tokens": in, "completion_tokens": out, "total_tokens": in + out},
		})
		return
	}
	w.Header().Set("Content-Type", "text/event-stream")
	w.Header().Set("Cache-Control", "no-cache")
	rc := http.NewResponseController(w)
	send := func(v any) {
		var b bytes.Buffer
		b.WriteString("data: ")
		_ = json.NewEncoder(&b).Encode(v) // ends with '\n'
		b.WriteByte('\n')
		_, _ = w.Write(b.Bytes())
		_ = rc.Flush()
	}
	chunk := func(delta map[string]any, finish any) map[string]any {
		return map[string]any{"id": id, "object": "chat.completion.chunk", "created": created, "model": model,
			"choices": []any{map[string]any{"index": 0, "delta": delta, "finish_reason": finish}}}
	}
	send(chunk(map[string]any{"role": "assistant", "content": ""}, nil))
	for _, piece := range pieces(text, 24) {
		send(chunk(map[string]any{"content": piece}, nil))
	}
	send(chunk(map[string]any{}, "stop"))
	if req.StreamOptions != nil && req.StreamOptions.IncludeUsage {
		send(map[string]any{"id": id, "object": "chat.completion.chunk", "created": created, "model": model,
			"choices": []any{}, "usage": map[string]any{"prompt_tokens": in, "completion_tokens": out, "total_tokens": in + out}})
	}
	_, _ = w.Write([]byte("data: [DONE]\n\n"))
	_ = rc.Flush()
}

// pieces splits s into chunks of about n bytes at spaces.
func pieces(s string, n int) []string {
	var out []string
	for len(s) > n {
		i := strings.IndexByte(s[n:], ' ')
		if i < 0 {
			break
		}
		out = append(out, s[:n+i+1])
		s = s[n+i+1:]
	}
	if s != "" {
		out = append(out, s)
	}
	return out
}

func writeErr(w http.ResponseWriter, status int, code, msg string) {
	w.Header().Set("Content-Type", "application/json")
	w.WriteHeader(status)
	_ = json.NewEncoder(w).Encode(map[string]any{"error": map[string]any{"message": msg, "type": "invalid_request_error", "code": code}})
}
