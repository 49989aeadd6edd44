package graphidx

// This file keeps the in-memory index writer as it was before the write
// phase was made streaming (O(entities + pairs) words of memory), as the
// reference that the streaming WriteFile must reproduce byte for byte
// (TestStreamingWriterMatchesReference).

import (
	"bufio"
	"cmp"
	"errors"
	"fmt"
	"hash/crc32"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

type refConfig struct{ rankPrefix int }

// refWriteBytes writes src with the reference writer and returns the file.
func refWriteBytes(tb testing.TB, src Source, rankPrefix int) ([]byte, error) {
	tb.Helper()
	p, err := refCompile(src, refConfig{rankPrefix: rankPrefix})
	if err != nil {
		return nil, err
	}
	path := filepath.Join(tb.TempDir(), "ref.hwx")
	f, err := os.Create(path)
	if err != nil {
		tb.Fatal(err)
	}
	defer f.Close()
	if err := p.write(f, src); err != nil {
		return nil, err
	}
	return os.ReadFile(path)
}

// refPlan is everything of the file except the count tables, computed in memory.
type refPlan struct {
	h          header
	uniform    bool
	k          []uint8 // K per entity
	nameOffs   []uint64
	names      []string
	labelOffs  []uint64
	labels     []string
	vsetOffs   []uint32
	vsetLabels []uint32
	entVSet    []uint32
	margOffs   []uint64 // nil if uniform
	marginals  []uint64
	nbrOffs    []uint64
	nbrs       []uint32
	pairBase   []uint64
	pairOffs   []uint64 // nil if uniform
	pairSup    []uint64 // support per pair, to re-check the second pass
	pairLo     []uint32
	pairHi     []uint32
	cells      uint64
	rankOffs   []uint64
	rank       []uint32
}

// refCompile validates src and computes every section except the counts.
func refCompile(src Source, cfg refConfig) (*refPlan, error) {
	ents := src.Entities()
	n := len(ents)
	if uint64(n) > math.MaxUint32 {
		return nil, sourceErrorf("%d entities exceed the uint32 id space", n)
	}
	p := &refPlan{k: make([]uint8, n)}
	contexts := src.Contexts()

	// Names and values.
	labelSet := map[string]struct{}{}
	p.nameOffs = make([]uint64, n+1)
	p.names = make([]string, n)
	var values uint64
	for i, e := range ents {
		if e.Name == "" {
			return nil, sourceErrorf("entity %d has an empty name", i)
		}
		if i > 0 && e.Name <= ents[i-1].Name {
			return nil, sourceErrorf("entity %d %q is not after %q (names must be strictly ascending)", i, e.Name, ents[i-1].Name)
		}
		k := len(e.Values)
		if k < 1 || k > MaxValues {
			return nil, sourceErrorf("entity %q has %d values, want 1..%d", e.Name, k, MaxValues)
		}
		if len(e.Marginal) != k {
			return nil, sourceErrorf("entity %q has %d values but %d marginals", e.Name, k, len(e.Marginal))
		}
		var sum uint64
		for v, lab := range e.Values {
			if v > 0 && lab <= e.Values[v-1] {
				return nil, sourceErrorf("entity %q: value %q is not after %q (labels must be strictly ascending)", e.Name, lab, e.Values[v-1])
			}
			labelSet[lab] = struct{}{}
			if sum+e.Marginal[v] < sum {
				return nil, sourceErrorf("entity %q: marginal sum overflows uint64", e.Name)
			}
			sum += e.Marginal[v]
		}
		if sum > contexts {
			return nil, sourceErrorf("entity %q is observed in %d contexts, more than the %d in the corpus", e.Name, sum, contexts)
		}
		p.k[i] = uint8(k)
		p.names[i] = e.Name
		p.nameOffs[i+1] = p.nameOffs[i] + uint64(len(e.Name))
		values += uint64(k)
	}
	p.uniform = n > 0
	for i := 1; i < n; i++ {
		if p.k[i] != p.k[0] {
			p.uniform = false
			break
		}
	}

	// Label dictionary and value sets.
	p.labels = make([]string, 0, len(labelSet))
	for l := range labelSet {
		p.labels = append(p.labels, l)
	}
	slices.Sort(p.labels)
	labelID := make(map[string]uint32, len(p.labels))
	p.labelOffs = make([]uint64, len(p.labels)+1)
	for i, l := range p.labels {
		labelID[l] = uint32(i)
		p.labelOffs[i+1] = p.labelOffs[i] + uint64(len(l))
	}
	setID := map[string]uint32{}
	p.vsetOffs = []uint32{0}
	p.entVSet = make([]uint32, n)
	var key strings.Builder
	for i, e := range ents {
		key.Reset()
		for _, lab := range e.Values {
			key.WriteString(lab)
			key.WriteByte(0)
		}
		id, ok := setID[key.String()]
		if !ok {
			id = uint32(len(p.vsetOffs) - 1)
			setID[key.String()] = id
			for _, lab := range e.Values {
				p.vsetLabels = append(p.vsetLabels, labelID[lab])
			}
			p.vsetOffs = append(p.vsetOffs, uint32(len(p.vsetLabels)))
		}
		p.entVSet[i] = id
	}

	// Marginals.
	p.marginals = make([]uint64, 0, values)
	if !p.uniform {
		p.margOffs = make([]uint64, n+1)
	}
	for i, e := range ents {
		p.marginals = append(p.marginals, e.Marginal...)
		if !p.uniform {
			p.margOffs[i+1] = p.margOffs[i] + uint64(len(e.Marginal))
		}
	}
	margOf := func(id uint32) []uint64 {
		if p.uniform {
			k := uint64(p.k[0])
			return p.marginals[uint64(id)*k : uint64(id+1)*k]
		}
		return p.marginals[p.margOffs[id]:p.margOffs[id+1]]
	}

	// Pass 1 over the pairs: validate, count degrees, record supports.
	upper := make([]uint64, n)
	lower := make([]uint64, n)
	var prevA, prevB uint32
	first := true
	colSum := make([]uint64, MaxValues)
	err := src.Pairs(func(r PairRecord) error {
		if r.A >= r.B || uint64(r.B) >= uint64(n) {
			return sourceErrorf("pair (%d, %d): want A < B < %d", r.A, r.B, n)
		}
		if !first && (r.A < prevA || (r.A == prevA && r.B <= prevB)) {
			return sourceErrorf("pair (%s, %s) is not after (%s, %s) (pairs must be strictly ascending)",
				ents[r.A].Name, ents[r.B].Name, ents[prevA].Name, ents[prevB].Name)
		}
		first, prevA, prevB = false, r.A, r.B
		ka, kb := int(p.k[r.A]), int(p.k[r.B])
		if len(r.Counts) != ka*kb {
			return sourceErrorf("pair (%s, %s): %d counts, want %d×%d", ents[r.A].Name, ents[r.B].Name, len(r.Counts), ka, kb)
		}
		ma, mb := margOf(r.A), margOf(r.B)
		clear(colSum[:kb])
		var sup uint64
		for u := 0; u < ka; u++ {
			var row uint64
			for v := 0; v < kb; v++ {
				c := uint64(r.Counts[u*kb+v])
				row += c
				colSum[v] += c
			}
			if row > ma[u] {
				return sourceErrorf("pair (%s, %s): %d contexts with %s=%s exceed its marginal %d",
					ents[r.A].Name, ents[r.B].Name, row, ents[r.A].Name, ents[r.A].Values[u], ma[u])
			}
			sup += row
		}
		for v := 0; v < kb; v++ {
			if colSum[v] > mb[v] {
				return sourceErrorf("pair (%s, %s): %d contexts with %s=%s exceed its marginal %d",
					ents[r.A].Name, ents[r.B].Name, colSum[v], ents[r.B].Name, ents[r.B].Values[v], mb[v])
			}
		}
		if sup == 0 {
			return sourceErrorf("pair (%s, %s) has zero support (omit unobserved pairs)", ents[r.A].Name, ents[r.B].Name)
		}
		upper[r.A]++
		lower[r.B]++
		p.pairLo = append(p.pairLo, r.A)
		p.pairHi = append(p.pairHi, r.B)
		p.pairSup = append(p.pairSup, sup)
		p.cells += uint64(ka * kb)
		return nil
	})
	if err != nil {
		if errors.Is(err, ErrInvalidSource) {
			return nil, err
		}
		return nil, fmt.Errorf("graphidx: reading pairs: %w", err)
	}
	np := uint64(len(p.pairLo))

	// CSR adjacency (both directions, ascending) and the pair base.
	p.nbrOffs = make([]uint64, n+1)
	p.pairBase = make([]uint64, n+1)
	for i := 0; i < n; i++ {
		p.nbrOffs[i+1] = p.nbrOffs[i] + upper[i] + lower[i]
		p.pairBase[i+1] = p.pairBase[i] + upper[i]
	}
	edges := 2 * np
	p.nbrs = make([]uint32, edges)
	esup := make([]uint64, edges)
	lowCur := make([]uint64, n)
	upCur := upper // reuse: upCur[i] = nbrOffs[i] + lower[i]
	for i := 0; i < n; i++ {
		lowCur[i] = p.nbrOffs[i]
		upCur[i] = p.nbrOffs[i] + lower[i]
	}
	if !p.uniform {
		p.pairOffs = make([]uint64, np+1)
	}
	for q := uint64(0); q < np; q++ {
		lo, hi, s := p.pairLo[q], p.pairHi[q], p.pairSup[q]
		p.nbrs[upCur[lo]], esup[upCur[lo]] = hi, s
		upCur[lo]++
		p.nbrs[lowCur[hi]], esup[lowCur[hi]] = lo, s
		lowCur[hi]++
		if !p.uniform {
			p.pairOffs[q+1] = p.pairOffs[q] + uint64(p.k[lo])*uint64(p.k[hi])
		}
	}

	// Support-ranked prefixes: support descending, then id ascending.
	R := uint64(cfg.rankPrefix)
	p.rankOffs = make([]uint64, n+1)
	type ranked struct {
		id  uint32
		sup uint64
	}
	var scratch []ranked
	for i := 0; i < n; i++ {
		s, e := p.nbrOffs[i], p.nbrOffs[i+1]
		scratch = scratch[:0]
		for j := s; j < e; j++ {
			scratch = append(scratch, ranked{p.nbrs[j], esup[j]})
		}
		slices.SortFunc(scratch, func(a, b ranked) int {
			if c := cmp.Compare(b.sup, a.sup); c != 0 {
				return c
			}
			return cmp.Compare(a.id, b.id)
		})
		m := min(e-s, R)
		for _, r := range scratch[:m] {
			p.rank = append(p.rank, r.id)
		}
		p.rankOffs[i+1] = p.rankOffs[i] + m
	}

	var flags uint32
	var uk uint32
	if p.uniform {
		flags |= flagUniformK
		uk = uint32(p.k[0])
	}
	p.h = header{
		Version:    FormatVersion,
		Flags:      flags,
		Contexts:   contexts,
		Entities:   uint64(n),
		Pairs:      np,
		Edges:      edges,
		Values:     values,
		Labels:     uint64(len(p.labels)),
		VSets:      uint64(len(p.vsetOffs) - 1),
		UniformK:   uk,
		RankPrefix: uint32(R),
	}
	return p, nil
}

// refSecWriter streams sections, tracking the position and each section's CRC.
type refSecWriter struct {
	w   *bufio.Writer
	pos uint64
	crc uint32
	buf []byte
	err error
}

func (s *refSecWriter) write(b []byte) {
	if s.err != nil {
		return
	}
	s.crc = crc32.Update(s.crc, castagnoli, b)
	_, s.err = s.w.Write(b)
	s.pos += uint64(len(b))
}

func (s *refSecWriter) u64s(vs []uint64) {
	for len(vs) > 0 && s.err == nil {
		m := min(len(vs), 4096)
		s.buf = s.buf[:0]
		for _, v := range vs[:m] {
			s.buf = le.AppendUint64(s.buf, v)
		}
		s.write(s.buf)
		vs = vs[m:]
	}
}

func (s *refSecWriter) u32s(vs []uint32) {
	for len(vs) > 0 && s.err == nil {
		m := min(len(vs), 8192)
		s.buf = s.buf[:0]
		for _, v := range vs[:m] {
			s.buf = le.AppendUint32(s.buf, v)
		}
		s.write(s.buf)
		vs = vs[m:]
	}
}

func (s *refSecWriter) strs(vs []string) {
	for _, v := range vs {
		if s.err != nil {
			return
		}
		s.crc = crc32.Update(s.crc, castagnoli, []byte(v))
		_, s.err = s.w.WriteString(v)
		s.pos += uint64(len(v))
	}
}

// write streams the whole file to f: a zero header, the sections, then the
// real header at offset 0.
func (p *refPlan) write(f *os.File, src Source) error {
	bw := bufio.NewWriterSize(f, 1<<20)
	sw := &refSecWriter{w: bw, buf: make([]byte, 0, 32768)}
	var zero [headerSize]byte
	sw.write(zero[:])

	section := func(id int, body func()) {
		if pad := align8(sw.pos) - sw.pos; pad > 0 {
			sw.write(zero[:pad])
		}
		start := sw.pos
		sw.crc = 0
		body()
		p.h.Sections[id-1] = sectionEntry{Offset: start, Length: sw.pos - start, CRC: sw.crc, ID: uint32(id)}
	}
	section(secNameOffs, func() { sw.u64s(p.nameOffs) })
	section(secNameBytes, func() { sw.strs(p.names) })
	section(secLabelOffs, func() { sw.u64s(p.labelOffs) })
	section(secLabelBytes, func() { sw.strs(p.labels) })
	section(secVSetOffs, func() { sw.u32s(p.vsetOffs) })
	section(secVSetLabels, func() { sw.u32s(p.vsetLabels) })
	section(secEntVSet, func() { sw.u32s(p.entVSet) })
	section(secMargOffs, func() { sw.u64s(p.margOffs) })
	section(secMarginals, func() { sw.u64s(p.marginals) })
	section(secNbrOffs, func() { sw.u64s(p.nbrOffs) })
	section(secNbrs, func() { sw.u32s(p.nbrs) })
	section(secPairBase, func() { sw.u64s(p.pairBase) })
	section(secPairOffs, func() { sw.u64s(p.pairOffs) })
	var perr error
	section(secCounts, func() {
		q := 0
		perr = src.Pairs(func(r PairRecord) error {
			if q >= len(p.pairLo) || r.A != p.pairLo[q] || r.B != p.pairHi[q] ||
				len(r.Counts) != int(p.k[r.A])*int(p.k[r.B]) {
				return sourceErrorf("second Pairs pass differs from the first at pair %d", q)
			}
			var s uint64
			for _, c := range r.Counts {
				s += uint64(c)
			}
			if s != p.pairSup[q] {
				return sourceErrorf("second Pairs pass differs from the first at pair %d (support %d, was %d)", q, s, p.pairSup[q])
			}
			q++
			sw.u32s(r.Counts)
			return sw.err
		})
		if perr == nil && q != len(p.pairLo) {
			perr = sourceErrorf("second Pairs pass yielded %d pairs, the first %d", q, len(p.pairLo))
		}
	})
	if perr != nil {
		if errors.Is(perr, ErrInvalidSource) {
			return perr
		}
		return fmt.Errorf("graphidx: reading pairs: %w", perr)
	}
	section(secRankOffs, func() { sw.u64s(p.rankOffs) })
	section(secRank, func() { sw.u32s(p.rank) })
	if sw.err != nil {
		return fmt.Errorf("graphidx: write %s: %w", f.Name(), sw.err)
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("graphidx: write %s: %w", f.Name(), err)
	}
	p.h.FileSize = sw.pos
	p.h.Generation = generationOf(&p.h)
	var hb [headerSize]byte
	p.h.encode(hb[:])
	if _, err := f.WriteAt(hb[:], 0); err != nil {
		return fmt.Errorf("graphidx: write header %s: %w", f.Name(), err)
	}
	return nil
}
