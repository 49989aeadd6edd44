package bench

import (
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"strconv"

	"github.com/hopwise/hopwise/graphidx"
)

// Generator defaults.
const (
	// DefaultGamma is the degree tail exponent γ of the generated graphs.
	// Co-occurrence and web-like graphs show γ between 2 and 3 (Barabási &
	// Albert 1999; Chung & Lu 2002 use the same range); 2.1 gives heavy hubs.
	DefaultGamma = 2.1
	// DefaultSupportScale scales the mean pair support, see GraphConfig.
	DefaultSupportScale = 2.0
	// maxSupport caps one pair's support (keeps counts far below MaxUint32).
	maxSupport = 1 << 20
	// MaxEntities is the largest graph NewGraph generates.
	MaxEntities = 1 << 26
)

// ErrBadConfig reports a generator or harness setting outside its domain.
var ErrBadConfig = errors.New("bench: bad configuration")

// Value labels of every generated entity (ascending byte order).
const (
	ValueOff = "off"
	ValueOn  = "on"
)

// GraphConfig configures NewGraph.
//
// Entity i (0-based, name "e" + zero-padded i, so ids equal i in an index)
// gets the weight w_i = c·(i+1)^(−1/(γ−1)); c is calibrated so that the
// expected mean degree under Chung–Lu edge probabilities
// p_uv = min(1, w_u·w_v/S), S = Σ w, equals AvgDegree.
//
// Every edge (u, v) is a pair observed in s_uv two-entity contexts, with
// s_uv = 1 + Geometric(mean μ_uv − 1), μ_uv = 1 + SupportScale·ln(1 +
// w_u·w_v/D²): heavy entities co-occur more often, with diminishing
// returns. Each context draws u's value from its own bias P(u=on) ∈
// [0.1, 0.9] and v's value from P(v=on | u) with two uniform edge
// parameters, so the 2×2 count tables carry real dependence. An entity
// without edges is observed alone in one context.
type GraphConfig struct {
	Entities     int     // N, 2 ≤ N ≤ MaxEntities
	AvgDegree    float64 // D, expected mean degree, 0 < D ≤ (N−1)/4
	Gamma        float64 // tail exponent γ in (2, 4); 0 means DefaultGamma
	SupportScale float64 // ≥ 0; 0 means DefaultSupportScale
	Seed         uint64
}

// Graph is a generated power-law locality graph. Edges are not stored: they
// are regenerated, in ascending (u, v) order, from per-entity seeded random
// streams every time they are walked (Miller & Hagberg 2011, "Efficient
// generation of networks with given expected degrees", WAW; O(N + E) per
// walk). NewGraph walks once to compute marginals and degrees.
type Graph struct {
	cfg   GraphConfig
	w     []float64 // weights, descending
	sum   float64   // S = Σ w
	d2    float64   // D²
	names []string
	ents  []graphidx.EntityRecord
	mask  []uint8 // per entity: bit0 off observed, bit1 on observed
	deg   []uint32

	contexts   uint64
	pairs      uint64
	supportSum uint64
}

