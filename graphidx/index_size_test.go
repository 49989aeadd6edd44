package graphidx

import (
	"os"
	"testing"
)

// TestBytesPerEdge reports the size of a random binary index per directed
// edge (adjacency entry), excluding the name sections, and checks the
// edge-proportional part: 4 B neighbour id + 4 B ranked entry + 4 B ranked
// pair position + 8 B ranked pair table + a 2×2 uint32 table shared by the
// two directions (8 B) = 28 B when every degree is within the rank prefix. The per-entity part (offsets, marginals,
// value-set id) is reported separately; it amortises over the degree.
func TestBytesPerEdge(t *testing.T) {
	t.Parallel()
	for _, deg := range []int{8, 16, 48} {
		src := ixRandomSource(20_000, deg, 2, uint64(deg))
		path := ixWriteTemp(t, src)
		x, err := Open(path)
		if err != nil {
			t.Fatal(err)
		}
		st, err := os.Stat(path)
		if err != nil {
			t.Fatal(err)
		}
		sec := map[string]uint64{}
		for _, s := range x.Sections() {
			sec[s.Name] = s.Length
		}
		edges := float64(2 * x.NumPairs())
		names := sec["name-offsets"] + sec["name-bytes"]
		edgeBytes := sec["neighbours"] + sec["ranked-neighbours"] + sec["ranked-pair-positions"] + sec["ranked-pair-tables"] + sec["counts"]
		edgePart := float64(edgeBytes) / edges
		total := float64(uint64(st.Size())-names) / edges
		perEntity := float64(uint64(st.Size())-names-edgeBytes) / float64(x.NumEntities())
		t.Logf("binary, avg degree %.1f: %.2f B/directed edge excluding names (edge part %.2f B + %.1f B per entity)",
			edges/float64(x.NumEntities()), total, edgePart, perEntity)
		if edgePart > 28 {
			t.Errorf("edge-proportional size %.2f B per directed edge, want ≤ 28", edgePart)
		}
		x.Close()
	}
}
