package world

import (
	"errors"
	"fmt"
	"math"
	"math/bits"
	"slices"
	"sort"
	"sync"
	"unicode/utf8"
)

// Sentinel errors. Functions wrap them with %w and add the offending
// variable, value or setting, so callers can test with errors.Is.
var (
	// ErrInvalidConfig reports an out-of-range setting in a Config or Condition.
	ErrInvalidConfig = errors.New("world: invalid configuration")
	// ErrInvalidVariable reports a malformed Variable: empty or duplicate name,
	// bad labels, a parent out of range, or a CPT of the wrong size.
	ErrInvalidVariable = errors.New("world: invalid variable")
	// ErrCyclic reports parent lists that do not form a directed acyclic graph.
	ErrCyclic = errors.New("world: graph has a directed cycle")
	// ErrBadCPT reports a conditional probability table row that is negative,
	// not finite, or does not sum to 1 within 1e-9.
	ErrBadCPT = errors.New("world: invalid conditional probability table")
	// ErrVariableRange reports a variable index outside [0, NumVars()).
	ErrVariableRange = errors.New("world: variable index out of range")
	// ErrValueRange reports a value index outside [0, Card(v)).
	ErrValueRange = errors.New("world: value index out of range")
	// ErrImpossibleEvidence reports evidence of probability zero, for which a
	// posterior is undefined.
	ErrImpossibleEvidence = errors.New("world: evidence has probability zero")
	// ErrNoPath reports two variables in different connected components.
	ErrNoPath = errors.New("world: no path between variables")
	// ErrTooFewVariables reports a request for more distinct variables than exist.
	ErrTooFewVariables = errors.New("world: not enough variables")
)

// cptTolerance is how far a CPT row sum may be from 1 (common practice for
// hand-entered tables printed to a few digits).
const cptTolerance = 1e-9

// Variable describes one discrete variable of a Bayesian network for New.
type Variable struct {
	// Name is the entity id written to corpora. Non-empty valid UTF-8, unique.
	Name string
	// Labels are the value labels, in strictly ascending byte order, so that
	// value index v of the world equals the value index a locality index
	// assigns to the same label. At least 2, at most 64 labels.
	Labels []string
	// Parents are indexes into the slice given to New.
	Parents []int
	// CPT holds P(X = x | parents = c) at CPT[c*len(Labels)+x], where the
	// parent configuration c is mixed-radix over Parents in order, the first
	// parent most significant. A root has len(Labels) entries.
	CPT []float64
}

// World is a discrete Bayesian network with cached exact inference and an
// optional set of held-out pairs. A World is immutable after construction and
// safe for concurrent use.
type World struct {
	names    []string
	labels   [][]string
	card     []int
	parents  [][]int
	children [][]int
	cpt      [][]float64
	strides  [][]int // strides[v][i]: weight of parent i in the configuration index
	order    []int   // a topological order
	adj      [][]int // undirected skeleton, sorted
	byName   map[string]int
	rank     []int // rank of each variable's name in ascending byte order
	anc      []bitset

	// JSON fragments, precomputed for the corpus writer.
	jsonName  [][]byte
	jsonLabel [][][]byte

	heldOut    [][2]int
	heldOutSet map[[2]int]struct{}
	partners   [][]int // held-out partners of each variable

	cacheMu sync.Mutex
	cache   map[condKey][]float64
}

type condKey struct{ from, u, to int }