// NewGraph generates the graph described by cfg. O(N + E) time, O(N) memory.
func NewGraph(cfg GraphConfig) (*Graph, error) {
	if cfg.Gamma == 0 {
		cfg.Gamma = DefaultGamma
	}
	if cfg.SupportScale == 0 {
		cfg.SupportScale = DefaultSupportScale
	}
	switch {
	case cfg.Entities < 2 || cfg.Entities > MaxEntities:
		return nil, fmt.Errorf("%w: entities %d not in [2, %d]", ErrBadConfig, cfg.Entities, MaxEntities)
	case !(cfg.AvgDegree > 0) || cfg.AvgDegree > float64(cfg.Entities-1)/4:
		return nil, fmt.Errorf("%w: avg-degree %g not in (0, (entities−1)/4 = %g]", ErrBadConfig, cfg.AvgDegree, float64(cfg.Entities-1)/4)
	case !(cfg.Gamma > 2 && cfg.Gamma < 4):
		return nil, fmt.Errorf("%w: gamma %g not in (2, 4)", ErrBadConfig, cfg.Gamma)
	case !(cfg.SupportScale >= 0) || math.IsInf(cfg.SupportScale, 0):
		return nil, fmt.Errorf("%w: support scale %g", ErrBadConfig, cfg.SupportScale)
	}
	n := cfg.Entities
	g := &Graph{cfg: cfg, d2: cfg.AvgDegree * cfg.AvgDegree}
	x := make([]float64, n)
	var xs float64
	for i := range x {
		x[i] = math.Pow(float64(i+1), -1/(cfg.Gamma-1))
		xs += x[i]
	}
	c, err := calibrate(x, xs, cfg.AvgDegree)
	if err != nil {
		return nil, err
	}
	g.w = x
	for i := range g.w {
		g.w[i] *= c
	}
	g.sum = c * xs
	width := len(strconv.Itoa(n - 1))
	g.names = make([]string, n)
	for i := range g.names {
		g.names[i] = entityName(i, width)
	}
	g.mask = make([]uint8, n)
	g.deg = make([]uint32, n)
	marg := make([][2]uint64, n)
	gen := newEdgeGen(g)
	var ev event
	for gen.next(&ev) {
		if ev.solo {
			marg[ev.u][0] += uint64(ev.t[0])
			marg[ev.u][1] += uint64(ev.t[1])
			g.contexts += uint64(ev.t[0] + ev.t[1])
			continue
		}
		g.pairs++
		g.deg[ev.u]++
		g.deg[ev.v]++
		var s uint64
		for a := 0; a < 2; a++ {
			for b := 0; b < 2; b++ {
				cnt := uint64(ev.t[a*2+b])
				marg[ev.u][a] += cnt
				marg[ev.v][b] += cnt
				s += cnt
			}
		}
		g.contexts += s
		g.supportSum += s
	}
	g.ents = make([]graphidx.EntityRecord, n)
	for i := range g.ents {
		rec := graphidx.EntityRecord{Name: g.names[i]}
		for v, label := range [2]string{ValueOff, ValueOn} {
			if marg[i][v] > 0 {
				g.mask[i] |= 1 << v
				rec.Values = append(rec.Values, label)
				rec.Marginal = append(rec.Marginal, marg[i][v])
			}
		}
		g.ents[i] = rec
	}
	return g, nil
}

func entityName(i, width int) string {
	s := strconv.Itoa(i)
	b := make([]byte, 0, width+1)
	b = append(b, 'e')
	for j := len(s); j < width; j++ {
		b = append(b, '0')
	}
	return string(append(b, s...))
}

// calibrate finds the scale c with expected mean degree D under
// p_uv = min(1, c·x_u·x_v/X): bisection on log c, each step O(N) by a
// two-pointer sweep (the capped partners of u form a prefix of the
// descending weights, shrinking as u grows).
func calibrate(x []float64, xs, d float64) (float64, error) {
	n := len(x)
	prefix := make([]float64, n+1)
	for i, v := range x {
		prefix[i+1] = prefix[i] + v
	}
	mean := func(c float64) float64 {
		var tot float64
		j := n // capped partners of u: v < j
		for u := 0; u < n; u++ {
			for j > 0 && c*x[u]*x[j-1] < xs {
				j--
			}
			deg := float64(j)
			rest := xs - prefix[j]
			if u < j {
				deg--
			} else {
				rest -= x[u]
			}
			tot += deg + c*x[u]/xs*rest
		}
		return tot / float64(n)
	}
	lo := d * float64(n) / xs // uncapped: mean ≤ D
	hi := lo
	for i := 0; mean(hi) < d; i++ {
		if i > 60 {
			return 0, fmt.Errorf("%w: average degree %g is not reachable with %d entities", ErrBadConfig, d, n)
		}
		lo = hi
		hi *= 2
	}
	for i := 0; i < 50 && hi/lo > 1+1e-9; i++ {
		mid := math.Sqrt(lo * hi)
		if mean(mid) < d {
			lo = mid
		} else {
			hi = mid
		}
	}
	return hi, nil
}

// NumEntities returns N.
func (g *Graph) NumEntities() int { return len(g.w) }

// NumPairs returns the number of generated edges.
func (g *Graph) NumPairs() uint64 { return g.pairs }

