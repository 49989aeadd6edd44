package world

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
)

// Stream identifiers for the PCG generator: each part of a world draws from
// its own stream of the same seed, so that changing one setting (say, the
// number of held-out pairs) leaves the other parts unchanged.
const (
	streamStructure = 0x9e3779b97f4a7c15
	streamCPT       = 0xbf58476d1ce4e5b9
	streamHeldOut   = 0x94d049bb133111eb
	streamSampler   = 0xd6e8feb86659fd93
	streamWrong     = 0xa0761d6478bd642f
)

// MaxValues is the most values a variable may have (Config.Values, the
// labels of a Variable): the index's limit (graphidx.MaxValues).
const MaxValues = 64

// MaxCPTCells is the most cells Generate gives one conditional table (K^(P+1)
// for P parents of K values): beyond it the table, and exact inference over
// it, would not fit in memory. About 32 MiB of float64.
const MaxCPTCells = 1 << 22

// MaxEdges returns the most directed edges Generate can place among vars
// variables when each has at most maxParents parents (0: no cap): vars·(vars
// − 1)/2 without a cap, Σ_pos min(pos, maxParents) with one. O(vars).
func MaxEdges(vars, maxParents int) int {
	if vars < 1 {
		return 0
	}
	if maxParents <= 0 {
		return vars * (vars - 1) / 2
	}
	m := 0
	for pos := range vars {
		m += min(pos, maxParents)
	}
	return m
}

// CPTFits reports whether a variable of k values with the given number of
// parents (of k values each) has a conditional table of at most MaxCPTCells
// cells. O(parents).
func CPTFits(k, parents int) bool {
	if k < 1 || parents < 0 {
		return false
	}
	cells := k
	for range parents {
		if cells > MaxCPTCells/k {
			return false
		}
		cells *= k
	}
	return true
}

func newRand(seed int64, stream uint64) *rand.Rand {
	return rand.New(rand.NewPCG(uint64(seed), stream))
}

// Config describes a random world for Generate. The zero value of each field
// selects the default named beside it.
type Config struct {
	// Vars is the number of variables N (default 100).
	Vars int
	// Edges is the number of directed edges E (default = Vars; a negative
	// value means no edges). Each edge is a
	// distinct pair drawn uniformly among the pairs that respect a random
	// topological order and MaxParents.
	Edges int
	// MaxParents caps the parents per variable (default 0 = no cap).
	MaxParents int
	// Values is the number of values K of every variable (default 2).
	Values int
	// CPTAlpha and CPTBeta are the Beta parameters of P(X=1 | parents) for
	// binary variables (default 0.2 and 0.2). For K > 2 each row is
	// Dirichlet(CPTAlpha, …, CPTAlpha).
	CPTAlpha, CPTBeta float64
	// Names optionally gives the N variable names; by default v000, v001, …
	// (zero-padded to at least 3 digits).
	Names []string
	// Labels optionally gives the K value labels of every variable, in
	// ascending byte order; by default "0", "1", … .
	Labels []string
	// HeldOut is the number of held-out pairs to choose (default 0 = none; a
	// negative value also means none). See World.PickHeldOut.
	HeldOut int
	// MinHeldOutMI is the least mutual information, in nats, of a held-out
	// pair (default 0.01).
	MinHeldOutMI float64
}

// EvalConfig returns the world of the eval targets: 100 binary
// variables, 100 edges, default Beta(0.2, 0.2) CPTs and 30 held-out pairs of
// mutual information ≥ 0.01 nats.
func EvalConfig() Config {
	return Config{Vars: 100, Edges: 100, HeldOut: 30}
}

