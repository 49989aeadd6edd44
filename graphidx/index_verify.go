package graphidx

import (
	"context"
	"slices"
)

// verifyFull checks every checksum, the padding and the structural
// invariants of a decoded view.
func (v *view) verifyFull(ctx context.Context) error {
	if err := v.checkSums(ctx); err != nil {
		return err
	}
	return v.checkStructure(ctx)
}

// cancelled polls ctx every 64Ki iterations of a verification loop.
func cancelled(ctx context.Context, i uint64) error {
	if i&0xffff != 0 {
		return nil
	}
	return ctx.Err()
}

// checkStructure validates the invariants every reader relies on for
// correct (not merely safe) answers. It assumes checkHeader and
// checkLabels passed. Cost: O(file size + E·(log deg + K²)) time and
// 8 bytes per directed edge of temporary memory.
func (v *view) checkStructure(ctx context.Context) error {
	n := v.n
	h := &v.h
	// Names: offsets span the bytes, names non-empty and strictly ascending.
	if v.nameOffs[0] != 0 || v.nameOffs[n] != uint64(len(v.nameBytes)) {
		return corruptf(ErrCorrupt, "name offsets do not span the name bytes")
	}
	prev := ""
	for i := uint64(0); i < n; i++ {
		if err := cancelled(ctx, i); err != nil {
			return err
		}
		s, e, ok := span(v.nameOffs, i, len(v.nameBytes))
		if !ok || s == e {
			return corruptf(ErrCorrupt, "entity %d: name offsets [%d, %d) invalid or empty", i, v.nameOffs[i], v.nameOffs[i+1])
		}
		name := v.nameAt(i)
		if i > 0 && name <= prev {
			return corruptf(ErrCorrupt, "entity %d: names not strictly ascending", i)
		}
		prev = name
	}
	// Value sets and marginals.
	for i, s := range v.entVSet {
		if int(s) >= len(v.sets) {
			return corruptf(ErrCorrupt, "entity %d: value set %d out of range (%d sets)", i, s, len(v.sets))
		}
	}
	if !v.uniform {
		if v.margOffs[0] != 0 || v.margOffs[n] != uint64(len(v.marg)) {
			return corruptf(ErrCorrupt, "marginal offsets do not span the marginals")
		}
	}
	for i := uint64(0); i < n; i++ {
		if err := cancelled(ctx, i); err != nil {
			return err
		}
		m := v.marginal(EntityID(i))
		if m == nil {
			return corruptf(ErrCorrupt, "entity %d: marginal offsets invalid", i)
		}
		var sum uint64
		for _, c := range m {
			if sum+c < sum {
				return corruptf(ErrCorrupt, "entity %d: marginal sum overflows", i)
			}
			sum += c
		}
		if sum > h.Contexts {
			return corruptf(ErrCorrupt, "entity %d observed in %d contexts of %d", i, sum, h.Contexts)
		}
	}
	// Adjacency: CSR offsets, sorted lists split at the entity itself.
	if v.nbrOffs[0] != 0 || v.nbrOffs[n] != uint64(len(v.nbrs)) {
		return corruptf(ErrCorrupt, "neighbour offsets do not span the neighbour ids")
	}
	if v.pairBase[0] != 0 || v.pairBase[n] != h.Pairs {
		return corruptf(ErrCorrupt, "pair base does not span the %d pairs", h.Pairs)
	}
	for i := uint64(0); i < n; i++ {
		if err := cancelled(ctx, i); err != nil {
			return err
		}
		if _, _, ok := span(v.nbrOffs, i, len(v.nbrs)); !ok {
			return corruptf(ErrCorrupt, "entity %d: neighbour offsets not monotone", i)
		}
		nb := v.neighbors(EntityID(i))
		b0, b1 := v.pairBase[i], v.pairBase[i+1]
		if b0 > b1 || b1-b0 > uint64(len(nb)) {
			return corruptf(ErrCorrupt, "entity %d: pair base [%d, %d) invalid for degree %d", i, b0, b1, len(nb))
		}
		low := uint64(len(nb)) - (b1 - b0)
		for j, id := range nb {
			if uint64(id) >= n {
				return corruptf(ErrCorrupt, "entity %d: neighbour id %d out of range", i, id)
			}
			if j > 0 && id <= nb[j-1] {
				return corruptf(ErrCorrupt, "entity %d: neighbours not strictly ascending", i)
			}
			if (uint64(j) < low) != (uint64(id) < i) || uint64(id) == i {
				return corruptf(ErrCorrupt, "entity %d: neighbour %d on the wrong side of the pair base", i, id)
			}
		}
	}
	// Pair tables in stored order, with the symmetry of the adjacency: each
	// upper edge (lo, hi) must have its mirror in hi's lower part. Both
	// directions hold exactly P entries, so this makes them a bijection.
	// edgeSup[j] records the support of adjacency entry j for the rank check
	// (temporary O(E) memory).
	if !v.uniform && (v.pairOffs[0] != 0 || v.pairOffs[h.Pairs] != uint64(len(v.counts))) {
		return corruptf(ErrCorrupt, "pair offsets do not span the counts")
	}
	edgeSup := make([]uint64, len(v.nbrs))
	var q uint64
	for lo := uint64(0); lo < n; lo++ {
		if err := cancelled(ctx, lo); err != nil {
			return err
		}
		up, base := v.upperNeighbors(EntityID(lo))
		if base != q {
			return corruptf(ErrCorrupt, "entity %d: pair base %d, want %d", lo, base, q)
		}
		ka := v.numValues(EntityID(lo))
		mlo := v.marginal(EntityID(lo))
		upStart := v.nbrOffs[lo+1] - uint64(len(up))
		for k, hi := range up {
			t, found := slices.BinarySearch(v.neighbors(hi), EntityID(lo))
			if !found {
				return corruptf(ErrCorrupt, "edge (%d, %d) has no mirror", lo, hi)
			}
			kb := v.numValues(hi)
			tab, ok := v.table(q, ka*kb)
			if !ok {
				return corruptf(ErrCorrupt, "pair (%d, %d): table offsets invalid", lo, hi)
			}
			mhi := v.marginal(hi)
			var sup uint64
			var col [MaxValues]uint64
			for u := 0; u < ka; u++ {
				var row uint64
				for w := 0; w < kb; w++ {
					c := uint64(tab[u*kb+w])
					row += c
					col[w] += c
				}
				if row > mlo[u] {
					return corruptf(ErrCorrupt, "pair (%d, %d): row %d sums to %d, above the marginal %d", lo, hi, u, row, mlo[u])
				}
				sup += row
			}
			for w := 0; w < kb; w++ {
				if col[w] > mhi[w] {
					return corruptf(ErrCorrupt, "pair (%d, %d): column %d sums to %d, above the marginal %d", lo, hi, w, col[w], mhi[w])
				}
			}
			if sup == 0 {
				return corruptf(ErrCorrupt, "pair (%d, %d) has zero support", lo, hi)
			}
			edgeSup[upStart+uint64(k)] = sup
			edgeSup[v.nbrOffs[hi]+uint64(t)] = sup
			q++
		}
	}
	// Ranked prefixes: the top min(deg, R) neighbours by (support desc, id asc).
	if v.rankOffs[0] != 0 || v.rankOffs[n] != uint64(len(v.rank)) {
		return corruptf(ErrCorrupt, "rank offsets do not span the ranked neighbours")
	}
	R := uint64(h.RankPrefix)
	for i := uint64(0); i < n; i++ {
		if err := cancelled(ctx, i); err != nil {
			return err
		}
		s, e, ok := span(v.rankOffs, i, len(v.rank))
		nb := v.neighbors(EntityID(i))
		if !ok || uint64(e-s) != min(uint64(len(nb)), R) {
			return corruptf(ErrCorrupt, "entity %d: ranked prefix length invalid", i)
		}
		pre := v.rank[s:e]
		sups := edgeSup[v.nbrOffs[i]:v.nbrOffs[i+1]]
		var lastSup uint64
		for j, id := range pre {
			t, found := slices.BinarySearch(nb, id)
			if !found {
				return corruptf(ErrCorrupt, "entity %d: ranked neighbour %d is not a neighbour", i, id)
			}
			sup := sups[t]
			if j > 0 && (sup > lastSup || (sup == lastSup && id <= pre[j-1])) {
				return corruptf(ErrCorrupt, "entity %d: ranked neighbours out of order at %d", i, j)
			}
			lastSup = sup
		}
		if len(pre) < len(nb) && len(pre) > 0 {
			// Every neighbour ranking at or before the last prefix entry
			// must be in the prefix: exactly len(pre) of them.
			last := pre[len(pre)-1]
			cnt := 0
			for t, id := range nb {
				if sups[t] > lastSup || (sups[t] == lastSup && id <= last) {
					cnt++
				}
			}
			if cnt != len(pre) {
				return corruptf(ErrCorrupt, "entity %d: ranked prefix is not the top %d by support", i, len(pre))
			}
		}
		if err := v.checkRankPos(i, s, pre); err != nil {
			return err
		}
		if err := v.checkRankTab(i, s, pre); err != nil {
			return err
		}
	}
	return nil
}