// New validates vars and returns the world they describe, with no held-out
// pairs. Cost O(Σ CPT sizes + N log N).
func New(vars []Variable) (*World, error) {
	n := len(vars)
	if n == 0 {
		return nil, fmt.Errorf("%w: no variables", ErrInvalidVariable)
	}
	w := &World{
		names:    make([]string, n),
		labels:   make([][]string, n),
		card:     make([]int, n),
		parents:  make([][]int, n),
		children: make([][]int, n),
		cpt:      make([][]float64, n),
		strides:  make([][]int, n),
		byName:   make(map[string]int, n),
		cache:    make(map[condKey][]float64),
	}
	for i, v := range vars {
		if v.Name == "" || !utf8.ValidString(v.Name) {
			return nil, fmt.Errorf("%w: variable %d: name must be non-empty valid UTF-8", ErrInvalidVariable, i)
		}
		if j, dup := w.byName[v.Name]; dup {
			return nil, fmt.Errorf("%w: variable %d: name %q already used by variable %d", ErrInvalidVariable, i, v.Name, j)
		}
		w.byName[v.Name] = i
		w.names[i] = v.Name
		k := len(v.Labels)
		if k < 2 || k > 64 {
			return nil, fmt.Errorf("%w: variable %q: %d labels, want 2..64", ErrInvalidVariable, v.Name, k)
		}
		for j, l := range v.Labels {
			if l == "" || !utf8.ValidString(l) {
				return nil, fmt.Errorf("%w: variable %q: label %d must be non-empty valid UTF-8", ErrInvalidVariable, v.Name, j)
			}
			if j > 0 && v.Labels[j-1] >= l {
				return nil, fmt.Errorf("%w: variable %q: labels must be in strictly ascending byte order (%q before %q)", ErrInvalidVariable, v.Name, v.Labels[j-1], l)
			}
		}
		w.labels[i] = slices.Clone(v.Labels)
		w.card[i] = k
	}
	for i, v := range vars {
		seen := make(map[int]bool, len(v.Parents))
		for _, p := range v.Parents {
			if p < 0 || p >= n {
				return nil, fmt.Errorf("%w: variable %q: parent index %d out of range [0,%d)", ErrInvalidVariable, v.Name, p, n)
			}
			if p == i || seen[p] {
				return nil, fmt.Errorf("%w: variable %q: parent %q repeated or self", ErrInvalidVariable, v.Name, w.names[p])
			}
			seen[p] = true
		}
		w.parents[i] = slices.Clone(v.Parents)
		configs := 1
		w.strides[i] = make([]int, len(v.Parents))
		for j := len(v.Parents) - 1; j >= 0; j-- {
			w.strides[i][j] = configs
			configs *= w.card[v.Parents[j]]
			if configs > 1<<20 {
				return nil, fmt.Errorf("%w: variable %q: more than 2^20 parent configurations", ErrInvalidVariable, v.Name)
			}
		}
		k := w.card[i]
		if len(v.CPT) != configs*k {
			return nil, fmt.Errorf("%w: variable %q: CPT has %d entries, want %d (%d parent configurations × %d values)", ErrInvalidVariable, v.Name, len(v.CPT), configs*k, configs, k)
		}
		for c := 0; c < configs; c++ {
			row := v.CPT[c*k : (c+1)*k]
			s := 0.0
			for x, p := range row {
				if !(p >= 0) || math.IsInf(p, 0) {
					return nil, fmt.Errorf("%w: variable %q: row %d value %d is %v", ErrBadCPT, v.Name, c, x, p)
				}
				s += p
			}
			if math.Abs(s-1) > cptTolerance {
				return nil, fmt.Errorf("%w: variable %q: row %d sums to %v, want 1", ErrBadCPT, v.Name, c, s)
			}
		}
		w.cpt[i] = slices.Clone(v.CPT)
		for _, p := range v.Parents {
			w.children[p] = append(w.children[p], i)
		}
	}
	if err := w.topoSort(); err != nil {
		return nil, err
	}
	w.buildSkeleton()
	w.buildAncestors()
	w.buildNames()
	return w, nil
}

