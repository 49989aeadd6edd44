package graphidx

import (
	"cmp"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"os"
	"runtime"
	"slices"
)

// Streaming write.
//
// The first pass (compile) fixes every section's length, so the layout of
// the whole file is known before any pair-sized data exists. write then
// fills the sections at their final offsets with positioned writes, each
// section through its own small staging buffer that also folds the bytes
// into the section's CRC-32C in file order:
//
//  1. the O(entities) sections (names, labels, value sets, marginals, CSR
//     offsets, pair base, rank offsets), from the plan;
//  2. the second pass over the pairs writes the pair offsets and the count
//     tables as they arrive, and scatters every pair's two directed edges
//     (neighbour id, support) to the adjacency bucket of its owner: a
//     bucket is a run of consecutive entities whose edges fit in
//     WithWriteMemory. The first bucket is filled in memory, the others
//     are spooled to a temporary file as 28-byte records (position in the
//     bucket, neighbour, support, the pair's position in its lower
//     entity's upper list, the first count of its table) at per-bucket
//     regions;
//  3. bucket by bucket, in entity order, the edges are put in place (the
//     CSR positions are known from the degrees, and the pair order puts
//     each entity's lower neighbours before its upper ones, both
//     ascending), appended to the neighbours section, and each entity's
//     support ranking is appended to the ranked-neighbours section, the
//     pair positions of its entries to the ranked-pair-positions section
//     and their table references to the ranked-pair-tables section.
//
// Sections 1–16 hold exactly the bytes of the in-memory version-1 writer
// this replaced (TestStreamingWriterMatchesReference pins them); version 2
// added section 17, version 3 section 18.

// Buffer sizes of the section and spool writers.
const (
	smallSectionBuf = 32 << 10
	bigSectionBuf   = 256 << 10
	maxAdjBuckets   = 4096
	adjEdgeBytes    = 24 // a neighbour id, a support, a pair position and a table start in a bucket
	spoolRecBytes   = 28 // position in the bucket, neighbour id, support, pair position, table start
)

// secOut writes one section at its offset in the file: a staging buffer
// flushed with WriteAt, the CRC-32C updated per flush.
type secOut struct {
	f    *os.File
	id   int
	off  uint64 // file offset of the next flush
	n    uint64 // bytes written so far
	crc  uint32
	buf  []byte
	size int
	err  error
}

func newSecOut(f *os.File, h *header, id, size int) *secOut {
	return &secOut{f: f, id: id, off: h.Sections[id-1].Offset, buf: make([]byte, 0, size), size: size}
}

func (s *secOut) flush() {
	if s.err == nil && len(s.buf) > 0 {
		s.crc = crc32.Update(s.crc, castagnoli, s.buf)
		_, s.err = s.f.WriteAt(s.buf, int64(s.off))
		s.off += uint64(len(s.buf))
	}
	s.buf = s.buf[:0]
}

func (s *secOut) u64s(vs []uint64) {
	for len(vs) > 0 {
		if len(s.buf)+8 > s.size {
			s.flush()
		}
		m := min(len(vs), (s.size-len(s.buf))/8)
		for _, v := range vs[:m] {
			s.buf = le.AppendUint64(s.buf, v)
		}
		s.n += 8 * uint64(m)
		vs = vs[m:]
	}
}

func (s *secOut) u32s(vs []uint32) {
	for len(vs) > 0 {
		if len(s.buf)+4 > s.size {
			s.flush()
		}
		m := min(len(vs), (s.size-len(s.buf))/4)
		for _, v := range vs[:m] {
			s.buf = le.AppendUint32(s.buf, v)
		}
		s.n += 4 * uint64(m)
		vs = vs[m:]
	}
}

func (s *secOut) u64(v uint64) {
	if len(s.buf)+8 > s.size {
		s.flush()
	}
	s.buf = le.AppendUint64(s.buf, v)
	s.n += 8
}