// checkRankPos checks the ranked pair positions of entity i, whose ranked
// prefix pre starts at entry s: entry j must be the position of the pair
// {i, pre[j]} in its lower entity's upper list. A wrong entry is reported
// with its file offset. O(len(pre)).
func (v *view) checkRankPos(i uint64, s int, pre []EntityID) error {
	if len(v.rankPos) != len(v.rank) {
		return corruptf(ErrCorrupt, "%d ranked pair positions for %d ranked neighbours", len(v.rankPos), len(v.rank))
	}
	for j, id := range pre {
		lo, hi := EntityID(i), id
		if hi < lo {
			lo, hi = hi, lo
		}
		up, _ := v.upperNeighbors(lo)
		if p := v.rankPos[s+j]; uint64(p) >= uint64(len(up)) || up[p] != hi {
			off := v.h.Sections[secRankPos-1].Offset + 4*uint64(s+j)
			return corruptf(ErrCorrupt, "section %s at file offset %d: entity %d, ranked neighbour %d: position %d does not hold the pair (%d, %d)",
				sectionName(secRankPos), off, i, id, p, lo, hi)
		}
	}
	return nil
}

// checkRankTab checks the ranked pair tables of entity i, whose ranked
// prefix pre starts at entry s: entry j must name the count table of the
// pair {i, pre[j]} and the value counts of its lower and upper entity
// (rankTabRef). It runs after checkRankPos, so the pair's stored position
// is known to be right. A wrong entry is reported with its file offset.
// O(len(pre)).
func (v *view) checkRankTab(i uint64, s int, pre []EntityID) error {
	if len(v.rankTab) != len(v.rank) {
		return corruptf(ErrCorrupt, "%d ranked pair tables for %d ranked neighbours", len(v.rankTab), len(v.rank))
	}
	for j, id := range pre {
		lo, hi := EntityID(i), id
		if hi < lo {
			lo, hi = hi, lo
		}
		_, base := v.upperNeighbors(lo)
		st, en := v.tableSpan(base + uint64(v.rankPos[s+j]))
		kLo, kHi := v.numValues(lo), v.numValues(hi)
		got := v.rankTab[s+j]
		if kLo == 0 || kHi == 0 || en < st || en-st != uint64(kLo*kHi) || st > maxRankTabStart || got != rankTabRef(st, kLo, kHi) {
			off := v.h.Sections[secRankTab-1].Offset + 8*uint64(s+j)
			gs, gl, gh := rankTabSplit(got)
			return corruptf(ErrCorrupt, "section %s at file offset %d: entity %d, ranked neighbour %d: table at count %d of %d×%d does not name the pair (%d, %d)'s table at count %d of %d×%d",
				sectionName(secRankTab), off, i, id, gs, gl, gh, lo, hi, st, kLo, kHi)
		}
	}
	return nil
}
