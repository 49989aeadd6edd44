package graphidx

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

// namesSource is a Source of presence-only entities with the given names
// and no pairs.
type namesSource []string

func (s namesSource) Contexts() uint64 { return 1 }
func (s namesSource) Entities() []EntityRecord {
	names := slices.Clone([]string(s))
	slices.Sort(names)
	names = slices.Compact(names)
	out := make([]EntityRecord, len(names))
	for i, n := range names {
		out[i] = EntityRecord{Name: n, Values: []string{"present"}, Marginal: []uint64{1}}
	}
	return out
}
func (s namesSource) Pairs(func(PairRecord) error) error { return nil }

func openNames(tb testing.TB, names []string) *Index {
	tb.Helper()
	x, err := Open(ixWriteTemp(tb, namesSource(names)))
	if err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(func() { x.Close() })
	return x
}

// levenshtein is the textbook O(m·n) edit distance with ASCII case folded:
// the reference Suggest's bit-parallel and banded versions are checked
// against.
func levenshtein(a, b string) int {
	prev := make([]int, len(b)+1)
	row := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		row[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if foldASCII(a[i-1]) == foldASCII(b[j-1]) {
				cost = 0
			}
			row[j] = min(prev[j-1]+cost, prev[j]+1, row[j-1]+1)
		}
		prev, row = row, prev
	}
	return prev[len(b)]
}

func TestSuggest(t *testing.T) {
	t.Parallel()
	x := openNames(t, []string{
		"bed-10/leaf-wilt", "bed-10/soil-moisture", "bed-11/leaf-wilt", "bed-11/moisture-probe",
		"pump-1", "pump-2", "pump-3", "vent-a", "vent-b", "zone-1/air-temp", "zone-2/air-temp",
	})
	for _, c := range []struct {
		name string
		n    int
		want []string
	}{
		{"bed-10/leaf-wil", 3, []string{"bed-10/leaf-wilt", "bed-11/leaf-wilt"}},  // deletion, then one more edit
		{"Bed-10/Leaf-Wilt", 3, []string{"bed-10/leaf-wilt", "bed-11/leaf-wilt"}}, // case only: distance 0
		{"pump-4", 2, []string{"pump-1", "pump-2"}},                               // ties by name, cut at n
		{"pump-4", 5, []string{"pump-1", "pump-2", "pump-3"}},
		{"bed-10", 5, []string{"bed-10/leaf-wilt", "bed-10/soil-moisture"}}, // prefix extensions
		{"zone-1/airtemp", 1, []string{"zone-1/air-temp"}},
		{"greenhouse-roof", 3, nil},                 // nothing near
		{"pump-1", 3, []string{"pump-2", "pump-3"}}, // the name itself is not suggested
		{"", 3, nil},
		{"pump-4", 0, nil},
	} {
		got := x.Suggest(c.name, c.n)
		if !slices.Equal(got, c.want) {
			t.Errorf("Suggest(%q, %d) = %q, want %q", c.name, c.n, got, c.want)
		}
	}
}

func TestPrefixRange(t *testing.T) {
	t.Parallel()
	names := []string{"bed-1", "bed-10/leaf", "bed-10/soil", "bed-11", "pump", "pump-1", "vent"}
	x := openNames(t, names)
	for _, c := range []struct {
		prefix string
		want   []string
	}{
		{"", names},
		{"bed-10", []string{"bed-10/leaf", "bed-10/soil"}},
		{"bed-1", []string{"bed-1", "bed-10/leaf", "bed-10/soil", "bed-11"}},
		{"pump", []string{"pump", "pump-1"}},
		{"vent", []string{"vent"}},
		{"a", nil},
		{"zzz", nil},
		{"bed-2", nil},
	} {
		lo, hi := x.PrefixRange(c.prefix)
		var got []string
		for id := lo; id < hi; id++ {
			got = append(got, x.Name(id))
		}
		if !slices.Equal(got, c.want) {
			t.Errorf("PrefixRange(%q) = %q, want %q", c.prefix, got, c.want)
		}
	}
}

// TestSuggestMatchesReference checks the bit-parallel (≤ 64 bytes) and the
// banded (longer) distances against the textbook programme on seeded random
// names over a small alphabet, so that near names are common.
func TestSuggestMatchesReference(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(7, 11))
	word := func(n int) string {
		b := make([]byte, n)
		for i := range b {
			b[i] = "abAB-/"[rng.IntN(6)]
		}
		return string(b)
	}
	for _, length := range []int{3, 12, 40, 64, 65, 90} {
		// Random names, and 1 to 5 random edits of each query, so that both
		// near and far names are common.
		queries := make([]string, 40)
		var names []string
		for i := range queries {
			queries[i] = word(length)
			for range 3 {
				b := []byte(queries[i])
				for range 1 + rng.IntN(5) {
					if len(b) < 2 {
						b = append(b, 'b')
						continue
					}
					p := rng.IntN(len(b))
					switch rng.IntN(3) {
					case 0:
						b[p] = "abAB-/"[rng.IntN(6)]
					case 1:
						b = slices.Delete(b, p, p+1)
					default:
						b = slices.Insert(b, p, 'a')
					}
				}
				names = append(names, string(b))
			}
		}
		for range 400 {
			names = append(names, word(length-2+rng.IntN(5)))
		}
		x := openNames(t, names)
		all := namesSource(names).Entities()
		found := 0
		for _, q := range queries {
			for _, n := range []int{1, 5} {
				got := x.Suggest(q, n)
				maxD := min(4, 1+len(q)/4)
				var ref []suggestion
				for _, e := range all {
					d := levenshtein(q, e.Name)
					if strings.HasPrefix(e.Name, q) && len(e.Name) > len(q) {
						d = min(d, 1)
					}
					if d <= maxD && e.Name != q {
						ref = append(ref, suggestion{d, e.Name})
					}
				}
				slices.SortFunc(ref, func(a, b suggestion) int {
					if a.d != b.d {
						return a.d - b.d
					}
					return strings.Compare(a.name, b.name)
				})
				var want []string
				for _, r := range ref[:min(n, len(ref))] {
					want = append(want, r.name)
				}
				if !slices.Equal(got, want) {
					t.Fatalf("length %d, Suggest(%q, %d) = %q, want %q", length, q, n, got, want)
				}
				found += len(got)
			}
		}
		if found == 0 {
			t.Errorf("length %d: no query had a near name; the check is vacuous", length)
		}
	}
}

// BenchmarkSuggest measures Suggest on a million names against the
// baseline of the textbook distance to every name, in the same run.
func BenchmarkSuggest(b *testing.B) {
	const n = 1_000_000
	names := make([]string, n)
	for i := range names {
		names[i] = fmt.Sprintf("zone-%d/bed-%d/sensor-%d", i%97, i/97%1000, i)
	}
	x := openNames(b, names)
	q := strings.Replace(names[500_000], "sensor", "sensr", 1) // one deletion
	want := x.Suggest(q, 5)
	if len(want) == 0 {
		b.Fatal("no suggestion")
	}
	b.Run("suggest", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			if got := x.Suggest(q, 5); !slices.Equal(got, want) {
				b.Fatalf("got %q, want %q", got, want)
			}
		}
	})
	b.Run("baseline-full-dp", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			best := 1 << 30
			for _, s := range names {
				best = min(best, levenshtein(q, s))
			}
			if best != 1 {
				b.Fatalf("baseline distance %d", best)
			}
		}
	})
}
