package world

import (
	"fmt"
	"math"
	"slices"
)

// factor is a table over a sorted set of variables, row-major with the last
// variable varying fastest.
type factor struct {
	vars []int
	card []int
	vals []float64
}

// weights returns, for each variable of scope, the stride of that variable
// in f (0 when f does not contain it). scope must be sorted.
func (f *factor) weights(scope []int) []int {
	w := make([]int, len(scope))
	stride := 1
	j := len(scope) - 1
	for i := len(f.vars) - 1; i >= 0; i-- {
		for j >= 0 && scope[j] > f.vars[i] {
			j--
		}
		if j >= 0 && scope[j] == f.vars[i] {
			w[j] = stride
		}
		stride *= f.card[i]
	}
	return w
}

// odometer walks all assignments of a scope in row-major order and keeps,
// for every tracked table, the index Σ_j assign[j]·w[t][j].
type odometer struct {
	card   []int
	assign []int
	w      [][]int
	idx    []int
}

func newOdometer(card []int, w ...[]int) *odometer {
	return &odometer{card: card, assign: make([]int, len(card)), w: w, idx: make([]int, len(w))}
}

func (o *odometer) next() bool {
	for j := len(o.card) - 1; j >= 0; j-- {
		o.assign[j]++
		if o.assign[j] < o.card[j] {
			for t := range o.w {
				o.idx[t] += o.w[t][j]
			}
			return true
		}
		for t := range o.w {
			o.idx[t] -= o.w[t][j] * (o.card[j] - 1)
		}
		o.assign[j] = 0
	}
	return false
}

func size(card []int) int {
	s := 1
	for _, c := range card {
		s *= c
	}
	return s
}

// product returns f·g over the union of their scopes. O(|union table|).
func product(f, g *factor) *factor {
	vars := make([]int, 0, len(f.vars)+len(g.vars))
	vars = append(vars, f.vars...)
	vars = append(vars, g.vars...)
	slices.Sort(vars)
	vars = slices.Compact(vars)
	card := make([]int, len(vars))
	for i, v := range vars {
		if k, ok := slices.BinarySearch(f.vars, v); ok {
			card[i] = f.card[k]
		} else {
			k, _ := slices.BinarySearch(g.vars, v)
			card[i] = g.card[k]
		}
	}
	out := &factor{vars: vars, card: card, vals: make([]float64, size(card))}
	o := newOdometer(card, f.weights(vars), g.weights(vars))
	for i := 0; ; i++ {
		out.vals[i] = f.vals[o.idx[0]] * g.vals[o.idx[1]]
		if !o.next() {
			break
		}
	}
	return out
}

// sumOut returns Σ_x f over variable x, which f must contain. O(|f|).
func sumOut(f *factor, x int) *factor {
	k, _ := slices.BinarySearch(f.vars, x)
	vars := slices.Delete(slices.Clone(f.vars), k, k+1)
	card := slices.Delete(slices.Clone(f.card), k, k+1)
	out := &factor{vars: vars, card: card, vals: make([]float64, size(card))}
	o := newOdometer(f.card, out.weights(f.vars))
	for i := 0; ; i++ {
		out.vals[o.idx[0]] += f.vals[i]
		if !o.next() {
			break
		}
	}
	return out
}

// cptFactor returns the CPT of v as a factor, restricted to the evidence.
// O(size of the restricted table).
func (w *World) cptFactor(v int, ev map[int]int) *factor {
	fam := append([]int{v}, w.parents[v]...)
	// CPT index weight of each family member.
	k := w.card[v]
	weight := make(map[int]int, len(fam))
	weight[v] = 1
	for j, p := range w.parents[v] {
		weight[p] = w.strides[v][j] * k
	}
	base := 0
	var scope []int
	for _, u := range fam {
		if x, ok := ev[u]; ok {
			base += x * weight[u]
		} else {
			scope = append(scope, u)
		}
	}
	slices.Sort(scope)
	card := make([]int, len(scope))
	wt := make([]int, len(scope))
	for i, u := range scope {
		card[i] = w.card[u]
		wt[i] = weight[u]
	}
	f := &factor{vars: scope, card: card, vals: make([]float64, size(card))}
	o := newOdometer(card, wt)
	t := w.cpt[v]
	for i := 0; ; i++ {
		f.vals[i] = t[base+o.idx[0]]
		if !o.next() {
			break
		}
	}
	return f
}