// NumContexts returns the number of contexts (pair contexts plus one per
// isolated entity).
func (g *Graph) NumContexts() uint64 { return g.contexts }

// MeanDegree returns the realised mean degree 2E/N.
func (g *Graph) MeanDegree() float64 { return 2 * float64(g.pairs) / float64(len(g.w)) }

// MeanSupport returns the mean pair support.
func (g *Graph) MeanSupport() float64 {
	if g.pairs == 0 {
		return 0
	}
	return float64(g.supportSum) / float64(g.pairs)
}

// Degree returns the realised degree of entity i.
func (g *Graph) Degree(i int) int { return int(g.deg[i]) }

// Name returns the name of entity i.
func (g *Graph) Name(i int) string { return g.names[i] }

// Values returns the observed value labels of entity i (ascending).
func (g *Graph) Values(i int) []string { return g.ents[i].Values }

// Config returns the configuration with defaults filled in.
func (g *Graph) Config() GraphConfig { return g.cfg }

// MaxDegree returns the entity with the largest degree and that degree.
func (g *Graph) MaxDegree() (int, int) {
	best := 0
	for i, d := range g.deg {
		if d > g.deg[best] {
			best = i
		}
	}
	return best, int(g.deg[best])
}

// Source returns the graph as a graphidx.Source for graphidx.WriteFile,
// without going through contexts. Pairs regenerates the edges on each call.
func (g *Graph) Source() graphidx.Source { return (*graphSource)(g) }

type graphSource Graph

func (s *graphSource) Contexts() uint64                  { return s.contexts }
func (s *graphSource) Entities() []graphidx.EntityRecord { return s.ents }

// Pairs yields every edge in ascending (A, B) order with its count table
// restricted to the observed values of both entities.
func (s *graphSource) Pairs(fn func(graphidx.PairRecord) error) error {
	g := (*Graph)(s)
	gen := newEdgeGen(g)
	var ev event
	var buf [4]uint32
	for gen.next(&ev) {
		if ev.solo {
			continue
		}
		ma, mb := g.mask[ev.u], g.mask[ev.v]
		n := 0
		for a := 0; a < 2; a++ {
			if ma&(1<<a) == 0 {
				continue
			}
			for b := 0; b < 2; b++ {
				if mb&(1<<b) == 0 {
					continue
				}
				buf[n] = ev.t[a*2+b]
				n++
			}
		}
		if err := fn(graphidx.PairRecord{A: ev.u, B: ev.v, Counts: buf[:n]}); err != nil {
			return err
		}
	}
	return nil
}

// Contexts returns a reader over the graph's contexts for graphidx.Build or
// graphidx.Compile: for every edge, one two-entity context per count of its
// table, then one single-entity context per isolated entity, in entity
// order. Compiling them yields exactly the counts of Source.
func (g *Graph) Contexts() graphidx.ContextReader {
	return &contextReader{g: g, gen: newEdgeGen(g), cell: 4}
}

type contextReader struct {
	g    *Graph
	gen  *edgeGen
	ev   event
	cell int
	left uint32
	done bool
	obs  [2]graphidx.Observation
}

var labels = [2]string{ValueOff, ValueOn}

// Next implements graphidx.ContextReader. The Obs slice is reused.
func (r *contextReader) Next() (graphidx.Context, error) {
	for r.left == 0 {
		if r.done {
			return graphidx.Context{}, io.EOF
		}
		r.cell++
		limit := 4
		if r.ev.solo {
			limit = 2
		}
		if r.cell >= limit {
			if !r.gen.next(&r.ev) {
				r.done = true
				return graphidx.Context{}, io.EOF
			}
			r.cell = 0
		}
		r.left = r.ev.t[r.cell]
	}
	r.left--
	if r.ev.solo {
		r.obs[0] = graphidx.Observation{Entity: r.g.names[r.ev.u], Value: labels[r.cell]}
		return graphidx.Context{Obs: r.obs[:1]}, nil
	}
	r.obs[0] = graphidx.Observation{Entity: r.g.names[r.ev.u], Value: labels[r.cell>>1]}
	r.obs[1] = graphidx.Observation{Entity: r.g.names[r.ev.v], Value: labels[r.cell&1]}
	return graphidx.Context{Obs: r.obs[:2]}, nil
}

