package eval

import "github.com/hopwise/hopwise/graphidx"

// widestChain returns the bridges of the support-only choice: among chains
// s → b1 … bm → t with 1 ≤ m ≤ h, the one whose smallest edge support is
// largest (a widest, or bottleneck, path), ties going to fewer bridges and
// then to the lowest ids met in ascending order. It ignores values and
// signal strength on purpose: it is the "choose bridges by support alone"
// baseline, measured against the router's choice by scored error.
//
// Search: a hop-layered bottleneck dynamic programme. Layer m keeps, for every
// node, the best simple path s → … → node of m edges (its bottleneck and
// bridges); layer m+1 extends each kept path by one neighbour not on it. Keeping
// one path per (layer, node) can miss a simple path that only a dominated
// prefix reaches, so the result is a heuristic for m ≥ 2 (exact for m = 1).
// Cost O(h·(N + Σ deg)) with N entities. Returns nil when no chain exists.
//
// With fewest, the search stops at the first layer that reaches t: the
// simple count chain of fewest bridges, widest among those.
func (b *Bench) widestChain(s, t graphidx.EntityID, h int, fewest bool) []graphidx.EntityID {
	if h < 1 {
		return nil
	}
	n := len(b.adj)
	type cell struct {
		ok   bool
		bott uint64
		path []graphidx.EntityID // bridges so far, the node last
	}
	cur := make([]cell, n)
	for _, e := range b.adj[s] {
		if e.id != t && e.id != s && e.sup > 0 {
			cur[e.id] = cell{ok: true, bott: e.sup, path: []graphidx.EntityID{e.id}}
		}
	}
	var best []graphidx.EntityID
	var bestB uint64
	for m := 1; m <= h; m++ {
		// Close layer m at t.
		for v := range n {
			c := cur[v]
			if !c.ok {
				continue
			}
			st := b.support(graphidx.EntityID(v), t)
			if st == 0 {
				continue
			}
			if bn := min(c.bott, st); best == nil || bn > bestB {
				best, bestB = c.path, bn
			}
		}
		if m == h || (fewest && best != nil) {
			break
		}
		next := make([]cell, n)
		for v := range n {
			c := cur[v]
			if !c.ok {
				continue
			}
		edges:
			for _, e := range b.adj[v] {
				if e.id == s || e.id == t || e.sup == 0 {
					continue
				}
				for _, p := range c.path {
					if p == e.id {
						continue edges
					}
				}
				bn := min(c.bott, e.sup)
				if nx := &next[e.id]; !nx.ok || bn > nx.bott {
					path := make([]graphidx.EntityID, len(c.path)+1)
					copy(path, c.path)
					path[len(c.path)] = e.id
					*nx = cell{ok: true, bott: bn, path: path}
				}
			}
		}
		cur = next
	}
	return best
}