func (s *secOut) strs(vs []string) {
	for _, v := range vs {
		for len(v) > 0 {
			if len(s.buf) == s.size {
				s.flush()
			}
			m := min(len(v), s.size-len(s.buf))
			s.buf = append(s.buf, v[:m]...)
			s.n += uint64(m)
			v = v[m:]
		}
	}
}

// finish flushes the section, checks its length against the layout,
// records its CRC and writes the zero padding up to the next section.
func (s *secOut) finish(h *header) error {
	s.flush()
	if s.err != nil {
		return fmt.Errorf("graphidx: write %s: %w", s.f.Name(), s.err)
	}
	e := &h.Sections[s.id-1]
	if s.n != e.Length {
		return fmt.Errorf("graphidx: internal error: section %s has %d bytes, planned %d", sectionName(s.id), s.n, e.Length)
	}
	e.CRC = s.crc
	if s.id < numSections {
		end := e.Offset + e.Length
		if pad := h.Sections[s.id].Offset - end; pad > 0 {
			var zero [sectionAlign]byte
			if _, err := s.f.WriteAt(zero[:pad], int64(end)); err != nil {
				return fmt.Errorf("graphidx: write %s: %w", s.f.Name(), err)
			}
		}
	}
	s.buf = nil
	return nil
}

// layout sets the offset, length and id of every section in p.h and
// returns the file size.
func (p *plan) layout() uint64 {
	n := p.h.Entities
	var length [numSections + 1]uint64
	length[secNameOffs] = 8 * uint64(len(p.nameOffs))
	length[secNameBytes] = p.nameOffs[n]
	length[secLabelOffs] = 8 * uint64(len(p.labelOffs))
	length[secLabelBytes] = p.labelOffs[len(p.labelOffs)-1]
	length[secVSetOffs] = 4 * uint64(len(p.vsetOffs))
	length[secVSetLabels] = 4 * uint64(len(p.vsetLabels))
	length[secEntVSet] = 4 * uint64(len(p.entVSet))
	length[secMargOffs] = 8 * uint64(len(p.margOffs))
	length[secMarginals] = 8 * uint64(len(p.marginals))
	length[secNbrOffs] = 8 * uint64(len(p.nbrOffs))
	length[secNbrs] = 4 * p.h.Edges
	length[secPairBase] = 8 * uint64(len(p.pairBase))
	if !p.uniform {
		length[secPairOffs] = 8 * (p.h.Pairs + 1)
	}
	length[secCounts] = 4 * p.cells
	length[secRankOffs] = 8 * uint64(len(p.rankOffs))
	length[secRank] = 4 * p.rankOffs[n]
	length[secRankPos] = 4 * p.rankOffs[n]
	length[secRankTab] = 8 * p.rankOffs[n]
	pos := uint64(headerSize)
	for id := 1; id <= numSections; id++ {
		pos = align8(pos)
		p.h.Sections[id-1] = sectionEntry{Offset: pos, Length: length[id], ID: uint32(id)}
		pos += length[id]
	}
	return pos
}

