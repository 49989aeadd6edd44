package world

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"
)

// Locality selects which variables of a joint sample a context observes.
type Locality int

const (
	// Local observes the ball of radius k around a uniform centre in the
	// network's undirected skeleton.
	Local Locality = iota
	// Full observes every variable.
	Full
	// Wrong observes a ball as Local does, but with distances taken in a
	// different random graph over the same variables (docs/DESIGN.md, Testbed, "wrong
	// locality"): same number of undirected edges, drawn uniformly.
	Wrong
)

// RadiusLaw is the distribution of the radius k of a local context.
type RadiusLaw int

const (
	// RadiusGeometric draws k = 1 + G with G ~ Geometric(p) on {0, 1, …}, so
	// k ≥ 1 and E[k] = 1/p (2 at the default p = 0.5). The shift by one keeps
	// every context wider than its centre alone: a radius-0 context would
	// observe one variable and add no pair counts.
	RadiusGeometric RadiusLaw = iota
	// RadiusZipf draws k from the finite Zipf(s) distribution on {1, …, M}.
	RadiusZipf
)

// Condition configures a context sampler. Zero GeometricP, ZipfS, ZipfMax
// and IDPrefix select their defaults; Drop is used as given (the presets of
// ConditionByName set 0.2 for local and wrong, 0 for full).
type Condition struct {
	// Name labels the condition in reports (for example "local-geometric").
	Name string
	// Locality selects local, full or wrong-locality contexts.
	Locality Locality
	// Radius selects the radius law of local and wrong contexts.
	Radius RadiusLaw
	// GeometricP is p of RadiusGeometric (default 0.5).
	GeometricP float64
	// ZipfS is the exponent of RadiusZipf (default 2).
	ZipfS float64
	// ZipfMax is the largest radius M of RadiusZipf (default: the number of
	// variables, beyond which a ball cannot grow).
	ZipfMax int
	// Drop is the probability that each observed variable other than the
	// centre is dropped from the context. The centre is never dropped, so a
	// context always observes at least one variable. In [0, 1).
	Drop float64
	// KeepHeldOut disables held-out enforcement (for ablations only). When
	// false (the default) no context observes both members of a held-out
	// pair: the variables of a context are visited in order — breadth-first
	// from the centre for Local and Wrong, the centre and then a uniformly
	// random order for Full — and a variable whose held-out partner was
	// already accepted is removed (counted in SampleStats.HeldOutDrops). So
	// under Local and Wrong the member nearer the centre stays, and under Full
	// each member of an isolated pair stays half of the time. (Visiting Full
	// contexts breadth-first instead would favour the same member so often
	// that many unrelated pairs would lose all support.)
	KeepHeldOut bool
	// IDPrefix precedes the 1-based context number in ids (default "c").
	IDPrefix string
}

// Condition names understood by ConditionByName.
const (
	CondLocalGeometric = "local-geometric"
	CondLocalZipf      = "local-zipf"
	CondFull           = "full"
	CondWrong          = "wrong"
)

// ConditionNames returns the names ConditionByName accepts, in report order.
func ConditionNames() []string {
	return []string{CondLocalGeometric, CondLocalZipf, CondFull, CondWrong}
}

// ConditionByName returns the preset called name (docs/DESIGN.md, Testbed):
// local-geometric (radius 1+Geometric(0.5), drop 0.2), local-zipf (radius
// Zipf(2) on {1..N}, drop 0.2), full (every variable, no drop) and wrong
// (as local-geometric, distances in a different random graph).
func ConditionByName(name string) (Condition, error) {
	switch name {
	case CondLocalGeometric:
		return Condition{Name: name, Locality: Local, Radius: RadiusGeometric, GeometricP: 0.5, Drop: 0.2}, nil
	case CondLocalZipf:
		return Condition{Name: name, Locality: Local, Radius: RadiusZipf, ZipfS: 2, Drop: 0.2}, nil
	case CondFull:
		return Condition{Name: name, Locality: Full}, nil
	case CondWrong:
		return Condition{Name: name, Locality: Wrong, Radius: RadiusGeometric, GeometricP: 0.5, Drop: 0.2}, nil
	}
	return Condition{}, fmt.Errorf("%w: unknown condition %q (want one of %v)", ErrInvalidConfig, name, ConditionNames())
}