// topoSort fills w.order by Kahn's algorithm, taking ready variables in index
// order. O(N + E).
func (w *World) topoSort() error {
	n := len(w.names)
	indeg := make([]int, n)
	for v := range n {
		indeg[v] = len(w.parents[v])
	}
	ready := make([]int, 0, n)
	for v := range n {
		if indeg[v] == 0 {
			ready = append(ready, v)
		}
	}
	w.order = make([]int, 0, n)
	for len(ready) > 0 {
		v := ready[0]
		ready = ready[1:]
		w.order = append(w.order, v)
		for _, c := range w.children[v] {
			indeg[c]--
			if indeg[c] == 0 {
				ready = append(ready, c)
			}
		}
	}
	if len(w.order) != n {
		for v := range n {
			if indeg[v] > 0 {
				return fmt.Errorf("%w: variable %q lies on or below a cycle", ErrCyclic, w.names[v])
			}
		}
	}
	return nil
}

func (w *World) buildSkeleton() {
	n := len(w.names)
	w.adj = make([][]int, n)
	for v := range n {
		for _, p := range w.parents[v] {
			w.adj[v] = append(w.adj[v], p)
			w.adj[p] = append(w.adj[p], v)
		}
	}
	for v := range n {
		slices.Sort(w.adj[v])
		w.adj[v] = slices.Compact(w.adj[v])
	}
}

func (w *World) buildAncestors() {
	n := len(w.names)
	w.anc = make([]bitset, n)
	for _, v := range w.order {
		b := newBitset(n)
		b.set(v)
		for _, p := range w.parents[v] {
			b.or(w.anc[p])
		}
		w.anc[v] = b
	}
}

func (w *World) buildNames() {
	n := len(w.names)
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return w.names[idx[a]] < w.names[idx[b]] })
	w.rank = make([]int, n)
	for r, v := range idx {
		w.rank[v] = r
	}
	w.jsonName = make([][]byte, n)
	w.jsonLabel = make([][][]byte, n)
	for v := range n {
		w.jsonName[v] = appendJSONString(nil, w.names[v])
		w.jsonLabel[v] = make([][]byte, w.card[v])
		for x, l := range w.labels[v] {
			w.jsonLabel[v][x] = appendJSONString(nil, l)
		}
	}
}

// WithHeldOut returns a copy of w whose held-out pairs are pairs. The copy
// shares the network with w (both are immutable) but has its own inference
// cache. Each pair must name two distinct variables; pairs are stored as
// given and deduplicated regardless of orientation.
func (w *World) WithHeldOut(pairs [][2]int) (*World, error) {
	c := &World{
		names: w.names, labels: w.labels, card: w.card, parents: w.parents,
		children: w.children, cpt: w.cpt, strides: w.strides, order: w.order,
		adj: w.adj, byName: w.byName, rank: w.rank, anc: w.anc,
		jsonName: w.jsonName, jsonLabel: w.jsonLabel,
		cache:      make(map[condKey][]float64),
		heldOutSet: make(map[[2]int]struct{}, len(pairs)),
		partners:   make([][]int, len(w.names)),
	}
	for _, p := range pairs {
		if err := w.checkVar(p[0]); err != nil {
			return nil, err
		}
		if err := w.checkVar(p[1]); err != nil {
			return nil, err
		}
		if p[0] == p[1] {
			return nil, fmt.Errorf("%w: held-out pair (%q, %q) names one variable twice", ErrInvalidConfig, w.names[p[0]], w.names[p[1]])
		}
		key := unordered(p[0], p[1])
		if _, dup := c.heldOutSet[key]; dup {
			continue
		}
		c.heldOutSet[key] = struct{}{}
		c.heldOut = append(c.heldOut, p)
		c.partners[p[0]] = append(c.partners[p[0]], p[1])
		c.partners[p[1]] = append(c.partners[p[1]], p[0])
	}
	return c, nil
}

func unordered(a, b int) [2]int {
	if a > b {
		a, b = b, a
	}
	return [2]int{a, b}
}

func (w *World) checkVar(v int) error {
	if v < 0 || v >= len(w.names) {
		return fmt.Errorf("%w: %d not in [0,%d)", ErrVariableRange, v, len(w.names))
	}
	return nil
}

