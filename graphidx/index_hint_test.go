package graphidx

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
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