// eliminate runs variable elimination and returns the unnormalised factor
// P(query, evidence) over the sorted query variables. Only ancestors of the
// query and evidence variables take part (other variables are barren and sum
// to 1). The elimination order is greedy min-fill with min-degree and then
// lowest index as tie-breaks (Koller & Friedman 2009, §9.4.3.2).
//
// Cost: O(Σ_steps K^(w+1)) where w is the induced width of the order over the
// relevant ancestral set; for the sparse worlds of this package that is a few
// microseconds to a few milliseconds per call.
func (w *World) eliminate(query []int, ev map[int]int) *factor {
	n := len(w.names)
	rel := newBitset(n)
	for _, q := range query {
		rel.or(w.anc[q])
	}
	for e := range ev {
		rel.or(w.anc[e])
	}
	var factors []*factor
	isQuery := newBitset(n)
	for _, q := range query {
		isQuery.set(q)
	}
	var hidden []int
	for v := range n {
		if !rel.has(v) {
			continue
		}
		factors = append(factors, w.cptFactor(v, ev))
		if _, e := ev[v]; !e && !isQuery.has(v) {
			hidden = append(hidden, v)
		}
	}
	for _, x := range w.eliminationOrder(hidden, factors) {
		var keep []*factor
		var prod *factor
		for _, f := range factors {
			if _, ok := slices.BinarySearch(f.vars, x); ok {
				if prod == nil {
					prod = f
				} else {
					prod = product(prod, f)
				}
			} else {
				keep = append(keep, f)
			}
		}
		if prod != nil {
			keep = append(keep, sumOut(prod, x))
		}
		factors = keep
	}
	res := &factor{vals: []float64{1}}
	for _, f := range factors {
		res = product(res, f)
	}
	// Query variables outside every relevant factor cannot occur: each query
	// variable is its own ancestor, so its CPT factor contains it.
	return res
}

// eliminationOrder returns hidden in greedy min-fill order on the interaction
// graph of factors. O(|hidden|² · d²) with d the largest degree seen.
func (w *World) eliminationOrder(hidden []int, factors []*factor) []int {
	if len(hidden) <= 1 {
		return hidden
	}
	// Local numbering over the variables appearing in factors.
	local := make(map[int]int)
	var ids []int
	for _, f := range factors {
		for _, v := range f.vars {
			if _, ok := local[v]; !ok {
				local[v] = len(ids)
				ids = append(ids, v)
			}
		}
	}
	m := len(ids)
	nb := make([]bitset, m)
	for i := range nb {
		nb[i] = newBitset(m)
	}
	for _, f := range factors {
		for _, a := range f.vars {
			for _, b := range f.vars {
				if a != b {
					nb[local[a]].set(local[b])
				}
			}
		}
	}
	alive := newBitset(m)
	for i := range m {
		alive.set(i)
	}
	remaining := slices.Clone(hidden)
	order := make([]int, 0, len(hidden))
	nbr := make([]int, 0, 16)
	for len(remaining) > 0 {
		best, bestFill, bestDeg := -1, math.MaxInt, math.MaxInt
		for ri, v := range remaining {
			lv := local[v]
			nbr = nb[lv].appendAnd(nbr[:0], alive)
			fill := 0
			for i := 0; i < len(nbr) && fill < bestFill; i++ {
				for j := i + 1; j < len(nbr); j++ {
					if !nb[nbr[i]].has(nbr[j]) {
						fill++
					}
				}
			}
			if fill < bestFill || (fill == bestFill && len(nbr) < bestDeg) {
				best, bestFill, bestDeg = ri, fill, len(nbr)
			}
		}
		v := remaining[best]
		lv := local[v]
		nbr = nb[lv].appendAnd(nbr[:0], alive)
		for _, a := range nbr {
			for _, b := range nbr {
				if a != b {
					nb[a].set(b)
				}
			}
		}
		alive[lv>>6] &^= 1 << (uint(lv) & 63)
		order = append(order, v)
		remaining = slices.Delete(remaining, best, best+1)
	}
	return order
}

func (w *World) checkEvidence(ev map[int]int) error {
	for v, x := range ev {
		if err := w.checkValue(v, x); err != nil {
			return fmt.Errorf("evidence: %w", err)
		}
	}
	return nil
}

// Posterior returns P(query | evidence) by exact variable elimination, as a
// distribution over the values of query. If query is itself in evidence the
// result is the point mass on its observed value. It returns
// ErrImpossibleEvidence when P(evidence) = 0. It is uncached; see
// TrueConditional for the cached single-evidence form.
func (w *World) Posterior(query int, evidence map[int]int) ([]float64, error) {
	if err := w.checkVar(query); err != nil {
		return nil, err
	}
	if err := w.checkEvidence(evidence); err != nil {
		return nil, err
	}
	if x, ok := evidence[query]; ok {
		out := make([]float64, w.card[query])
		out[x] = 1
		return out, nil
	}
	f := w.eliminate([]int{query}, evidence)
	return normalize(f.vals)
}

func normalize(p []float64) ([]float64, error) {
	s := 0.0
	for _, x := range p {
		s += x
	}
	if !(s > 0) {
		return nil, ErrImpossibleEvidence
	}
	for i := range p {
		p[i] /= s
	}
	return p, nil
}

