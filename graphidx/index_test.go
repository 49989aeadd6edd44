package graphidx

import (
	"bytes"
	"context"
	"errors"
	"hash/crc32"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// TestRoundTripHandChecked checks every figure of the greenhouse corpus
// against values counted by hand from the eight contexts in
// ixGreenhouse (the comments give the contexts behind each figure).
func TestRoundTripHandChecked(t *testing.T) {
	t.Parallel()
	for _, lazy := range []bool{false, true} {
		src := ixSourceFromContexts(ixGreenhouse())
		path := ixWriteTemp(t, src)
		var opts []OpenOption
		if lazy {
			opts = append(opts, WithLazyVerify())
		}
		x, err := Open(path, opts...)
		if err != nil {
			t.Fatal(err)
		}
		defer x.Close()
		if x.NumEntities() != 5 || x.NumContexts() != 8 || x.NumPairs() != 7 {
			t.Fatalf("entities/contexts/pairs = %d/%d/%d, want 5/8/7", x.NumEntities(), x.NumContexts(), x.NumPairs())
		}
		if x.FormatVersion() != FormatVersion || x.RankPrefix() != DefaultRankPrefix {
			t.Fatalf("version %d rank prefix %d", x.FormatVersion(), x.RankPrefix())
		}
		id := func(name string) EntityID {
			i, ok := x.Lookup(name)
			if !ok {
				t.Fatalf("Lookup(%q) failed", name)
			}
			return i
		}
		bed, pump, co2, vent, temp := id("bed.north"), id("pump.a"), id("sensor.co2"), id("vent.east"), id("zone.temp")
		if bed != 0 || pump != 1 || co2 != 2 || vent != 3 || temp != 4 {
			t.Fatalf("ids not in name order: %d %d %d %d %d", bed, pump, co2, vent, temp)
		}
		if _, ok := x.Lookup("pump.b"); ok {
			t.Fatal("Lookup of a missing name succeeded")
		}
		if got := x.Name(vent); got != "vent.east" {
			t.Fatalf("Name = %q", got)
		}
		if got := x.Values(temp); !slices.Equal(got, []string{"cold", "hot", "mild"}) {
			t.Fatalf("Values(temp) = %v", got)
		}
		if u, ok := x.ValueIndex(temp, "mild"); !ok || u != 2 {
			t.Fatalf("ValueIndex(temp, mild) = %d %v", u, ok)
		}
		if _, ok := x.ValueIndex(temp, "warm"); ok {
			t.Fatal("ValueIndex of a missing label succeeded")
		}
		// pump.a: off in c3; on in c1 c2 c6 c7.
		if got := x.Marginal(pump); !slices.Equal(got, []uint64{1, 4}) || x.EntitySupport(pump) != 5 {
			t.Fatalf("Marginal(pump) = %v support %d", got, x.EntitySupport(pump))
		}
		// zone.temp: cold c6; hot c3 c5; mild c4.
		if got := x.Marginal(temp); !slices.Equal(got, []uint64{1, 2, 1}) || x.NumValues(temp) != 3 {
			t.Fatalf("Marginal(temp) = %v", got)
		}
		if got := x.Neighbors(pump); !slices.Equal(got, []EntityID{bed, co2, vent, temp}) || x.Degree(pump) != 4 {
			t.Fatalf("Neighbors(pump) = %v", got)
		}
		if got := x.Neighbors(co2); !slices.Equal(got, []EntityID{pump}) {
			t.Fatalf("Neighbors(co2) = %v", got)
		}
		// Supports around pump.a: bed 3 (c1 c2 c3), temp 2 (c3 c6), co2 1 (c7),
		// vent 1 (c1): ties by ascending id put co2 (2) before vent (3).
		if got := x.RankedNeighbors(pump); !slices.Equal(got, []EntityID{bed, temp, co2, vent}) {
			t.Fatalf("RankedNeighbors(pump) = %v", got)
		}
		// bed×pump: (dry,off) c3; (wet,on) c1 c2.
		ps, ok := x.Pair(bed, pump)
		if !ok || ps.Count(0, 0) != 1 || ps.Count(0, 1) != 0 || ps.Count(1, 0) != 0 || ps.Count(1, 1) != 2 || ps.Support() != 3 {
			t.Fatalf("Pair(bed, pump) = %+v", ps)
		}
		// Same pair queried the other way round.
		ps, ok = x.Pair(pump, bed)
		if !ok || ps.A != pump || ps.KA != 2 || ps.Count(1, 1) != 2 || ps.Count(0, 0) != 1 || ps.RowSum(1) != 2 {
			t.Fatalf("Pair(pump, bed) = %+v", ps)
		}
		// temp×pump (stored as pump×temp): (hot,off) c3; (cold,on) c6.
		ps, ok = x.Pair(temp, pump)
		if !ok || ps.KA != 3 || ps.KB != 2 || ps.Count(1, 0) != 1 || ps.Count(0, 1) != 1 || ps.Count(2, 1) != 0 || ps.Support() != 2 {
			t.Fatalf("Pair(temp, pump) = %+v", ps)
		}
		// vent×temp: (closed,mild) c4; (open,hot) c5.
		ps, ok = x.Pair(vent, temp)
		if !ok || ps.Count(0, 2) != 1 || ps.Count(1, 1) != 1 || ps.Support() != 2 || ps.RowSum(0) != 1 {
			t.Fatalf("Pair(vent, temp) = %+v", ps)
		}
		for _, q := range [][2]EntityID{{co2, bed}, {bed, co2}, {co2, temp}, {bed, bed}, {bed, 5}, {99, bed}} {
			if _, ok := x.Pair(q[0], q[1]); ok {
				t.Fatalf("Pair(%d, %d) found, want not stored", q[0], q[1])
			}
		}
		if err := x.Verify(); err != nil {
			t.Fatalf("Verify: %v", err)
		}
	}
}

// TestRoundTripRandom compares every answer of an index with the source it
// was written from, for uniform binary K and for mixed K.
func TestRoundTripRandom(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		name         string
		n, deg, k, r int
	}{
		{"binary", 300, 12, 2, 64},
		{"mixedK", 200, 10, 0, 64},
		{"shortPrefix", 150, 20, 3, 4},
		{"noPairs", 5, 0, 2, 64},
	} {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			src := ixRandomSource(tc.n, tc.deg, tc.k, uint64(tc.n))
			x, err := Open(ixWriteTemp(t, src, WithRankPrefix(tc.r)))
			if err != nil {
				t.Fatal(err)
			}
			defer x.Close()
			ixCheckMatches(t, x, src, tc.r)
		})
	}
}