// write writes the whole file to f (see the comment at the top of this
// file); spoolPath names the adjacency spool if one is needed.
func (p *plan) write(f *os.File, spoolPath string, src Source) error {
	if p.cells > maxRankTabStart {
		return fmt.Errorf("graphidx: %d counts exceed the %d a format-version-%d file can address", p.cells, uint64(maxRankTabStart), FormatVersion)
	}
	size := p.layout()
	h := &p.h
	// A zero header until the real one is written last (FORMAT.md, Writing).
	var zero [headerSize]byte
	if _, err := f.WriteAt(zero[:], 0); err != nil {
		return fmt.Errorf("graphidx: write %s: %w", f.Name(), err)
	}
	for _, s := range []struct {
		id   int
		body func(*secOut)
	}{
		{secNameOffs, func(s *secOut) { s.u64s(p.nameOffs) }},
		{secNameBytes, func(s *secOut) { s.strs(p.names) }},
		{secLabelOffs, func(s *secOut) { s.u64s(p.labelOffs) }},
		{secLabelBytes, func(s *secOut) { s.strs(p.labels) }},
		{secVSetOffs, func(s *secOut) { s.u32s(p.vsetOffs) }},
		{secVSetLabels, func(s *secOut) { s.u32s(p.vsetLabels) }},
		{secEntVSet, func(s *secOut) { s.u32s(p.entVSet) }},
		{secMargOffs, func(s *secOut) { s.u64s(p.margOffs) }},
		{secMarginals, func(s *secOut) { s.u64s(p.marginals) }},
		{secNbrOffs, func(s *secOut) { s.u64s(p.nbrOffs) }},
		{secPairBase, func(s *secOut) { s.u64s(p.pairBase) }},
		{secRankOffs, func(s *secOut) { s.u64s(p.rankOffs) }},
	} {
		w := newSecOut(f, h, s.id, smallSectionBuf)
		s.body(w)
		if err := w.finish(h); err != nil {
			return err
		}
	}

	a := newAdjacency(p)
	defer a.close()
	if err := p.pairPass(f, spoolPath, src, a); err != nil {
		return err
	}
	if err := a.emit(f); err != nil {
		return err
	}

	// Every section is in place: fix the size (trailing empty sections
	// write nothing), then the header.
	if err := f.Truncate(int64(size)); err != nil {
		return fmt.Errorf("graphidx: write %s: %w", f.Name(), err)
	}
	h.FileSize = size
	h.Generation = generationOf(h)
	var hb [headerSize]byte
	h.encode(hb[:])
	if _, err := f.WriteAt(hb[:], 0); err != nil {
		return fmt.Errorf("graphidx: write header %s: %w", f.Name(), err)
	}
	return nil
}

// pairPass is the second pass over the pairs: it writes the pair offsets
// and the counts and hands every directed edge to a. It checks that the
// pass yields the pairs of the first (order, ids, table sizes, supports).
func (p *plan) pairPass(f *os.File, spoolPath string, src Source, a *adjacency) error {
	if err := a.start(spoolPath); err != nil {
		return err
	}
	counts := newSecOut(f, &p.h, secCounts, bigSectionBuf)
	var offs *secOut
	if !p.uniform {
		offs = newSecOut(f, &p.h, secPairOffs, bigSectionBuf)
		offs.u64(0)
	}
	n := uint64(len(p.k))
	upCur := make([]uint64, n)  // next upper edge position per entity
	lowCur := make([]uint64, n) // next lower edge position per entity
	for i := range upCur {
		lowCur[i] = p.nbrOffs[i]
		upCur[i] = p.nbrOffs[i] + p.lowerDeg(uint32(i))
	}
	var (
		q, cell, fp  uint64
		start        uint64 // the pair's first count in the counts section
		prevA, prevB uint32
	)
	differs := func() error { return sourceErrorf("second Pairs pass differs from the first at pair %d", q) }
	err := src.Pairs(func(r PairRecord) error {
		if q >= p.h.Pairs || r.A >= r.B || uint64(r.B) >= n ||
			(q > 0 && (r.A < prevA || (r.A == prevA && r.B <= prevB))) ||
			len(r.Counts) != int(p.k[r.A])*int(p.k[r.B]) {
			return differs()
		}
		lo, hi := r.A, r.B
		if upCur[lo] >= p.nbrOffs[lo+1] || lowCur[hi] >= p.nbrOffs[hi]+p.lowerDeg(hi) {
			return differs() // more neighbours than in the first pass
		}
		sup := sumCounts(r.Counts)
		fp = pairPrint(fp, lo, hi, sup)
		// The pair's position in lo's upper list, for both directed edges.
		upPos := uint32(upCur[lo] - p.nbrOffs[lo] - p.lowerDeg(lo))
		if err := a.put(upCur[lo], hi, sup, upPos, start); err != nil {
			return err
		}
		if err := a.put(lowCur[hi], lo, sup, upPos, start); err != nil {
			return err
		}
		start += uint64(len(r.Counts))
		upCur[lo]++
		lowCur[hi]++
		counts.u32s(r.Counts)
		if offs != nil {
			cell += uint64(len(r.Counts))
			offs.u64(cell)
		}
		prevA, prevB = lo, hi
		q++
		return counts.err
	})
	if err != nil {
		if errors.Is(err, ErrInvalidSource) {
			return err
		}
		return fmt.Errorf("graphidx: reading pairs: %w", err)
	}
	if q != p.h.Pairs {
		return sourceErrorf("second Pairs pass yielded %d pairs, the first %d", q, p.h.Pairs)
	}
	if fp != p.fp {
		// Same count and order of table sizes, but other pairs or supports.
		return sourceErrorf("second Pairs pass differs from the first (pairs or supports changed)")
	}
	// With q pairs and no cursor past its entity's range, every position
	// of the adjacency got exactly one edge.
	if err := counts.finish(&p.h); err != nil {
		return err
	}
	if offs != nil {
		if err := offs.finish(&p.h); err != nil {
			return err
		}
	} else if err := newSecOut(f, &p.h, secPairOffs, 8).finish(&p.h); err != nil {
		return err // empty section: records its zero CRC and padding
	}
	return a.flush()
}

