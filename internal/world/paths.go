package world

import (
	"fmt"
	"math/rand/v2"
	"slices"
)

// bfs returns the distance from src to every variable along the lists of adj
// (−1 when unreachable) and the BFS predecessor of each reached variable.
// With the undirected skeleton as adj these are skeleton distances.
// Neighbours are visited in list order (ascending in w.adj). O(N + E).
func bfs(adj [][]int, src int) (dist, pred []int) {
	n := len(adj)
	dist = make([]int, n)
	pred = make([]int, n)
	for i := range dist {
		dist[i], pred[i] = -1, -1
	}
	dist[src] = 0
	queue := []int{src}
	for len(queue) > 0 {
		v := queue[0]
		queue = queue[1:]
		for _, u := range adj[v] {
			if dist[u] < 0 {
				dist[u] = dist[v] + 1
				pred[u] = v
				queue = append(queue, u)
			}
		}
	}
	return dist, pred
}

// Distance returns the number of edges on a shortest path between a and b in
// the undirected skeleton, or −1 when they are in different components. It
// panics if a or b is out of range. O(N + E).
func (w *World) Distance(a, b int) int {
	d, _ := bfs(w.adj, a)
	return d[b]
}

// ShortestPath returns a shortest path from a to b in the undirected
// skeleton, both endpoints included; among equal-length paths the one whose
// breadth-first search from a reaches each step through the lowest-index
// neighbour. O(N + E).
func (w *World) ShortestPath(a, b int) ([]int, error) {
	if err := w.checkVar(a); err != nil {
		return nil, err
	}
	if err := w.checkVar(b); err != nil {
		return nil, err
	}
	d, pred := bfs(w.adj, b) // search from b so the walk back runs a → b
	if d[a] < 0 {
		return nil, fmt.Errorf("%w: %q and %q", ErrNoPath, w.names[a], w.names[b])
	}
	path := []int{a}
	for v := a; v != b; {
		v = pred[v]
		path = append(path, v)
	}
	return path, nil
}

// upDist returns the directed distance from every ancestor c of v down to v
// (−1 for non-ancestors) and, for each ancestor, the next variable on a
// shortest directed path from it towards v: the breadth-first search of bfs
// run over the parent lists. O(N + E).
func (w *World) upDist(v int) (dist, next []int) {
	return bfs(w.parents, v)
}

// MinimalSeparatorPath returns the ideal scaffold of the eval: the interior
// variables, in order from `from` to `to`, of a shortest trek between them.
//
// A trek is a path from ← … ← c → … → to through a common ancestor c (c may
// be an endpoint). Treks are exactly the paths that are active given no
// evidence (no collider on them), so they carry all of the dependence between
// two variables of a polytree, and in a polytree every interior node
// d-separates the two ends; the chain rule through the bridges is then exact.
// The trek minimises the total length, then the index of c; ties in the two
// directed halves go to the lowest-index parent met by breadth-first search.
//
// If the two are adjacent the result is empty. If no trek exists (they are
// independent) the interior of ShortestPath is returned instead; if they are
// not connected at all the error wraps ErrNoPath. O(N + E).
func (w *World) MinimalSeparatorPath(from, to int) ([]int, error) {
	if err := w.checkVar(from); err != nil {
		return nil, err
	}
	if err := w.checkVar(to); err != nil {
		return nil, err
	}
	if from == to {
		return nil, nil
	}
	da, na := w.upDist(from)
	db, nb := w.upDist(to)
	best, bestLen := -1, -1
	for c := range w.names {
		if da[c] >= 0 && db[c] >= 0 {
			if l := da[c] + db[c]; best < 0 || l < bestLen {
				best, bestLen = c, l
			}
		}
	}
	if best < 0 {
		p, err := w.ShortestPath(from, to)
		if err != nil {
			return nil, err
		}
		return p[1 : len(p)-1], nil
	}
	// Up half: from's ancestors chain from c down to from, reversed.
	var up []int
	for x := best; x != from; x = na[x] {
		up = append(up, x)
	}
	slices.Reverse(up) // now from's parent … c
	var down []int
	for x := nb[best]; x != -1 && x != to; x = nb[x] {
		down = append(down, x)
	}
	if best == to {
		// c is `to` itself: the trek is from ← … ← to; up already ends at to.
		return up[:len(up)-1], nil
	}
	if best == from {
		return down, nil
	}
	return append(up, down...), nil
}