// ixCheckMatches checks that x holds exactly src: pair tables in both
// orientations, adjacency, ranked prefixes of length rankPrefix, values,
// marginals and name look-ups.
func ixCheckMatches(t *testing.T, x *Index, src *ixSource, rankPrefix int) {
	t.Helper()
	if x.NumPairs() != uint64(len(src.pairs)) {
		t.Fatalf("pairs %d want %d", x.NumPairs(), len(src.pairs))
	}
	adj := make([][]EntityID, len(src.ents))
	for _, p := range src.pairs {
		adj[p.A] = append(adj[p.A], p.B)
		adj[p.B] = append(adj[p.B], p.A)
		ka, kb := len(src.ents[p.A].Values), len(src.ents[p.B].Values)
		ab, ok1 := x.Pair(p.A, p.B)
		ba, ok2 := x.Pair(p.B, p.A)
		if !ok1 || !ok2 {
			t.Fatalf("pair (%d,%d) missing", p.A, p.B)
		}
		for u := 0; u < ka; u++ {
			for v := 0; v < kb; v++ {
				if ab.Count(u, v) != p.Counts[u*kb+v] || ba.Count(v, u) != p.Counts[u*kb+v] {
					t.Fatalf("pair (%d,%d) cell (%d,%d) differs", p.A, p.B, u, v)
				}
			}
		}
	}
	for i := range adj {
		slices.Sort(adj[i])
		id := EntityID(i)
		if got := x.Neighbors(id); !slices.Equal(got, adj[i]) && !(len(got) == 0 && len(adj[i]) == 0) {
			t.Fatalf("Neighbors(%d) = %v want %v", i, got, adj[i])
		}
		if got, want := x.RankedNeighbors(id), ixRankedRef(src, id, rankPrefix); !slices.Equal(got, want) && !(len(got) == 0 && len(want) == 0) {
			t.Fatalf("RankedNeighbors(%d) = %v want %v", i, got, want)
		}
		if !slices.Equal(x.Marginal(id), src.ents[i].Marginal) || !slices.Equal(x.Values(id), src.ents[i].Values) {
			t.Fatalf("entity %d values/marginals differ", i)
		}
		if got, ok := x.Lookup(src.ents[i].Name); !ok || got != id {
			t.Fatalf("Lookup(%q) = %d %v", src.ents[i].Name, got, ok)
		}
	}
}

