package gw

import (
	"context"
	"errors"
	"fmt"
	"hash/fnv"
	"math"
	"math/rand/v2"
	"sync"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// Request is what the gateway asks an Answerer: the query, the routing mode
// chosen by the router and, for chain mode, the bridges to reason through in
// order.
type Request struct {
	Query   router.Query
	Mode    router.Mode
	Bridges []string
}

// Step is one intermediate conclusion of a chained answer.
type Step struct {
	Entity string
	Values []string
	Dist   []float64
}

// Answer is an Answerer's reply.
type Answer struct {
	Values []string  // the target's value labels
	Dist   []float64 // the answered distribution over Values
	Steps  []Step    // chain mode: one per bridge, in order
	// Token usage of the call (input prompt, output completion).
	InputTokens, OutputTokens int64
}

// Value returns the most likely value ("" for an empty answer).
func (a Answer) Value() string {
	best := -1
	for i, p := range a.Dist {
		if best < 0 || p > a.Dist[best] {
			best = i
		}
	}
	if best < 0 || best >= len(a.Values) {
		return ""
	}
	return a.Values[best]
}

// Answerer produces the answer once the route is chosen: a language model
// behind the gateway, or a simulation of one. Implementations must be safe
// for concurrent use and should honour ctx.
type Answerer interface {
	Answer(ctx context.Context, req Request) (Answer, error)
}

// Corpus is what Sim reads: the locality index (*graphidx.Index satisfies it).
type Corpus interface {
	router.Graph
	Marginal(id graphidx.EntityID) []uint64
}

// IndexSwapper is implemented by answerers that read the index themselves.
// On /admin/reload-index the server opens a fresh handle for the answerer,
// calls SwapIndex, and closes the returned old corpus when it implements
// io.Closer. SwapIndex must return only once no call uses the old corpus.
type IndexSwapper interface {
	SwapIndex(c Corpus) (old Corpus)
}

// ErrUnknown is returned by Sim for entities or values not in its corpus.
var ErrUnknown = errors.New("gw: unknown entity or value")

// SimOptions tune Sim. Zero fields take the defaults named beside them.
type SimOptions struct {
	// Sigma is the noise scale σ (default 0.5): a conditional learned from
	// n co-occurrences is perturbed by Normal(0, σ²/(n+1)) per value.
	Sigma float64
	// Alpha is the add-α smoothing of counts (default 1).
	Alpha float64
	// Seed mixes into the per-query noise stream (default 0).
	Seed uint64
	// Token model: prompt = PromptTokens + BridgeTokens·m; completion =
	// AnswerTokens, plus StepTokens per hop in chain mode (m+1 hops).
	// Defaults 120, 24, 16, 48.
	PromptTokens, BridgeTokens, AnswerTokens, StepTokens int64
}

// Sim simulates a language model trained on the local corpus behind the
// index. It knows each co-occurring pair's conditional P(b | a) as well as its
// support allows:
//
//	P̃(b | a=u) = normalise(max(floor, (n_uv + α)/(n_u + αK_b) + ε_v)),  ε_v ~ N(0, σ²/(n+1))
//
// where n is the pair's support. A direct answer uses the endpoints' own
// conditional, so it degrades to a noisy guess around the target's marginal
// when they were rarely or never seen together (n ≈ 0). A chained answer
// follows the bridges step by step, pushing the distribution through each
// local conditional in turn (d_(k+1) = d_kᵀ P̃(b_(k+1) | b_k)), so its noise
// is that of the well-supported local steps; its remaining error is the bias
// of bridges that do not separate the endpoints.
//
// The noise is drawn from a stream seeded by the query (key, endpoints, mode,
// bridges) and SimOptions.Seed, so equal requests get equal answers. Cost:
// O(Σ K_a K_b) over the hops. Safe for concurrent use.
type Sim struct {
	opt SimOptions
	mu  sync.RWMutex
	c   Corpus
}

// NewSim returns a simulated answerer reading c.
func NewSim(c Corpus, opt SimOptions) (*Sim, error) {
	if c == nil {
		return nil, errors.New("gw: NewSim: nil corpus")
	}
	if opt.Sigma == 0 {
		opt.Sigma = 0.5
	}
	if opt.Alpha == 0 {
		opt.Alpha = 1
	}
	if opt.Sigma < 0 || opt.Alpha < 0 || math.IsNaN(opt.Sigma) || math.IsNaN(opt.Alpha) || math.IsInf(opt.Sigma, 0) || math.IsInf(opt.Alpha, 0) {
		return nil, fmt.Errorf("gw: NewSim: sigma %v and alpha %v must be finite and ≥ 0", opt.Sigma, opt.Alpha)
	}
	def := func(p *int64, v int64) {
		if *p == 0 {
			*p = v
		}
	}
	def(&opt.PromptTokens, 120)
	def(&opt.BridgeTokens, 24)
	def(&opt.AnswerTokens, 16)
	def(&opt.StepTokens, 48)
	return &Sim{opt: opt, c: c}, nil
}

// SwapIndex implements IndexSwapper.
func (s *Sim) SwapIndex(c Corpus) Corpus {
	s.mu.Lock()
	defer s.mu.Unlock()
	old := s.c
	s.c = c
	return old
}

const simFloor = 1e-3

// Answer implements Answerer.
func (s *Sim) Answer(ctx context.Context, req Request) (Answer, error) {
	if err := ctx.Err(); err != nil {
		return Answer{}, err
	}
	s.mu.RLock()
	defer s.mu.RUnlock()
	c := s.c
	if c == nil {
		return Answer{}, router.ErrClosed
	}
	q := req.Query
	from, ok := c.Lookup(q.From)
	if !ok {
		return Answer{}, fmt.Errorf("%w: entity %q", ErrUnknown, q.From)
	}
	to, ok := c.Lookup(q.To)
	if !ok {
		return Answer{}, fmt.Errorf("%w: entity %q", ErrUnknown, q.To)
	}
	u, ok := c.ValueIndex(from, q.Value)
	if !ok {
		return Answer{}, fmt.Errorf("%w: value %q of %q", ErrUnknown, q.Value, q.From)
	}
	rng := s.stream(req)
	d := make([]float64, c.NumValues(from))
	d[u] = 1
	path := []graphidx.EntityID{from}
	if req.Mode == router.ModeChain {
		for _, name := range req.Bridges {
			id, ok := c.Lookup(name)
			if !ok {
				return Answer{}, fmt.Errorf("%w: bridge %q", ErrUnknown, name)
			}
			path = append(path, id)
		}
	}
	path = append(path, to)
	ans := Answer{InputTokens: s.opt.PromptTokens, OutputTokens: s.opt.AnswerTokens}
	for k := 1; k < len(path); k++ {
		d = s.push(c, rng, d, path[k-1], path[k])
		if k < len(path)-1 {
			ans.Steps = append(ans.Steps, Step{Entity: c.Name(path[k]), Values: c.Values(path[k]), Dist: d})
		}
	}
	if req.Mode == router.ModeChain {
		m := int64(len(path) - 2)
		ans.InputTokens += s.opt.BridgeTokens * m
		ans.OutputTokens += s.opt.StepTokens * (m + 1)
	}
	ans.Values, ans.Dist = c.Values(to), d
	return ans, nil
}

// push returns dᵀ P̃(b | a) for the learned, noisy conditional of the pair.
func (s *Sim) push(c Corpus, rng *rand.Rand, d []float64, a, b graphidx.EntityID) []float64 {
	ka, kb := c.NumValues(a), c.NumValues(b)
	ps, ok := c.Pair(a, b)
	var n uint64
	if ok {
		n = ps.Support()
	}
	marg := c.Marginal(b)
	var msum float64
	for _, m := range marg {
		msum += float64(m)
	}
	sd := s.opt.Sigma / math.Sqrt(float64(n)+1)
	out := make([]float64, kb)
	row := make([]float64, kb)
	for u := range ka {
		if d[u] == 0 {
			continue
		}
		var tot float64
		for v := range kb {
			var p float64
			if ok && ps.RowSum(u) > 0 {
				p = (float64(ps.Count(u, v)) + s.opt.Alpha) / (float64(ps.RowSum(u)) + s.opt.Alpha*float64(kb))
			} else if msum > 0 && v < len(marg) {
				p = (float64(marg[v]) + s.opt.Alpha) / (msum + s.opt.Alpha*float64(kb))
			} else {
				p = 1 / float64(kb)
			}
			p = max(p+sd*rng.NormFloat64(), simFloor)
			row[v] = p
			tot += p
		}
		for v := range kb {
			out[v] += d[u] * row[v] / tot
		}
	}
	return out
}

// stream seeds the per-request noise from the request's content.
func (s *Sim) stream(req Request) *rand.Rand {
	h := fnv.New64a()
	q := req.Query
	for _, p := range []string{q.Key, q.From, q.Value, q.To, req.Mode.String()} {
		h.Write([]byte(p))
		h.Write([]byte{0})
	}
	for _, b := range req.Bridges {
		h.Write([]byte(b))
		h.Write([]byte{0})
	}
	return rand.New(rand.NewPCG(h.Sum64(), s.opt.Seed))
}