// adjacency assembles the neighbours and ranked-neighbours sections in
// buckets of consecutive entities (see the top of this file).
type adjacency struct {
	p     *plan
	first []uint32 // first entity of each bucket; first[nb] = n
	edge  []uint64 // first edge position of each bucket; edge[nb] = E
	nbr   []uint32 // the current bucket's neighbour ids, by position in the bucket
	sup   []uint64 // and supports
	upPos []uint32 // and the pair's position in its lower entity's upper list
	tab   []uint64 // and the first count of the pair's table
	// The spool holds buckets 1..nb-1; bucket b's records start at byte
	// spoolRecBytes·(edge[b] − edge[1]).
	spool    *os.File
	spoolOut []spoolWriter
	rec      [spoolRecBytes]byte
}

// spoolWriter stages one bucket's records for positioned writes.
type spoolWriter struct {
	off uint64
	buf []byte
}

// newAdjacency splits the entities into buckets of at most the write
// memory's worth of edges, but at least one entity and at least
// E/maxAdjBuckets edges (two consecutive buckets then hold more than that
// limit together, so there are at most 2·maxAdjBuckets+1 buckets), and
// allocates the in-memory bucket. O(entities).
func newAdjacency(p *plan) *adjacency {
	n := len(p.k)
	E := p.h.Edges
	limit := uint64(max(p.memory/adjEdgeBytes, 1))
	limit = max(limit, (E+maxAdjBuckets-1)/maxAdjBuckets)
	limit = min(limit, 1<<31) // positions in a bucket are uint32
	a := &adjacency{p: p, first: []uint32{0}, edge: []uint64{0}}
	var largest uint64
	for i := 0; i < n; i++ {
		start := a.edge[len(a.edge)-1]
		if p.nbrOffs[i] > start && p.nbrOffs[i+1]-start > limit {
			largest = max(largest, p.nbrOffs[i]-start)
			a.first = append(a.first, uint32(i))
			a.edge = append(a.edge, p.nbrOffs[i])
		}
	}
	largest = max(largest, E-a.edge[len(a.edge)-1])
	a.first = append(a.first, uint32(n))
	a.edge = append(a.edge, E)
	a.nbr = make([]uint32, largest)
	a.sup = make([]uint64, largest)
	a.upPos = make([]uint32, largest)
	a.tab = make([]uint64, largest)
	return a
}

func (a *adjacency) buckets() int { return len(a.first) - 1 }

// start creates the spool when there is more than one bucket. On Unix the
// file is unlinked at once (it lives as long as the descriptor).
func (a *adjacency) start(path string) error {
	nb := a.buckets()
	if nb <= 1 {
		return nil
	}
	f, err := os.OpenFile(path, os.O_RDWR|os.O_CREATE|os.O_EXCL, 0o600)
	if err != nil {
		return fmt.Errorf("graphidx: create adjacency spool: %w", err)
	}
	a.spool = f
	if runtime.GOOS != "windows" && runtime.GOOS != "plan9" {
		os.Remove(path)
	}
	// Buffers: together at most a quarter of the write memory, each 4–256 KiB.
	size := int(min(256<<10, max(4<<10, a.p.memory/int64(4*nb))))
	size -= size % spoolRecBytes
	a.spoolOut = make([]spoolWriter, nb)
	for b := 1; b < nb; b++ {
		a.spoolOut[b] = spoolWriter{off: spoolRecBytes * (a.edge[b] - a.edge[1]), buf: make([]byte, 0, size)}
	}
	return nil
}