// TestDeterministic: the same source gives byte-identical files, and a
// different source a different generation.
func TestDeterministic(t *testing.T) {
	t.Parallel()
	a := ixReadFile(t, ixWriteTemp(t, ixRandomSource(100, 8, 0, 7)))
	b := ixReadFile(t, ixWriteTemp(t, ixRandomSource(100, 8, 0, 7)))
	if !bytes.Equal(a, b) {
		t.Fatal("two writes of the same source differ")
	}
	c := ixReadFile(t, ixWriteTemp(t, ixRandomSource(100, 8, 0, 8)))
	if le.Uint64(a[offGeneration:]) == le.Uint64(c[offGeneration:]) {
		t.Fatal("different sources share a generation")
	}
}

// TestFlipEveryByte changes every byte of a small index, three ways, and
// requires a corruption error from a full open. A lazy open must either
// reject the file or serve it without panicking and fail Verify.
func TestFlipEveryByte(t *testing.T) {
	t.Parallel()
	good := ixReadFile(t, ixWriteTemp(t, ixSourceFromContexts(ixGreenhouse())))
	buf := make([]byte, len(good))
	for i := range good {
		for _, mask := range []byte{0x01, 0x80, 0xff} {
			copy(buf, good)
			buf[i] ^= mask
			if _, err := parse(buf, true); err == nil || !IsCorruption(err) {
				t.Fatalf("byte %d ^ %#x: full open err = %v, want corruption", i, mask, err)
			}
			v, err := parse(buf, false)
			if err != nil {
				if !IsCorruption(err) {
					t.Fatalf("byte %d: lazy err %v not a corruption", i, err)
				}
				if i >= headerSize && !ixIsLabelByte(good, i) {
					t.Fatalf("byte %d: lazy open read a data section", i)
				}
				continue
			}
			x := &Index{}
			x.v.Store(v)
			ixExercise(x)
			if err := x.Verify(); !IsCorruption(err) {
				t.Fatalf("byte %d ^ %#x: Verify after lazy open = %v", i, mask, err)
			}
		}
	}
	t.Logf("flipped each of %d bytes 3 ways", len(good))
}

// ixIsLabelByte reports whether offset i lies in a section the lazy open
// reads (the label and value-set tables).
func ixIsLabelByte(file []byte, i int) bool {
	h := decodeHeader(file)
	for _, id := range []int{secLabelOffs, secLabelBytes, secVSetOffs, secVSetLabels} {
		s := h.Sections[id-1]
		if uint64(i) >= s.Offset && uint64(i) < s.Offset+s.Length {
			return true
		}
	}
	return false
}

// TestTruncation rejects every proper prefix of a valid file, and the file
// with trailing bytes.
func TestTruncation(t *testing.T) {
	t.Parallel()
	path := ixWriteTemp(t, ixSourceFromContexts(ixGreenhouse()))
	good := ixReadFile(t, path)
	for n := 0; n < len(good); n++ {
		for _, full := range []bool{true, false} {
			if _, err := parse(good[:n], full); !IsCorruption(err) {
				t.Fatalf("prefix of %d bytes: err = %v", n, err)
			}
		}
	}
	// Through the file system too, for the short-file read path and mmap.
	for _, n := range []int{0, 3, 8, 11, headerSize - 1, headerSize, len(good) - 1} {
		p := filepath.Join(t.TempDir(), "cut.hwx")
		if err := os.WriteFile(p, good[:n], 0o644); err != nil {
			t.Fatal(err)
		}
		_, err := Open(p)
		if !IsCorruption(err) || !strings.Contains(err.Error(), p) {
			t.Fatalf("Open of %d-byte prefix: %v", n, err)
		}
	}
	if _, err := parse(append(slices.Clone(good), 0), true); !errors.Is(err, ErrCorrupt) {
		t.Fatalf("trailing byte: %v", err)
	}
}