// Joint returns the probability P(X_v = x for every v in assignment) of a
// full or partial assignment. A full assignment of an ancestral set costs one
// CPT lookup per variable (the chain rule, AIMA 3rd ed. eq. 14.2); otherwise
// the missing ancestors are summed out by variable elimination.
func (w *World) Joint(assignment map[int]int) (float64, error) {
	if err := w.checkEvidence(assignment); err != nil {
		return 0, err
	}
	closed := true
	for v := range assignment {
		for _, p := range w.parents[v] {
			if _, ok := assignment[p]; !ok {
				closed = false
			}
		}
	}
	if closed {
		p := 1.0
		for v, x := range assignment {
			c := 0
			for j, q := range w.parents[v] {
				c += assignment[q] * w.strides[v][j]
			}
			p *= w.cpt[v][c*w.card[v]+x]
		}
		return p, nil
	}
	f := w.eliminate(nil, assignment)
	return f.vals[0], nil
}

// JointMarginal returns the joint distribution P(a, b) of two distinct
// variables as a Card(a)×Card(b) row-major table, by variable elimination.
func (w *World) JointMarginal(a, b int) ([]float64, error) {
	if err := w.checkVar(a); err != nil {
		return nil, err
	}
	if err := w.checkVar(b); err != nil {
		return nil, err
	}
	if a == b {
		return nil, fmt.Errorf("%w: joint marginal of %q with itself", ErrInvalidConfig, w.names[a])
	}
	f := w.eliminate([]int{a, b}, nil)
	if a < b {
		return f.vals, nil
	}
	// f is laid out (b, a); transpose.
	ka, kb := w.card[a], w.card[b]
	out := make([]float64, ka*kb)
	for y := range kb {
		for x := range ka {
			out[x*kb+y] = f.vals[y*ka+x]
		}
	}
	return out, nil
}

// MutualInformation returns I(a; b) = Σ p(x,y) ln(p(x,y) / (p(x) p(y))) in
// nats (Cover & Thomas 2006, eq. 2.28), from the exact joint marginal.
func (w *World) MutualInformation(a, b int) (float64, error) {
	j, err := w.JointMarginal(a, b)
	if err != nil {
		return 0, err
	}
	return mutualInfo(j, w.card[a], w.card[b]), nil
}

func mutualInfo(j []float64, ka, kb int) float64 {
	pa := make([]float64, ka)
	pb := make([]float64, kb)
	for x := range ka {
		for y := range kb {
			pa[x] += j[x*kb+y]
			pb[y] += j[x*kb+y]
		}
	}
	mi := 0.0
	for x := range ka {
		for y := range kb {
			p := j[x*kb+y]
			if p > 0 {
				mi += p * math.Log(p/(pa[x]*pb[y]))
			}
		}
	}
	return max(mi, 0)
}

// TrueConditional returns the exact P(to | from = fromValue), cached per
// (from, fromValue, to). The returned slice is a fresh copy.
func (w *World) TrueConditional(from, fromValue, to int) ([]float64, error) {
	if err := w.checkValue(from, fromValue); err != nil {
		return nil, err
	}
	if err := w.checkVar(to); err != nil {
		return nil, err
	}
	key := condKey{from, fromValue, to}
	w.cacheMu.Lock()
	p, ok := w.cache[key]
	w.cacheMu.Unlock()
	if !ok {
		var err error
		p, err = w.Posterior(to, map[int]int{from: fromValue})
		if err != nil {
			return nil, fmt.Errorf("P(%s | %s=%s): %w", w.names[to], w.names[from], w.labels[from][fromValue], err)
		}
		w.cacheMu.Lock()
		w.cache[key] = p
		w.cacheMu.Unlock()
	}
	return slices.Clone(p), nil
}

// TrueChain returns e_uᵀ M_1 ⋯ M_(m+1), where M_k is the exact conditional
// matrix P(b_k | b_(k−1)) along s=b_0 → bridges → t=b_(m+1) (docs/DESIGN.md, Error model).
// It equals TrueConditional(s, u, t) when each bridge d-separates the earlier
// part of the chain from the later part; the difference measures the
// approximation error of the chain itself, apart from estimation error.
// Cost: one cached conditional per (hop, value).
func (w *World) TrueChain(s, u int, bridges []int, t int) ([]float64, error) {
	if err := w.checkValue(s, u); err != nil {
		return nil, err
	}
	x := make([]float64, w.card[s])
	x[u] = 1
	prev := s
	nodes := append(slices.Clone(bridges), t)
	for _, b := range nodes {
		if err := w.checkVar(b); err != nil {
			return nil, err
		}
		y := make([]float64, w.card[b])
		for r, xr := range x {
			if xr == 0 {
				continue
			}
			row, err := w.TrueConditional(prev, r, b)
			if err != nil {
				return nil, err
			}
			for c, p := range row {
				y[c] += xr * p
			}
		}
		x, prev = y, b
	}
	return x, nil
}