// Context is one sampled context: the observed part of one full joint sample.
// Vars and Values are parallel and sorted by variable name in ascending byte
// order. A Context owns its slices.
type Context struct {
	ID     string
	Centre int // the variable the ball was grown around
	Radius int // the drawn radius (0 for Full)
	Vars   []int
	Values []int

	w *World
}

// Entity returns the name of the i-th observed variable.
func (c Context) Entity(i int) string { return c.w.names[c.Vars[i]] }

// Label returns the value label of the i-th observed variable.
func (c Context) Label(i int) string { return c.w.labels[c.Vars[i]][c.Values[i]] }

// AppendJSON appends the context as one JSON object, without a newline, in
// the corpus format {"id":"c1","obs":{"entity":"value",...}} with keys in
// ascending byte order. Equal contexts give equal bytes.
func (c Context) AppendJSON(b []byte) []byte {
	b = append(b, `{"id":`...)
	b = appendJSONString(b, c.ID)
	b = append(b, `,"obs":{`...)
	for i, v := range c.Vars {
		if i > 0 {
			b = append(b, ',')
		}
		b = append(b, c.w.jsonName[v]...)
		b = append(b, ':')
		b = append(b, c.w.jsonLabel[v][c.Values[i]]...)
	}
	return append(b, "}}"...)
}

// SampleStats counts what a sampler produced and removed.
type SampleStats struct {
	Contexts     int // contexts produced
	Observations int // variable observations written, over all contexts
	Dropped      int // observations removed by the Drop probability
	// HeldOutDrops counts observations removed because the context already
	// observed the other member of a held-out pair.
	HeldOutDrops int
}

// Sampler draws contexts from a World under one Condition. It is not safe
// for concurrent use; create one per goroutine (each with its own seed).
type Sampler struct {
	w     *World
	cond  Condition
	rng   *rand.Rand
	adj   [][]int // graph whose distances define the ball
	zipf  *Zipf
	geo   Geometric
	joint []int
	mark  []uint32 // mark[v] == stamp: v is in the current ball and not dropped
	acc   []uint32 // acc[v] == stamp: v is accepted into the current context
	seen  []uint32 // seen[v] == stamp: v was reached by the BFS
	stamp uint32
	order []int // BFS order of the current ball
	depth []int
	obs   []int
	stats SampleStats
	wrong [][]int
}

// NewSampler returns a sampler for cond, seeded with seed (PCG). Equal
// (world, cond, seed) give identical context streams.
func (w *World) NewSampler(cond Condition, seed int64) (*Sampler, error) {
	n := len(w.names)
	if cond.GeometricP == 0 {
		cond.GeometricP = 0.5
	}
	if cond.ZipfS == 0 {
		cond.ZipfS = 2
	}
	if cond.ZipfMax == 0 {
		cond.ZipfMax = n
	}
	if cond.IDPrefix == "" {
		cond.IDPrefix = "c"
	}
	if !(cond.Drop >= 0 && cond.Drop < 1) {
		return nil, fmt.Errorf("%w: Drop = %v, want [0, 1)", ErrInvalidConfig, cond.Drop)
	}
	if cond.Locality < Local || cond.Locality > Wrong {
		return nil, fmt.Errorf("%w: Locality = %d", ErrInvalidConfig, cond.Locality)
	}
	s := &Sampler{
		w: w, cond: cond, rng: newRand(seed, streamSampler), adj: w.adj,
		joint: make([]int, n), mark: make([]uint32, n), acc: make([]uint32, n), seen: make([]uint32, n),
		depth: make([]int, n),
	}
	switch cond.Radius {
	case RadiusGeometric:
		s.geo = Geometric{P: cond.GeometricP}
		if err := s.geo.check(); err != nil {
			return nil, err
		}
	case RadiusZipf:
		z, err := NewZipf(cond.ZipfS, cond.ZipfMax)
		if err != nil {
			return nil, err
		}
		s.zipf = z
	default:
		return nil, fmt.Errorf("%w: Radius = %d", ErrInvalidConfig, cond.Radius)
	}
	if cond.Locality == Wrong {
		s.wrong = randomGraph(n, w.numSkeletonEdges(), newRand(seed, streamWrong))
		s.adj = s.wrong
	}
	return s, nil
}