// TestOpenErrorOrder checks each sentinel and that the checks run in the
// documented order (magic, version, header checksum).
func TestOpenErrorOrder(t *testing.T) {
	t.Parallel()
	good := ixReadFile(t, ixWriteTemp(t, ixSourceFromContexts(ixGreenhouse())))
	mut := func(f func(b []byte)) []byte { b := slices.Clone(good); f(b); return b }
	for _, tc := range []struct {
		name string
		data []byte
		want error
	}{
		// Magic damaged and version damaged: magic wins.
		{"magic", mut(func(b []byte) { b[0] = 'X'; b[offVersion] = 9 }), ErrBadMagic},
		{"notAnIndex", []byte("context,entity,value\nc1,pump.a,on\n"), ErrBadMagic},
		// Version damaged (header CRC now wrong too): version wins.
		{"version", mut(func(b []byte) { b[offVersion] = 9 }), ErrVersion},
		{"oldVersion", mut(func(b []byte) { b[offVersion] = 1 }), ErrVersion},
		{"headerCRC", mut(func(b []byte) { b[offContexts] ^= 1 }), ErrChecksum},
		{"sectionCRC", mut(func(b []byte) { b[len(b)-1] ^= 1 }), ErrChecksum},
	} {
		_, err := parse(tc.data, true)
		if !errors.Is(err, tc.want) || !IsCorruption(err) {
			t.Errorf("%s: err = %v, want %v", tc.name, err, tc.want)
		}
	}
	if IsCorruption(os.ErrNotExist) || IsCorruption(nil) {
		t.Error("IsCorruption true for a non-corruption error")
	}
	_, err := Open(filepath.Join(t.TempDir(), "missing.hwx"))
	if !errors.Is(err, os.ErrNotExist) || IsCorruption(err) {
		t.Errorf("missing file: %v", err)
	}
}

// ixResealHeader recomputes the generation and header checksum of b after a
// test changed checksummed content on purpose.
func ixResealHeader(b []byte) {
	h := decodeHeader(b)
	le.PutUint64(b[offGeneration:], generationOf(&h))
	le.PutUint32(b[headerCRCOffset:], crc32.Checksum(b[:headerCRCOffset], castagnoli))
}

// ixResealSection recomputes section id's checksum, then the header's.
func ixResealSection(b []byte, id int) {
	h := decodeHeader(b)
	s := h.Sections[id-1]
	e := b[tableOffset+(id-1)*tableEntrySize:]
	le.PutUint32(e[16:], crc32.Checksum(b[s.Offset:s.Offset+s.Length], castagnoli))
	ixResealHeader(b)
}

// TestRankTabSectionShort: a file whose ranked-pair-tables section has 4
// bytes per ranked entry instead of 8 (the file cut to match, every
// checksum and the generation resealed) is rejected with ErrSectionTable
// by the lazy open too, before any look-up could read past the section.
func TestRankTabSectionShort(t *testing.T) {
	t.Parallel()
	good := ixReadFile(t, ixWriteTemp(t, ixSourceFromContexts(ixGreenhouse())))
	e := good[tableOffset+(secRankTab-1)*tableEntrySize:]
	rank := decodeHeader(good).Sections[secRank-1].Length
	if rank == 0 {
		t.Fatal("no ranked entries")
	}
	le.PutUint64(e[8:], rank)
	size := le.Uint64(e) + rank
	b := slices.Clone(good[:size])
	le.PutUint64(b[offFileSize:], size)
	ixResealSection(b, secRankTab)
	for _, full := range []bool{false, true} {
		_, err := parse(b, full)
		if !errors.Is(err, ErrSectionTable) || !strings.Contains(err.Error(), "ranked-pair-tables") {
			t.Errorf("full %v: err = %v, want ErrSectionTable naming ranked-pair-tables", full, err)
		}
	}
}