// event is one generated edge with its 2×2 table (t[a*2+b] counts u=a,
// v=b, value 0 = off), or (solo) an isolated entity's contexts
// (t[0] off, t[1] on).
type event struct {
	solo bool
	u, v uint32
	t    [4]uint32
}

// edgeGen walks the edges of g in ascending (u, v) order, the Miller–Hagberg
// skip sampler over the descending weights: from the last candidate v with
// probability bound p, skip Geometric(p) candidates, accept the next one
// with probability q/p (q its own probability), set p = q.
type edgeGen struct {
	g       *Graph
	src     *rand.PCG
	rng     *rand.Rand
	u, v    int
	p       float64
	inU     bool
	touched []uint64
}

func newEdgeGen(g *Graph) *edgeGen {
	src := rand.NewPCG(0, 0)
	return &edgeGen{g: g, src: src, rng: rand.New(src), touched: make([]uint64, (len(g.w)+63)/64)}
}

func (e *edgeGen) mark(i int) { e.touched[i>>6] |= 1 << (i & 63) }

func (e *edgeGen) next(ev *event) bool {
	g := e.g
	n := len(g.w)
	for e.u < n {
		u := e.u
		if !e.inU {
			e.src.Seed(g.cfg.Seed, uint64(u)*0x9E3779B97F4A7C15+0x632BE59BD9B4E019)
			e.v = u + 1
			e.p = 0
			if e.v < n {
				e.p = math.Min(1, g.w[u]*g.w[e.v]/g.sum)
			}
			e.inU = true
		}
		for e.v < n && e.p > 0 {
			if e.p < 1 {
				r := 1 - e.rng.Float64() // (0, 1]
				skip := math.Floor(math.Log(r) / math.Log1p(-e.p))
				if skip >= float64(n-e.v) {
					e.v = n
					break
				}
				e.v += int(skip)
			}
			q := math.Min(1, g.w[u]*g.w[e.v]/g.sum)
			accept := e.rng.Float64() < q/e.p
			v := e.v
			e.p = q
			e.v++
			if accept {
				e.fill(ev, u, v)
				e.mark(u)
				e.mark(v)
				return true
			}
		}
		e.inU = false
		e.u++
		if e.touched[u>>6]&(1<<(u&63)) == 0 {
			*ev = event{solo: true, u: uint32(u)}
			if e.rng.Float64() < bias(g.cfg.Seed, u) {
				ev.t[1] = 1
			} else {
				ev.t[0] = 1
			}
			return true
		}
	}
	return false
}

// fill draws the support and the 2×2 table of edge (u, v).
func (e *edgeGen) fill(ev *event, u, v int) {
	g, rng := e.g, e.rng
	*ev = event{u: uint32(u), v: uint32(v)}
	mu := 1 + g.cfg.SupportScale*math.Log1p(g.w[u]*g.w[v]/g.d2)
	s := 1
	if mu > 1 {
		// Geometric on {0, 1, ...} with mean mu−1: P(k) = (1−p)^k p, p = 1/mu.
		r := 1 - rng.Float64()
		k := math.Floor(math.Log(r) / math.Log1p(-1/mu))
		if k > maxSupport-1 {
			k = maxSupport - 1
		}
		s += int(k)
	}
	pu := bias(g.cfg.Seed, u)
	onGivenOn, onGivenOff := rng.Float64(), rng.Float64()
	for i := 0; i < s; i++ {
		a := 0
		pv := onGivenOff
		if rng.Float64() < pu {
			a, pv = 1, onGivenOn
		}
		b := 0
		if rng.Float64() < pv {
			b = 1
		}
		ev.t[a*2+b]++
	}
}

// bias is entity i's P(value = on), in [0.1, 0.9], from a SplitMix64 hash
// of (seed, i) (Steele, Lea & Flood 2014).
func bias(seed uint64, i int) float64 {
	z := seed ^ (uint64(i)+1)*0x9E3779B97F4A7C15
	z = (z ^ z>>30) * 0xBF58476D1CE4E5B9
	z = (z ^ z>>27) * 0x94D049BB133111EB
	z ^= z >> 31
	return 0.1 + 0.8*float64(z>>11)/(1<<53)
}