// put hands over the directed edge at CSR position pos, whose pair sits
// at position upPos of its lower entity's upper list and whose table
// starts at count tab.
func (a *adjacency) put(pos uint64, id uint32, sup uint64, upPos uint32, tab uint64) error {
	if pos < a.edge[1] {
		a.nbr[pos], a.sup[pos], a.upPos[pos], a.tab[pos] = id, sup, upPos, tab
		return nil
	}
	b, found := slices.BinarySearch(a.edge, pos)
	if !found {
		b--
	}
	w := &a.spoolOut[b]
	if len(w.buf) == cap(w.buf) {
		if err := a.spoolFlush(w); err != nil {
			return err
		}
	}
	w.buf = le.AppendUint32(w.buf, uint32(pos-a.edge[b]))
	w.buf = le.AppendUint32(w.buf, id)
	w.buf = le.AppendUint64(w.buf, sup)
	w.buf = le.AppendUint32(w.buf, upPos)
	w.buf = le.AppendUint64(w.buf, tab)
	return nil
}

func (a *adjacency) spoolFlush(w *spoolWriter) error {
	if len(w.buf) == 0 {
		return nil
	}
	if _, err := a.spool.WriteAt(w.buf, int64(w.off)); err != nil {
		return fmt.Errorf("graphidx: write adjacency spool: %w", err)
	}
	w.off += uint64(len(w.buf))
	w.buf = w.buf[:0]
	return nil
}

// flush writes the staged spool records and drops the buffers.
func (a *adjacency) flush() error {
	for b := range a.spoolOut {
		if err := a.spoolFlush(&a.spoolOut[b]); err != nil {
			return err
		}
		a.spoolOut[b].buf = nil
	}
	a.spoolOut = nil
	return nil
}

// load fills the bucket arrays with bucket b (b ≥ 1) from the spool.
func (a *adjacency) load(b int, block []byte) error {
	m := a.edge[b+1] - a.edge[b]
	r := io.NewSectionReader(a.spool, int64(spoolRecBytes*(a.edge[b]-a.edge[1])), int64(spoolRecBytes*m))
	for left := m; left > 0; {
		k := min(left, uint64(len(block)/spoolRecBytes))
		chunk := block[:k*spoolRecBytes]
		if _, err := io.ReadFull(r, chunk); err != nil {
			return fmt.Errorf("graphidx: read adjacency spool: %w", err)
		}
		for j := 0; j < len(chunk); j += spoolRecBytes {
			rel := uint64(le.Uint32(chunk[j:]))
			if rel >= m {
				return fmt.Errorf("graphidx: adjacency spool: position %d outside a bucket of %d edges", rel, m)
			}
			a.nbr[rel] = le.Uint32(chunk[j+4:])
			a.sup[rel] = le.Uint64(chunk[j+8:])
			a.upPos[rel] = le.Uint32(chunk[j+16:])
			a.tab[rel] = le.Uint64(chunk[j+20:])
		}
		left -= k
	}
	return nil
}