// TestBadSectionTable: a right-size file whose section table lies, with
// valid checksums, is rejected with ErrSectionTable.
func TestBadSectionTable(t *testing.T) {
	t.Parallel()
	good := ixReadFile(t, ixWriteTemp(t, ixSourceFromContexts(ixGreenhouse())))
	entry := func(b []byte, id int) []byte { return b[tableOffset+(id-1)*tableEntrySize:] }
	for _, tc := range []struct {
		name string
		f    func(b []byte)
	}{
		{"shiftOffset", func(b []byte) { e := entry(b, secNbrs); le.PutUint64(e, le.Uint64(e)+8) }},
		{"unaligned", func(b []byte) { e := entry(b, secNbrs); le.PutUint64(e, le.Uint64(e)+1) }},
		{"hugeLength", func(b []byte) { le.PutUint64(entry(b, secRank)[8:], 1<<62) }},
		{"wrongLength", func(b []byte) { e := entry(b, secNameOffs); le.PutUint64(e[8:], le.Uint64(e[8:])-8) }},
		{"wrongID", func(b []byte) { le.PutUint32(entry(b, secCounts)[20:], secRank) }},
		{"swapped", func(b []byte) {
			x, y := entry(b, secNbrOffs), entry(b, secPairBase)
			var tmp [tableEntrySize]byte
			copy(tmp[:], x[:tableEntrySize])
			copy(x, y[:tableEntrySize])
			copy(y, tmp[:])
		}},
		{"tooManyPairs", func(b []byte) {
			h := decodeHeader(b)
			le.PutUint64(b[offPairs:], h.Pairs+1)
			le.PutUint64(b[offEdges:], h.Edges+2)
		}},
	} {
		b := slices.Clone(good)
		tc.f(b)
		ixResealHeader(b)
		_, err := parse(b, false)
		t.Logf("%s: %v", tc.name, err)
		if !errors.Is(err, ErrSectionTable) {
			t.Errorf("%s: err = %v, want ErrSectionTable", tc.name, err)
		}
	}
}

// TestStructurallyInvalid: content that passes every checksum but breaks an
// invariant is rejected by a full open and by Verify, and a lazy open of it
// never panics.
func TestStructurallyInvalid(t *testing.T) {
	t.Parallel()
	src := ixSourceFromContexts(ixGreenhouse())
	good := ixReadFile(t, ixWriteTemp(t, src))
	h := decodeHeader(good)
	sec := func(b []byte, id int) []byte {
		s := h.Sections[id-1]
		return b[s.Offset : s.Offset+s.Length]
	}
	for _, tc := range []struct {
		name string
		id   int
		f    func(s []byte)
	}{
		{"neighbourOutOfRange", secNbrs, func(s []byte) { le.PutUint32(s, 1000) }},
		{"neighboursUnsorted", secNbrs, func(s []byte) { // pump.a's list starts at entry 3
			a, b := le.Uint32(s[12:]), le.Uint32(s[16:])
			le.PutUint32(s[12:], b)
			le.PutUint32(s[16:], a)
		}},
		{"offsetsNotMonotone", secNbrOffs, func(s []byte) { le.PutUint64(s[8:], 1<<40) }},
		{"pairBaseWrong", secPairBase, func(s []byte) { le.PutUint64(s[8:], le.Uint64(s[8:])+1) }},
		{"marginalTooBig", secMarginals, func(s []byte) { le.PutUint64(s, 1<<50) }},
		{"countAboveMarginal", secCounts, func(s []byte) { le.PutUint32(s, 1000) }},
		{"zeroSupport", secCounts, func(s []byte) { clear(s[:16]) }},
		{"rankOrder", secRank, func(s []byte) {
			a, b := le.Uint32(s[0:]), le.Uint32(s[4:])
			le.PutUint32(s[0:], b)
			le.PutUint32(s[4:], a)
		}},
		{"namesUnsorted", secNameBytes, func(s []byte) { s[0] = 'z' }},
		{"labelIDRange", secVSetLabels, func(s []byte) { le.PutUint32(s, 77) }},
		{"pairOffsets", secPairOffs, func(s []byte) { le.PutUint64(s[8:], le.Uint64(s[8:])+1) }},
		{"rankPosRange", secRankPos, func(s []byte) { le.PutUint32(s, 1000) }},
		{"rankPosWrong", secRankPos, func(s []byte) { le.PutUint32(s, le.Uint32(s)+1) }},
		{"rankTabRange", secRankTab, func(s []byte) { le.PutUint64(s, le.Uint64(s)+1<<40) }},
		{"rankTabWrong", secRankTab, func(s []byte) { le.PutUint64(s, le.Uint64(s)+1) }},
		{"rankTabK", secRankTab, func(s []byte) { le.PutUint64(s, le.Uint64(s)^1<<52) }},
		{"rankTabOnes", secRankTab, func(s []byte) { le.PutUint64(s, math.MaxUint64) }},
	} {
		b := slices.Clone(good)
		tc.f(sec(b, tc.id))
		ixResealSection(b, tc.id)
		_, err := parse(b, true)
		if !errors.Is(err, ErrCorrupt) {
			t.Errorf("%s: full open err = %v, want ErrCorrupt", tc.name, err)
			continue
		}
		t.Logf("%s: %v", tc.name, err)
		v, err := parse(b, false)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Errorf("%s: lazy open err = %v", tc.name, err)
			}
			continue
		}
		x := &Index{}
		x.v.Store(v)
		ixExercise(x)
		if err := x.Verify(); !errors.Is(err, ErrCorrupt) {
			t.Errorf("%s: Verify = %v, want ErrCorrupt", tc.name, err)
		}
	}
}