func (c Config) withDefaults() (Config, error) {
	if c.Vars == 0 {
		c.Vars = 100
	}
	if c.Vars < 1 {
		return c, fmt.Errorf("%w: Vars = %d, want ≥ 1", ErrInvalidConfig, c.Vars)
	}
	if c.Edges == 0 {
		c.Edges = c.Vars
	}
	if c.Edges < 0 {
		c.Edges = 0
	}
	if c.MaxParents < 0 {
		return c, fmt.Errorf("%w: MaxParents = %d, want ≥ 0", ErrInvalidConfig, c.MaxParents)
	}
	if c.Values == 0 {
		c.Values = 2
	}
	if c.Values < 2 || c.Values > MaxValues {
		return c, fmt.Errorf("%w: Values = %d, want 2..%d", ErrInvalidConfig, c.Values, MaxValues)
	}
	if c.CPTAlpha == 0 {
		c.CPTAlpha = 0.2
	}
	if c.CPTBeta == 0 {
		c.CPTBeta = 0.2
	}
	if !(c.CPTAlpha > 0) || !(c.CPTBeta > 0) || math.IsInf(c.CPTAlpha, 0) || math.IsInf(c.CPTBeta, 0) {
		return c, fmt.Errorf("%w: CPTAlpha = %v, CPTBeta = %v, want finite > 0", ErrInvalidConfig, c.CPTAlpha, c.CPTBeta)
	}
	if c.Names != nil && len(c.Names) != c.Vars {
		return c, fmt.Errorf("%w: %d names for %d variables", ErrInvalidConfig, len(c.Names), c.Vars)
	}
	if c.Labels != nil && len(c.Labels) != c.Values {
		return c, fmt.Errorf("%w: %d labels for %d values", ErrInvalidConfig, len(c.Labels), c.Values)
	}
	if c.MinHeldOutMI == 0 {
		c.MinHeldOutMI = 0.01
	}
	if c.MinHeldOutMI < 0 || math.IsNaN(c.MinHeldOutMI) {
		return c, fmt.Errorf("%w: MinHeldOutMI = %v, want ≥ 0", ErrInvalidConfig, c.MinHeldOutMI)
	}
	return c, nil
}

// Generate returns a random Bayesian network (docs/DESIGN.md, Testbed):
//
//  1. a uniformly random topological order of N variables;
//  2. E distinct edges drawn uniformly among the order-respecting pairs,
//     skipping children that already have MaxParents parents;
//  3. root priors: P(X=1) ~ Uniform(0,1) for binary roots, Dirichlet(1,…,1)
//     for K > 2;
//  4. each CPT row of a non-root: P(X=1 | c) ~ Beta(CPTAlpha, CPTBeta), or
//     Dirichlet(CPTAlpha,…) for K > 2;
//  5. if cfg.HeldOut > 0, held-out pairs by PickHeldOut.
//
// Everything is drawn from PCG streams of seed, so equal (cfg, seed) give
// identical worlds. Cost O(E + Σ CPT sizes) plus the held-out search.
func Generate(cfg Config, seed int64) (*World, error) {
	cfg, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	n := cfg.Vars
	rs := newRand(seed, streamStructure)
	perm := rs.Perm(n) // perm[pos] = variable at position pos in the order
	if maxEdges := MaxEdges(n, cfg.MaxParents); cfg.Edges > maxEdges {
		return nil, fmt.Errorf("%w: Edges = %d exceeds the %d possible for %d variables (MaxParents %d)", ErrInvalidConfig, cfg.Edges, maxEdges, n, cfg.MaxParents)
	}
	parents := make([][]int, n)
	has := make(map[[2]int]bool, cfg.Edges)
	added := 0
	// Rejection sampling of uniform pairs; fall back to an exhaustive shuffle
	// when the graph is dense and rejection would stall.
	for tries := 0; added < cfg.Edges && tries < 64*cfg.Edges+1024; tries++ {
		i, j := rs.IntN(n), rs.IntN(n)
		if i == j {
			continue
		}
		if i > j {
			i, j = j, i
		}
		p, c := perm[i], perm[j]
		if has[[2]int{p, c}] || (cfg.MaxParents > 0 && len(parents[c]) >= cfg.MaxParents) {
			continue
		}
		has[[2]int{p, c}] = true
		parents[c] = append(parents[c], p)
		added++
	}
	if added < cfg.Edges {
		var cand [][2]int
		for j := 1; j < n; j++ {
			for i := 0; i < j; i++ {
				if !has[[2]int{perm[i], perm[j]}] {
					cand = append(cand, [2]int{perm[i], perm[j]})
				}
			}
		}
		rs.Shuffle(len(cand), func(a, b int) { cand[a], cand[b] = cand[b], cand[a] })
		for _, e := range cand {
			if added == cfg.Edges {
				break
			}
			if cfg.MaxParents > 0 && len(parents[e[1]]) >= cfg.MaxParents {
				continue
			}
			parents[e[1]] = append(parents[e[1]], e[0])
			added++
		}
	}
	// Sort each parent list by position in the order for a canonical layout.
	pos := make([]int, n)
	for p, v := range perm {
		pos[v] = p
	}
	for v := range parents {
		ps := parents[v]
		for a := 1; a < len(ps); a++ {
			for b := a; b > 0 && pos[ps[b]] < pos[ps[b-1]]; b-- {
				ps[b], ps[b-1] = ps[b-1], ps[b]
			}
		}
	}

	k := cfg.Values
	labels := cfg.Labels
	if labels == nil {
		labels = make([]string, k)
		for x := range k {
			labels[x] = strconv.Itoa(x)
		}
		if k > 10 {
			// Zero-pad so byte order equals numeric order.
			width := len(strconv.Itoa(k - 1))
			for x := range k {
				labels[x] = fmt.Sprintf("%0*d", width, x)
			}
		}
	}
	names := cfg.Names
	if names == nil {
		width := max(3, len(strconv.Itoa(n-1)))
		names = make([]string, n)
		for v := range n {
			names[v] = fmt.Sprintf("v%0*d", width, v)
		}
	}
	for v := range n {
		if !CPTFits(k, len(parents[v])) {
			return nil, fmt.Errorf("%w: variable %s has %d parents of %d values: its conditional table would exceed %d cells (lower Values or set MaxParents)", ErrInvalidConfig, names[v], len(parents[v]), k, MaxCPTCells)
		}
	}
	rc := newRand(seed, streamCPT)
	vars := make([]Variable, n)
	for v := range n {
		configs := 1
		for range parents[v] {
			configs *= k
		}
		cpt := make([]float64, configs*k)
		for c := range configs {
			row := cpt[c*k : (c+1)*k]
			switch {
			case len(parents[v]) == 0 && k == 2:
				p := rc.Float64()
				row[0], row[1] = 1-p, p
			case len(parents[v]) == 0:
				dirichlet(rc, 1, row)
			case k == 2:
				p := betaRand(rc, cfg.CPTAlpha, cfg.CPTBeta)
				row[0], row[1] = 1-p, p
			default:
				dirichlet(rc, cfg.CPTAlpha, row)
			}
		}
		vars[v] = Variable{Name: names[v], Labels: labels, Parents: parents[v], CPT: cpt}
	}
	w, err := New(vars)
	if err != nil {
		return nil, err
	}
	if cfg.HeldOut > 0 {
		pairs, err := w.PickHeldOut(cfg.HeldOut, cfg.MinHeldOutMI, seed)
		if err != nil {
			return nil, err
		}
		return w.WithHeldOut(pairs)
	}
	return w, nil
}