// emit writes the neighbours, ranked-neighbours, ranked-pair-positions and
// ranked-pair-tables sections bucket by bucket. Ranking sorts each entity's edges by support
// descending, then id ascending, and keeps the first R: O(deg·log deg) per
// entity; each kept neighbour's pair position and table are found by a
// binary search in the entity's id-sorted list, O(R·log deg).
func (a *adjacency) emit(f *os.File) error {
	p := a.p
	nbrs := newSecOut(f, &p.h, secNbrs, bigSectionBuf)
	rank := newSecOut(f, &p.h, secRank, bigSectionBuf)
	rpos := newSecOut(f, &p.h, secRankPos, bigSectionBuf)
	rtab := newSecOut(f, &p.h, secRankTab, bigSectionBuf)
	var (
		tabs    []uint64
		keys    []uint64
		scratch []ranked
		ids     []uint32
		pos     []uint32
		block   []byte
	)
	R := uint64(p.h.RankPrefix)
	for b := 0; b < a.buckets(); b++ {
		if b > 0 {
			if block == nil {
				block = make([]byte, 64<<10)
			}
			if err := a.load(b, block); err != nil {
				return err
			}
		}
		base := a.edge[b]
		nbrs.u32s(a.nbr[:a.edge[b+1]-base])
		for i := a.first[b]; i < a.first[b+1]; i++ {
			s, e := p.nbrOffs[i]-base, p.nbrOffs[i+1]-base
			ids = appendRanked(ids[:0], a.nbr[s:e], a.sup[s:e], R, &keys, &scratch)
			rank.u32s(ids)
			pos, tabs = pos[:0], tabs[:0]
			for _, id := range ids {
				j, _ := slices.BinarySearch(a.nbr[s:e], id) // ids come from the list
				pos = append(pos, a.upPos[s+uint64(j)])
				kLo, kHi := int(p.k[i]), int(p.k[id])
				if id < i {
					kLo, kHi = kHi, kLo
				}
				tabs = append(tabs, rankTabRef(a.tab[s+uint64(j)], kLo, kHi))
			}
			rpos.u32s(pos)
			rtab.u64s(tabs)
		}
		if nbrs.err != nil || rank.err != nil || rpos.err != nil || rtab.err != nil {
			break
		}
	}
	if err := nbrs.finish(&p.h); err != nil {
		return err
	}
	if err := rank.finish(&p.h); err != nil {
		return err
	}
	if err := rpos.finish(&p.h); err != nil {
		return err
	}
	return rtab.finish(&p.h)
}

// ranked is a neighbour with its pair support, for the ranking.
type ranked struct {
	id  uint32
	sup uint64
}

// appendRanked appends to dst the first min(len(nbr), r) of the neighbours
// nbr (supports sup) ordered by support descending, then id ascending. When
// every support fits in 32 bits (the common case) it sorts packed keys
// (MaxUint32 − support)<<32 | id with the plain uint64 pdqsort, about 3×
// faster than a comparison function on pairs; ids are distinct, so both
// orders are total and equal. O(d·log d) for d neighbours.
func appendRanked(dst, nbr []uint32, sup []uint64, r uint64, keys *[]uint64, scratch *[]ranked) []uint32 {
	m := min(uint64(len(nbr)), r)
	if len(nbr) <= 1 {
		return append(dst, nbr[:m]...)
	}
	k := (*keys)[:0]
	for j, s := range sup {
		if s > math.MaxUint32 {
			k = nil
			break
		}
		k = append(k, uint64(math.MaxUint32-uint32(s))<<32|uint64(nbr[j]))
	}
	if k != nil {
		*keys = k
		slices.Sort(k)
		for _, x := range k[:m] {
			dst = append(dst, uint32(x))
		}
		return dst
	}
	sc := (*scratch)[:0]
	for j, id := range nbr {
		sc = append(sc, ranked{id, sup[j]})
	}
	*scratch = sc
	slices.SortFunc(sc, func(x, y ranked) int {
		if c := cmp.Compare(y.sup, x.sup); c != 0 {
			return c
		}
		return cmp.Compare(x.id, y.id)
	})
	for _, x := range sc[:m] {
		dst = append(dst, x.id)
	}
	return dst
}

// close releases the bucket arrays and closes the spool (removing it where
// it was not unlinked at creation).
func (a *adjacency) close() {
	a.nbr, a.sup, a.upPos, a.tab = nil, nil, nil, nil
	if a.spool != nil {
		name := a.spool.Name()
		a.spool.Close()
		os.Remove(name)
		a.spool = nil
	}
}