// TestWriteFailureKeepsOldFile: a Source that fails mid-write leaves the
// previous index at the path untouched and no temporary file behind.
func TestWriteFailureKeepsOldFile(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	path := filepath.Join(dir, "idx.hwx")
	if err := WriteFile(path, ixSourceFromContexts(ixGreenhouse())); err != nil {
		t.Fatal(err)
	}
	old := ixReadFile(t, path)
	for _, fail := range []struct{ call, at int }{{1, 3}, {2, 0}, {2, 5}} {
		src := ixRandomSource(50, 6, 2, 3)
		src.failCall, src.failAt = fail.call, fail.at
		err := WriteFile(path, src)
		if !errors.Is(err, errIxInjected) {
			t.Fatalf("fail %v: err = %v, want the injected error", fail, err)
		}
		if got := ixReadFile(t, path); !bytes.Equal(got, old) {
			t.Fatal("old index changed after a failed write")
		}
		ents, _ := os.ReadDir(dir)
		if len(ents) != 1 {
			t.Fatalf("directory holds %d entries after a failed write, want 1", len(ents))
		}
	}
	// A failed write into a fresh path leaves nothing at all.
	src := ixRandomSource(20, 4, 2, 3)
	src.failCall, src.failAt = 2, 1
	fresh := filepath.Join(dir, "new.hwx")
	if err := WriteFile(fresh, src); err == nil {
		t.Fatal("want error")
	}
	if _, err := os.Stat(fresh); !errors.Is(err, os.ErrNotExist) {
		t.Fatalf("target exists after a failed first write: %v", err)
	}
}