// RandomBridges returns m distinct variables drawn uniformly from those not
// in exclude, in random order: the negative control of the eval. It returns
// ErrTooFewVariables when fewer than m remain. O(N).
func (w *World) RandomBridges(rng *rand.Rand, m int, exclude ...int) ([]int, error) {
	if m < 0 {
		return nil, fmt.Errorf("%w: m = %d", ErrInvalidConfig, m)
	}
	skip := make(map[int]bool, len(exclude))
	for _, e := range exclude {
		skip[e] = true
	}
	cand := make([]int, 0, len(w.names))
	for v := range w.names {
		if !skip[v] {
			cand = append(cand, v)
		}
	}
	if len(cand) < m {
		return nil, fmt.Errorf("%w: want %d bridges, %d variables remain", ErrTooFewVariables, m, len(cand))
	}
	for i := range m {
		j := i + rng.IntN(len(cand)-i)
		cand[i], cand[j] = cand[j], cand[i]
	}
	return cand[:m:m], nil
}

// HeldOutCandidate is one candidate pair of PickHeldOut with its exact
// mutual information and skeleton distance.
type HeldOutCandidate struct {
	A, B     int
	MI       float64 // nats
	Distance int
}

// HeldOutCandidates returns every pair a < b that is non-adjacent and has a
// common ancestor (so it is connected, at skeleton distance ≥ 2, and can be
// dependent), with its exact mutual information, sorted by (A, B). Pairs with
// no common ancestor are d-separated given no evidence and have zero mutual
// information, so they are skipped without inference.
// Cost: one two-variable elimination per candidate.
func (w *World) HeldOutCandidates() ([]HeldOutCandidate, error) {
	n := len(w.names)
	var out []HeldOutCandidate
	for a := range n {
		var dist []int
		for b := a + 1; b < n; b++ {
			if !w.anc[a].intersects(w.anc[b]) {
				continue
			}
			if _, adj := slices.BinarySearch(w.adj[a], b); adj {
				continue
			}
			if dist == nil {
				dist, _ = bfs(w.adj, a)
			}
			mi, err := w.MutualInformation(a, b)
			if err != nil {
				return nil, err
			}
			out = append(out, HeldOutCandidate{A: a, B: b, MI: mi, Distance: dist[b]})
		}
	}
	return out, nil
}

// PickHeldOut chooses up to n held-out pairs uniformly at random (PCG stream
// of seed) among HeldOutCandidates with MI ≥ minMI nats, and returns them
// sorted as (a, b) with a < b. If fewer qualify, it returns them all; callers
// can compare len against n. Pass the result to WithHeldOut.
func (w *World) PickHeldOut(n int, minMI float64, seed int64) ([][2]int, error) {
	if n < 0 {
		return nil, fmt.Errorf("%w: held-out count %d", ErrInvalidConfig, n)
	}
	cands, err := w.HeldOutCandidates()
	if err != nil {
		return nil, err
	}
	var ok [][2]int
	for _, c := range cands {
		if c.MI >= minMI {
			ok = append(ok, [2]int{c.A, c.B})
		}
	}
	r := newRand(seed, streamHeldOut)
	for i := 0; i < n && i < len(ok); i++ {
		j := i + r.IntN(len(ok)-i)
		ok[i], ok[j] = ok[j], ok[i]
	}
	ok = ok[:min(n, len(ok))]
	slices.SortFunc(ok, func(x, y [2]int) int {
		if x[0] != y[0] {
			return x[0] - y[0]
		}
		return x[1] - y[1]
	})
	return ok, nil
}
