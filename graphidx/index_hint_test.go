package graphidx

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unsafe"
)

// TestRankedPairHints: every stored hint names its pair's position in the
// lower entity's upper list, and PairBatchHinted answers exactly as Pair
// with the stored hints, with no hints and with hints that are wrong (a
// hint past the list, a hint naming another entry), on uniform and mixed K
// and a hub, for rank prefixes 1 and the default.
func TestRankedPairHints(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		name string
		src  Source
	}{
		{"greenhouse", ixSourceFromContexts(ixGreenhouse())},
		{"uniformK2", ixRandomSource(300, 12, 2, 1)},
		{"mixedK", ixRandomSource(200, 10, 0, 2)},
		{"dense", ixRandomSource(40, 39, 3, 3)},
	} {
		for _, rp := range []int{1, DefaultRankPrefix} {
			x, err := Open(ixWriteTemp(t, tc.src, WithRankPrefix(rp)))
			if err != nil {
				t.Fatal(err)
			}
			defer x.Close()
			for i := range x.NumEntities() {
				id := EntityID(i)
				rk, hints := x.RankedNeighbors(id), x.RankedPairHints(id)
				if len(hints) != len(rk) {
					t.Fatalf("%s/%d: entity %d has %d hints for %d ranked neighbours", tc.name, rp, i, len(hints), len(rk))
				}
				for j, y := range rk {
					lo, hi := min(id, y), max(id, y)
					up, _ := x.v.Load().upperNeighbors(lo)
					if int(hints[j]) >= len(up) || up[hints[j]] != hi {
						t.Fatalf("%s/%d: entity %d, ranked %d: hint %d does not name the pair (%d, %d)", tc.name, rp, i, y, hints[j], lo, hi)
					}
				}
				if j := ixHintedDisagree(x, id); j >= 0 {
					t.Fatalf("%s/%d: entity %d, ranked neighbour %d: hinted look-up differs from Pair", tc.name, rp, i, j)
				}
				// Wrong hints, and pairs that are not stored, fall back to
				// the search: the same answers as Pair.
				n := x.NumEntities()
				a, b, bad := []EntityID{}, []EntityID{}, []uint32{}
				for j, y := range rk {
					a, b = append(a, y, id, id), append(b, id, y, EntityID((i+j+1)%n))
					bad = append(bad, hints[j]+1, 1<<31, hints[j])
				}
				out, ok := make([]PairStats, len(a)), make([]bool, len(a))
				x.PairBatchHinted(a, b, bad, out, ok)
				for k := range a {
					want, wok := x.Pair(a[k], b[k])
					if ok[k] != wok || !ixSamePair(out[k], want) {
						t.Fatalf("%s/%d: pair (%d, %d) with hint %d: got %v %v, want %v %v", tc.name, rp, a[k], b[k], bad[k], out[k], ok[k], want, wok)
					}
				}
			}
		}
	}
}

// TestRankedPairHintCorrupt: a wrong stored position is an error of Open
// and Verify that names the file and the entry's file offset; a file
// opened WithLazyVerify still answers every hinted look-up as Pair does.
// Every entry of the section is damaged in turn (checksums resealed, as a
// crafted file would be).
func TestRankedPairHintCorrupt(t *testing.T) {
	t.Parallel()
	good := ixReadFile(t, ixWriteTemp(t, ixRandomSource(60, 8, 2, 5), WithRankPrefix(3)))
	h := decodeHeader(good)
	sec := h.Sections[secRankPos-1]
	dir := t.TempDir()
	for e := uint64(0); e < sec.Length/4; e++ {
		for _, delta := range []uint32{1, 1 << 30} {
			b := append([]byte(nil), good...)
			off := sec.Offset + 4*e
			le.PutUint32(b[off:], le.Uint32(b[off:])+delta)
			ixResealSection(b, secRankPos)
			path := filepath.Join(dir, fmt.Sprintf("e%d-%d.hwx", e, delta))
			if err := os.WriteFile(path, b, 0o644); err != nil {
				t.Fatal(err)
			}
			_, err := Open(path)
			wantOff := fmt.Sprintf("file offset %d:", off)
			if !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), path) || !strings.Contains(err.Error(), wantOff) {
				t.Fatalf("entry %d +%d: Open = %v, want ErrCorrupt naming %s and %q", e, delta, err, path, wantOff)
			}
			x, err := Open(path, WithLazyVerify())
			if err != nil {
				t.Fatalf("entry %d: lazy open: %v", e, err)
			}
			if err := x.Verify(); !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), wantOff) {
				t.Fatalf("entry %d: Verify = %v, want ErrCorrupt naming %q", e, err, wantOff)
			}
			for i := range x.NumEntities() {
				if j := ixHintedDisagree(x, EntityID(i)); j >= 0 {
					t.Fatalf("entry %d: entity %d, ranked neighbour %d: hinted look-up differs from Pair", e, i, j)
				}
			}
			x.Close()
		}
	}
}