// TestInvalidSource lists Source contract violations WriteFile rejects.
func TestInvalidSource(t *testing.T) {
	t.Parallel()
	ent := func(name string, vals ...string) EntityRecord {
		m := make([]uint64, len(vals))
		for i := range m {
			m[i] = 5
		}
		return EntityRecord{Name: name, Values: vals, Marginal: m}
	}
	many := make([]string, MaxValues+1)
	for i := range many {
		many[i] = string(rune('A'+i/26)) + string(rune('a'+i%26))
	}
	two := []EntityRecord{ent("a", "x", "y"), ent("b", "x", "y")}
	for _, tc := range []struct {
		name string
		src  *ixSource
		opts []WriteOption
	}{
		{"unsortedNames", &ixSource{contexts: 10, ents: []EntityRecord{ent("b", "x"), ent("a", "x")}}, nil},
		{"duplicateNames", &ixSource{contexts: 10, ents: []EntityRecord{ent("a", "x"), ent("a", "x")}}, nil},
		{"emptyName", &ixSource{contexts: 10, ents: []EntityRecord{ent("", "x")}}, nil},
		{"noValues", &ixSource{contexts: 10, ents: []EntityRecord{ent("a")}}, nil},
		{"tooManyValues", &ixSource{contexts: 1000, ents: []EntityRecord{ent("a", many...)}}, nil},
		{"unsortedValues", &ixSource{contexts: 10, ents: []EntityRecord{ent("a", "y", "x")}}, nil},
		{"marginalLen", &ixSource{contexts: 10, ents: []EntityRecord{{Name: "a", Values: []string{"x"}, Marginal: []uint64{1, 2}}}}, nil},
		{"marginalAboveContexts", &ixSource{contexts: 3, ents: []EntityRecord{ent("a", "x")}}, nil},
		{"pairAeqB", &ixSource{contexts: 10, ents: two, pairs: []PairRecord{{A: 1, B: 1, Counts: []uint32{1, 0, 0, 0}}}}, nil},
		{"pairOutOfRange", &ixSource{contexts: 10, ents: two, pairs: []PairRecord{{A: 0, B: 2, Counts: []uint32{1, 0, 0, 0}}}}, nil},
		{"pairDuplicate", &ixSource{contexts: 10, ents: two, pairs: []PairRecord{{A: 0, B: 1, Counts: []uint32{1, 0, 0, 0}}, {A: 0, B: 1, Counts: []uint32{1, 0, 0, 0}}}}, nil},
		{"countsLen", &ixSource{contexts: 10, ents: two, pairs: []PairRecord{{A: 0, B: 1, Counts: []uint32{1, 0, 0}}}}, nil},
		{"zeroSupport", &ixSource{contexts: 10, ents: two, pairs: []PairRecord{{A: 0, B: 1, Counts: []uint32{0, 0, 0, 0}}}}, nil},
		{"rowAboveMarginal", &ixSource{contexts: 10, ents: two, pairs: []PairRecord{{A: 0, B: 1, Counts: []uint32{6, 0, 0, 0}}}}, nil},
		{"colAboveMarginal", &ixSource{contexts: 10, ents: two, pairs: []PairRecord{{A: 0, B: 1, Counts: []uint32{3, 0, 3, 0}}}}, nil},
	} {
		err := WriteFile(filepath.Join(t.TempDir(), "x.hwx"), tc.src, tc.opts...)
		if !errors.Is(err, ErrInvalidSource) {
			t.Errorf("%s: err = %v, want ErrInvalidSource", tc.name, err)
		}
	}
	for _, r := range []int{0, -1, MaxRankPrefix + 1} {
		if err := WriteFile(filepath.Join(t.TempDir(), "x.hwx"), &ixSource{}, WithRankPrefix(r)); err == nil {
			t.Errorf("rank prefix %d accepted", r)
		}
	}
}

// TestEmptyIndex: zero entities is a valid (if useless) index.
func TestEmptyIndex(t *testing.T) {
	t.Parallel()
	x, err := Open(ixWriteTemp(t, &ixSource{}))
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	if x.NumEntities() != 0 || x.NumPairs() != 0 {
		t.Fatal("empty index not empty")
	}
	ixExercise(x)
}

// TestCloseContract: Close is idempotent and later calls return zero values.
func TestCloseContract(t *testing.T) {
	t.Parallel()
	x, err := Open(ixWriteTemp(t, ixSourceFromContexts(ixGreenhouse())))
	if err != nil {
		t.Fatal(err)
	}
	if err := x.Close(); err != nil {
		t.Fatal(err)
	}
	if err := x.Close(); err != nil {
		t.Fatalf("second Close: %v", err)
	}
	if x.NumEntities() != 0 || x.Bytes() != 0 || x.Neighbors(1) != nil || x.Name(0) != "" || x.Sections() != nil {
		t.Fatal("closed index still answers")
	}
	if _, ok := x.Pair(0, 1); ok {
		t.Fatal("closed index returns a pair")
	}
	if _, ok := x.Lookup("pump.a"); ok {
		t.Fatal("closed index looks up names")
	}
	if err := x.Verify(); !errors.Is(err, ErrClosed) {
		t.Fatalf("Verify after Close = %v", err)
	}
	ixExercise(x)
}

