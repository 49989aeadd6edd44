package graphidx

import (
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// TestLookupSampledMatchesScan checks Lookup (sampled range, then binary
// search) against a linear scan of the names, on name sets built to stress
// the 8-byte sample keys: many names sharing a long prefix (equal keys over
// many samples), names shorter than 8 bytes and names with a zero byte
// (padding ties), and for names absent from the index that fall between,
// before and after the stored ones; and LookupTwo against Lookup.
func TestLookupSampledMatchesScan(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name string
		gen  func(i int, rng *rand.Rand) string
		n    int
	}{
		{"long shared prefix", func(i int, _ *rand.Rand) string { return fmt.Sprintf("greenhouse.zone.%06d", i) }, 3000},
		{"short", func(i int, _ *rand.Rand) string { return fmt.Sprintf("%x", i) }, 2000},
		{"zero bytes and ties", func(i int, rng *rand.Rand) string {
			return strings.Repeat("a", rng.IntN(9)) + string(rune('0'+rng.IntN(3))) + strings.Repeat("\x00", rng.IntN(3)) + fmt.Sprint(i%7)
		}, 1500},
		{"random bytes", func(_ int, rng *rand.Rand) string {
			b := make([]byte, 1+rng.IntN(12))
			for j := range b {
				b[j] = byte(rng.IntN(256))
			}
			return string(b)
		}, 2500},
		{"fewer than one sample step", func(i int, _ *rand.Rand) string { return fmt.Sprintf("pump.%d", i) }, 5},
	}
	for ci, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			rng := rand.New(rand.NewPCG(uint64(ci), 7))
			set := map[string]bool{}
			for i := 0; i < c.n; i++ {
				set[c.gen(i, rng)] = true
			}
			var names []string
			for s := range set {
				names = append(names, s)
			}
			slices.Sort(names)
			ents := make([]EntityRecord, len(names))
			for i, s := range names {
				ents[i] = EntityRecord{Name: s, Values: []string{"a"}, Marginal: []uint64{1}}
			}
			path := filepath.Join(t.TempDir(), "names.hwx")
			if err := WriteFile(path, &ixSource{contexts: 1, ents: ents}); err != nil {
				t.Fatal(err)
			}
			ix, err := Open(path)
			if err != nil {
				t.Fatal(err)
			}
			defer ix.Close()
			probes := slices.Clone(names)
			for _, s := range names {
				probes = append(probes, s+"\x00", s[:len(s)-1], s+"~")
			}
			probes = append(probes, "", "\xff\xff\xff\xff\xff\xff\xff\xff\xff")
			for i, p := range probes {
				want, found := slices.BinarySearch(names, p)
				got, ok := ix.Lookup(p)
				if ok != found || (ok && int(got) != want) {
					t.Fatalf("Lookup(%q) = %d, %v; want %d, %v", p, got, ok, want, found)
				}
				// LookupTwo answers both names as Lookup does, whatever
				// the other name (present, absent, the same).
				q := probes[(i*7919+3)%len(probes)]
				ga, oka, gb, okb := ix.LookupTwo(p, q)
				wb, okq := ix.Lookup(q)
				if ga != got || oka != ok || gb != wb || okb != okq {
					t.Fatalf("LookupTwo(%q, %q) = %d, %v, %d, %v; Lookup gives %d, %v, %d, %v", p, q, ga, oka, gb, okb, got, ok, wb, okq)
				}
				if ga, oka, gb, okb := ix.LookupTwo(p, p); ga != got || oka != ok || gb != got || okb != ok {
					t.Fatalf("LookupTwo(%q, %q) = %d, %v, %d, %v; Lookup gives %d, %v", p, p, ga, oka, gb, okb, got, ok)
				}
			}
		})
	}
}