func (w *World) checkValue(v, x int) error {
	if err := w.checkVar(v); err != nil {
		return err
	}
	if x < 0 || x >= w.card[v] {
		return fmt.Errorf("%w: variable %q has %d values, got %d", ErrValueRange, w.names[v], w.card[v], x)
	}
	return nil
}

// NumVars returns the number of variables.
func (w *World) NumVars() int { return len(w.names) }

// Name returns the entity id of variable v. It panics if v is out of range,
// like a slice index.
func (w *World) Name(v int) string { return w.names[v] }

// Names returns a copy of all variable names, in index order.
func (w *World) Names() []string { return slices.Clone(w.names) }

// Index returns the variable named name.
func (w *World) Index(name string) (int, bool) {
	v, ok := w.byName[name]
	return v, ok
}

// Card returns the number of values of variable v.
func (w *World) Card(v int) int { return w.card[v] }

// Labels returns a copy of the value labels of variable v, in value order
// (ascending byte order).
func (w *World) Labels(v int) []string { return slices.Clone(w.labels[v]) }

// Parents returns a copy of the parents of variable v.
func (w *World) Parents(v int) []int { return slices.Clone(w.parents[v]) }

// Neighbors returns a copy of the neighbours of v in the undirected skeleton,
// ascending.
func (w *World) Neighbors(v int) []int { return slices.Clone(w.adj[v]) }

// CPT returns a copy of the conditional probability table of v in the layout
// of Variable.CPT.
func (w *World) CPT(v int) []float64 { return slices.Clone(w.cpt[v]) }

// Edges returns the directed edges (parent, child), sorted.
func (w *World) Edges() [][2]int {
	var e [][2]int
	for v := range w.names {
		for _, p := range w.parents[v] {
			e = append(e, [2]int{p, v})
		}
	}
	slices.SortFunc(e, func(a, b [2]int) int {
		if a[0] != b[0] {
			return a[0] - b[0]
		}
		return a[1] - b[1]
	})
	return e
}

// Order returns a copy of a topological order of the variables.
func (w *World) Order() []int { return slices.Clone(w.order) }

// HeldOut returns a copy of the held-out pairs: pairs that the samplers never
// let appear in the same context.
func (w *World) HeldOut() [][2]int { return slices.Clone(w.heldOut) }

// IsHeldOut reports whether {a, b} is a held-out pair, in either orientation.
func (w *World) IsHeldOut(a, b int) bool {
	_, ok := w.heldOutSet[unordered(a, b)]
	return ok
}

// Supported returns the pairs the eval treats as well supported: every
// directed edge (parent, child) of the network, sorted. A Local context
// centred on either endpoint observes the other unless dropout removes it, so
// under Local and Full conditions every edge co-occurs in a large share of
// the contexts (under Wrong some edges may never co-occur; that is the point
// of that condition). Held-out pairs are never adjacent, so the two sets are
// disjoint.
func (w *World) Supported() [][2]int {
	var out [][2]int
	for _, e := range w.Edges() {
		if !w.IsHeldOut(e[0], e[1]) {
			out = append(out, e)
		}
	}
	return out
}

// bitset is a fixed-size set of small integers.
type bitset []uint64

func newBitset(n int) bitset    { return make(bitset, (n+63)/64) }
func (b bitset) set(i int)      { b[i>>6] |= 1 << (uint(i) & 63) }
func (b bitset) has(i int) bool { return b[i>>6]&(1<<(uint(i)&63)) != 0 }
func (b bitset) or(o bitset) {
	for i := range b {
		b[i] |= o[i]
	}
}

// appendAnd appends the members of b ∩ o to dst in increasing order.
// O(len(b) + |b ∩ o|).
func (b bitset) appendAnd(dst []int, o bitset) []int {
	for wi, word := range b {
		word &= o[wi]
		for word != 0 {
			dst = append(dst, wi*64+bits.TrailingZeros64(word))
			word &= word - 1
		}
	}
	return dst
}

func (b bitset) intersects(o bitset) bool {
	for i := range b {
		if b[i]&o[i] != 0 {
			return true
		}
	}
	return false
}