// TestWithoutMmap: the read-into-memory path gives the same answers.
func TestWithoutMmap(t *testing.T) {
	t.Parallel()
	path := ixWriteTemp(t, ixRandomSource(80, 6, 0, 11))
	a, b := ixOpen(t, path), ixOpen(t, path, WithoutMmap())
	for i := 0; i < a.NumEntities(); i++ {
		id := EntityID(i)
		if !slices.Equal(a.Neighbors(id), b.Neighbors(id)) || !slices.Equal(a.RankedNeighbors(id), b.RankedNeighbors(id)) {
			t.Fatalf("entity %d differs", i)
		}
		for _, nb := range a.Neighbors(id) {
			pa, _ := a.Pair(id, nb)
			pb, _ := b.Pair(id, nb)
			if pa.Support() != pb.Support() {
				t.Fatalf("pair (%d,%d) differs", id, nb)
			}
		}
	}
	if err := b.Verify(); err != nil {
		t.Fatalf("Verify of the copy: %v", err)
	}
	// A damaged file is rejected on this path too, and Close releases the
	// copy once (a second Close is a no-op).
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	raw[len(raw)-1] ^= 1
	bad := filepath.Join(t.TempDir(), "bad.hwx")
	if err := os.WriteFile(bad, raw, 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := Open(bad, WithoutMmap()); !errors.Is(err, ErrChecksum) {
		t.Fatalf("damaged file opened without mmap: %v, want ErrChecksum", err)
	}
	if err := b.Close(); err != nil || b.Close() != nil || b.NumEntities() != 0 {
		t.Fatalf("Close: %v, then NumEntities %d", err, b.NumEntities())
	}
}

// TestConcurrentReaders hammers one index from several goroutines (run
// with -race).
func TestConcurrentReaders(t *testing.T) {
	t.Parallel()
	src := ixRandomSource(200, 10, 2, 5)
	x, err := Open(ixWriteTemp(t, src))
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	done := make(chan uint64)
	for g := 0; g < 4; g++ {
		go func() {
			var s uint64
			for _, p := range src.pairs {
				ps, _ := x.Pair(p.B, p.A)
				s += ps.Support()
			}
			done <- s
		}()
	}
	var want uint64
	for _, p := range src.pairs {
		for _, c := range p.Counts {
			want += uint64(c)
		}
	}
	for g := 0; g < 4; g++ {
		if got := <-done; got != want {
			t.Fatalf("goroutine sum %d want %d", got, want)
		}
	}
}

// TestCopyDecodePath runs the decoding used on big-endian hosts (copying
// little-endian arrays instead of aliasing them) and compares every answer
// with the zero-copy path. Not parallel: it switches a package variable.
func TestCopyDecodePath(t *testing.T) {
	src := ixRandomSource(120, 8, 0, 21)
	path := ixWriteTemp(t, src)
	zc, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer zc.Close()
	hostLittleEndian = false
	cp, err := Open(path)
	hostLittleEndian = true
	if err != nil {
		t.Fatal(err)
	}
	defer cp.Close()
	if err := cp.Verify(); err != nil {
		t.Fatal(err)
	}
	for i := 0; i < zc.NumEntities(); i++ {
		id := EntityID(i)
		if !slices.Equal(zc.Neighbors(id), cp.Neighbors(id)) || !slices.Equal(zc.RankedNeighbors(id), cp.RankedNeighbors(id)) ||
			!slices.Equal(zc.Marginal(id), cp.Marginal(id)) || zc.Name(id) != cp.Name(id) {
			t.Fatalf("entity %d differs between decode paths", i)
		}
		for _, nb := range zc.Neighbors(id) {
			a, _ := zc.Pair(nb, id)
			b, _ := cp.Pair(nb, id)
			for u := 0; u < a.KA; u++ {
				for v := 0; v < a.KB; v++ {
					if a.Count(u, v) != b.Count(u, v) {
						t.Fatalf("pair (%d,%d) differs", nb, id)
					}
				}
			}
		}
	}
}

// TestVerifyContext: a cancelled context stops Verify with ctx.Err(), which
// is not a corruption.
func TestVerifyContext(t *testing.T) {
	t.Parallel()
	x, err := Open(ixWriteTemp(t, ixRandomSource(50, 4, 2, 1)), WithLazyVerify())
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if err := x.VerifyContext(ctx); !errors.Is(err, context.Canceled) || IsCorruption(err) {
		t.Fatalf("VerifyContext(cancelled) = %v", err)
	}
	if err := x.VerifyContext(context.Background()); err != nil {
		t.Fatal(err)
	}
}