// ixRankedDisagree returns the first ranked entry j of id whose look-up by
// PairBatchRanked differs from Pair, or -1.
func ixRankedDisagree(x *Index, id EntityID) int {
	rk := x.RankedNeighbors(id)
	a, ent := make([]EntityID, len(rk)), make([]uint32, len(rk))
	for j := range a {
		a[j], ent[j] = id, uint32(j)
	}
	out, ok := make([]PairStats, len(rk)), make([]bool, len(rk))
	x.PairBatchRanked(a, rk, ent, out, ok)
	for j, y := range rk {
		want, wok := x.Pair(id, y)
		if ok[j] != wok || !ixSamePair(out[j], want) {
			return j
		}
	}
	return -1
}

// TestRankedPairTableCorrupt: a wrong ranked pair table reference (section
// ranked-pair-tables) is an error of Open and Verify that names the file
// and the entry's file offset; opened WithLazyVerify, where the references
// are not used, every look-up by ranked entry still answers as Pair does.
// Every entry of the section is damaged in turn, four ways (another start,
// a start past the counts, another K, all bits set), checksums resealed as
// a crafted file would be. And a view that trusts damaged references (as
// if they had been checked) still never reads outside the counts: every
// look-up returns a table inside the section or none, without a panic.
func TestRankedPairTableCorrupt(t *testing.T) {
	t.Parallel()
	good := ixReadFile(t, ixWriteTemp(t, ixRandomSource(60, 8, 2, 5), WithRankPrefix(3)))
	h := decodeHeader(good)
	sec := h.Sections[secRankTab-1]
	dir := t.TempDir()
	damage := []struct {
		name string
		f    func(r uint64) uint64
	}{
		{"start+1", func(r uint64) uint64 { return r + 1 }},
		{"pastCounts", func(r uint64) uint64 { return r + 1<<40 }},
		{"kLo", func(r uint64) uint64 { return r ^ 1<<rankTabStartBits }},
		{"ones", func(uint64) uint64 { return math.MaxUint64 }},
	}
	for e := uint64(0); e < sec.Length/8; e++ {
		for _, d := range damage {
			b := append([]byte(nil), good...)
			off := sec.Offset + 8*e
			le.PutUint64(b[off:], d.f(le.Uint64(b[off:])))
			ixResealSection(b, secRankTab)
			path := filepath.Join(dir, fmt.Sprintf("e%d-%s.hwx", e, d.name))
			if err := os.WriteFile(path, b, 0o644); err != nil {
				t.Fatal(err)
			}
			_, err := Open(path)
			wantOff := fmt.Sprintf("file offset %d:", off)
			if !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), path) || !strings.Contains(err.Error(), wantOff) {
				t.Fatalf("entry %d %s: Open = %v, want ErrCorrupt naming %s and %q", e, d.name, err, path, wantOff)
			}
			x, err := Open(path, WithLazyVerify())
			if err != nil {
				t.Fatalf("entry %d %s: lazy open: %v", e, d.name, err)
			}
			if err := x.Verify(); !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), wantOff) {
				t.Fatalf("entry %d %s: Verify = %v, want ErrCorrupt naming %q", e, d.name, err, wantOff)
			}
			for i := range x.NumEntities() {
				if j := ixRankedDisagree(x, EntityID(i)); j >= 0 {
					t.Fatalf("entry %d %s: entity %d, ranked entry %d: look-up by entry differs from Pair", e, d.name, i, j)
				}
			}
			x.Close()
			// Trusted although damaged: bounds only.
			v, err := parse(b, false)
			if err != nil {
				t.Fatalf("entry %d %s: lazy parse: %v", e, d.name, err)
			}
			v.checked = true
			y := &Index{}
			y.v.Store(v)
			for i := range y.NumEntities() {
				rk := y.RankedNeighbors(EntityID(i))
				a, ent := make([]EntityID, len(rk)), make([]uint32, len(rk))
				for j := range a {
					a[j], ent[j] = EntityID(i), uint32(j)
				}
				out, ok := make([]PairStats, len(rk)), make([]bool, len(rk))
				y.PairBatchRanked(a, rk, ent, out, ok)
				for j := range rk {
					if !ok[j] {
						continue
					}
					if p := out[j]; p.KA < 1 || p.KB < 1 || len(p.counts) != p.KA*p.KB ||
						!ixWithin(p.counts, v.counts) {
						t.Fatalf("entry %d %s: entity %d, ranked entry %d: table outside the counts", e, d.name, i, j)
					}
				}
			}
		}
	}
}

// ixWithin reports whether the non-empty slice s lies inside all.
func ixWithin(s, all []uint32) bool {
	if len(s) == 0 || len(all) == 0 {
		return len(s) == 0
	}
	p, lo := uintptr(unsafe.Pointer(&s[0])), uintptr(unsafe.Pointer(&all[0]))
	return p >= lo && p+uintptr(4*len(s)) <= lo+uintptr(4*len(all))
}