func (w *World) numSkeletonEdges() int {
	m := 0
	for _, a := range w.adj {
		m += len(a)
	}
	return m / 2
}

// randomGraph returns an undirected graph on n vertices with m distinct
// edges drawn uniformly (sorted adjacency lists).
func randomGraph(n, m int, r *rand.Rand) [][]int {
	adj := make([][]int, n)
	m = min(m, n*(n-1)/2)
	has := make(map[[2]int]bool, m)
	for len(has) < m {
		a, b := r.IntN(n), r.IntN(n)
		if a == b {
			continue
		}
		k := unordered(a, b)
		if has[k] {
			continue
		}
		has[k] = true
		adj[a] = append(adj[a], b)
		adj[b] = append(adj[b], a)
	}
	for v := range adj {
		slices.Sort(adj[v])
	}
	return adj
}

// WrongNeighbors returns the neighbours of v in the wrong-locality graph, or
// nil when the condition is not Wrong.
func (s *Sampler) WrongNeighbors(v int) []int {
	if s.wrong == nil {
		return nil
	}
	return slices.Clone(s.wrong[v])
}

// Stats returns the running totals of the sampler.
func (s *Sampler) Stats() SampleStats { return s.stats }

// sampleJoint draws one full joint sample by ancestral sampling
// (AIMA 3rd ed. §14.5.1, PRIOR-SAMPLE). O(Σ_v |parents(v)| + K).
func (s *Sampler) sampleJoint() {
	w := s.w
	for _, v := range w.order {
		c := 0
		for j, p := range w.parents[v] {
			c += s.joint[p] * w.strides[v][j]
		}
		k := w.card[v]
		row := w.cpt[v][c*k : (c+1)*k]
		u := s.rng.Float64()
		x, acc := 0, row[0]
		for u >= acc && x < k-1 {
			x++
			acc += row[x]
		}
		s.joint[v] = x
	}
}

func (s *Sampler) nextStamp() {
	s.stamp++
	if s.stamp == 0 { // wrapped: clear and restart
		clear(s.mark)
		clear(s.acc)
		clear(s.seen)
		s.stamp = 1
	}
}

// Next draws one context. Cost O(N + E) for the joint sample plus the size of
// the ball for the observation.
func (s *Sampler) Next() Context {
	w := s.w
	n := len(w.names)
	s.sampleJoint()
	s.nextStamp()
	centre := s.rng.IntN(n)
	radius := math.MaxInt
	if s.cond.Locality != Full {
		if s.zipf != nil {
			radius = s.zipf.Rand(s.rng)
		} else {
			radius = 1 + s.geo.Rand(s.rng)
		}
	}
	s.order = append(s.order[:0], centre)
	if s.cond.Locality == Full {
		// Every variable, the centre first and the rest in uniformly random
		// order.
		for v := range n {
			if v != centre {
				s.order = append(s.order, v)
			}
		}
		rest := s.order[1:]
		s.rng.Shuffle(len(rest), func(i, j int) { rest[i], rest[j] = rest[j], rest[i] })
	} else {
		// Breadth-first ball.
		s.seen[centre] = s.stamp
		s.depth[centre] = 0
		for i := 0; i < len(s.order); i++ {
			v := s.order[i]
			if s.depth[v] >= radius {
				continue
			}
			for _, u := range s.adj[v] {
				if s.seen[u] != s.stamp {
					s.seen[u] = s.stamp
					s.depth[u] = s.depth[v] + 1
					s.order = append(s.order, u)
				}
			}
		}
	}
	// Drop, then enforce held-out pairs along s.order: of two held-out
	// partners, the one met first stays.
	for i, v := range s.order {
		if i > 0 && s.cond.Drop > 0 && s.rng.Float64() < s.cond.Drop {
			s.stats.Dropped++
			continue
		}
		s.mark[v] = s.stamp
	}
	s.obs = s.obs[:0]
	for _, v := range s.order {
		if s.mark[v] != s.stamp {
			continue
		}
		if !s.cond.KeepHeldOut && w.partners != nil {
			clash := false
			for _, p := range w.partners[v] {
				if s.acc[p] == s.stamp {
					clash = true
					break
				}
			}
			if clash {
				s.stats.HeldOutDrops++
				continue
			}
		}
		s.acc[v] = s.stamp
		s.obs = append(s.obs, v)
	}
	slices.SortFunc(s.obs, func(a, b int) int { return w.rank[a] - w.rank[b] })
	buf := make([]int, 2*len(s.obs))
	ctx := Context{
		ID:     s.cond.IDPrefix + strconv.Itoa(s.stats.Contexts+1),
		Centre: centre,
		Vars:   buf[:len(s.obs):len(s.obs)],
		Values: buf[len(s.obs):],
		w:      w,
	}
	if s.cond.Locality != Full {
		ctx.Radius = radius
	}
	copy(ctx.Vars, s.obs)
	for i, v := range ctx.Vars {
		ctx.Values[i] = s.joint[v]
	}
	s.stats.Contexts++
	s.stats.Observations += len(ctx.Vars)
	return ctx
}