// logGammaRand returns ln G with G ~ Gamma(a, 1), by Marsaglia & Tsang (2000),
// "A simple method for generating gamma variables", ACM TOMS 26(3):363–372,
// with the boost G(a) = G(a+1)·U^(1/a) for a < 1 (same paper, §6) applied in
// log space so that tiny shapes such as 0.2 do not underflow to 0.
func logGammaRand(r *rand.Rand, a float64) float64 {
	boost := 0.0
	if a < 1 {
		boost = math.Log(1-r.Float64()) / a
		a++
	}
	d := a - 1.0/3
	c := 1 / math.Sqrt(9*d)
	for {
		x := r.NormFloat64()
		v := 1 + c*x
		if v <= 0 {
			continue
		}
		v = v * v * v
		u := 1 - r.Float64()
		if math.Log(u) < 0.5*x*x+d-d*v+d*math.Log(v) {
			return math.Log(d*v) + boost
		}
	}
}

// betaRand returns a Beta(a, b) draw as G_a / (G_a + G_b), computed from log
// gamma draws as 1 / (1 + exp(ln G_b − ln G_a)).
func betaRand(r *rand.Rand, a, b float64) float64 {
	la, lb := logGammaRand(r, a), logGammaRand(r, b)
	return 1 / (1 + math.Exp(lb-la))
}

// dirichlet fills row with a Dirichlet(a, …, a) draw (normalised gammas,
// shifted by the largest log draw to avoid underflow).
func dirichlet(r *rand.Rand, a float64, row []float64) {
	m := math.Inf(-1)
	for i := range row {
		row[i] = logGammaRand(r, a)
		m = max(m, row[i])
	}
	s := 0.0
	for i := range row {
		row[i] = math.Exp(row[i] - m)
		s += row[i]
	}
	for i := range row {
		row[i] /= s
	}
}