// Sample draws n contexts under cond from a sampler seeded with seed and
// calls fn on each in order. It stops at the first error from fn or from
// ctx (checked every 1024 contexts) and returns it with the totals so far.
func (w *World) Sample(ctx context.Context, n int, cond Condition, seed int64, fn func(Context) error) (SampleStats, error) {
	if n < 0 {
		return SampleStats{}, fmt.Errorf("%w: n = %d contexts", ErrInvalidConfig, n)
	}
	s, err := w.NewSampler(cond, seed)
	if err != nil {
		return SampleStats{}, err
	}
	for i := range n {
		if i&1023 == 0 {
			if err := ctx.Err(); err != nil {
				return s.stats, err
			}
		}
		if err := fn(s.Next()); err != nil {
			return s.stats, err
		}
	}
	return s.stats, nil
}

// WriteCorpus samples n contexts (as Sample) and writes them to out as JSONL,
// one context per line. The bytes depend only on (world, cond, seed, n).
func (w *World) WriteCorpus(ctx context.Context, out io.Writer, n int, cond Condition, seed int64) (SampleStats, error) {
	bw := bufio.NewWriterSize(out, 1<<16)
	var line []byte
	st, err := w.Sample(ctx, n, cond, seed, func(c Context) error {
		line = c.AppendJSON(line[:0])
		line = append(line, '\n')
		_, err := bw.Write(line)
		return err
	})
	if err != nil {
		return st, err
	}
	return st, bw.Flush()
}

// WriteJSONL writes contexts to out, one JSON object per line, in the format
// of Context.AppendJSON.
func WriteJSONL(out io.Writer, contexts []Context) error {
	bw := bufio.NewWriterSize(out, 1<<16)
	var line []byte
	for i, c := range contexts {
		if c.w == nil {
			return fmt.Errorf("%w: context %d (%q) was not produced by a World", ErrInvalidConfig, i, c.ID)
		}
		line = c.AppendJSON(line[:0])
		line = append(line, '\n')
		if _, err := bw.Write(line); err != nil {
			return err
		}
	}
	return bw.Flush()
}

// appendJSONString appends s as a JSON string literal (RFC 8259 §7): quote,
// backslash and control characters escaped, other UTF-8 copied as is.
func appendJSONString(b []byte, s string) []byte {
	const hex = "0123456789abcdef"
	b = append(b, '"')
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == '"' || c == '\\':
			b = append(b, '\\', c)
		case c < 0x20:
			switch c {
			case '\n':
				b = append(b, '\\', 'n')
			case '\r':
				b = append(b, '\\', 'r')
			case '\t':
				b = append(b, '\\', 't')
			default:
				b = append(b, '\\', 'u', '0', '0', hex[c>>4], hex[c&0xf])
			}
		default:
			b = append(b, c)
		}
	}
	return append(b, '"')
}
