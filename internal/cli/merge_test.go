package cli

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
	"github.com/hopwise/hopwise/graphidx/counts"
)

// mergeCorpus returns n seeded greenhouse contexts (vents, pumps, zones,
// beds with 2-3 values) as JSONL.
func mergeCorpus(seed uint64, n int) []byte {
	rng := rand.New(rand.NewPCG(seed, 11))
	ents := []string{"vent1", "vent2", "pump1", "pump2", "zone1.temp", "zone2.temp", "bed1", "bed2", "bed3", "sensor7"}
	vals := []string{"a", "b", "c"}
	var b bytes.Buffer
	for i := range n {
		fmt.Fprintf(&b, `{"id":"s%d-%d","obs":{`, seed, i)
		perm := rng.Perm(len(ents))[:2+rng.IntN(4)]
		for j, e := range perm {
			if j > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, "%q:%q", ents[e], vals[rng.IntN(2+e%2)])
		}
		b.WriteString("}}\n")
	}
	return b.Bytes()
}

// countsDir counts a corpus with counts.Partial and writes it as shards.
func countsDir(t *testing.T, data []byte, shards int) string {
	t.Helper()
	dir := t.TempDir()
	p := counts.NewPartial()
	r := corpus.NewJSONLReader(bytes.NewReader(data), "c.jsonl")
	for {
		c, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		if err := p.Add(c); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := counts.WriteCounts(dir, p, shards); err != nil {
		t.Fatal(err)
	}
	return dir
}

func builtIndex(t *testing.T, data []byte, opts ...graphidx.BuildOption) []byte {
	t.Helper()
	out := filepath.Join(t.TempDir(), "b.idx")
	if _, err := graphidx.Build(context.Background(), corpus.NewJSONLReader(bytes.NewReader(data), "c.jsonl"), out, opts...); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func readFile(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestMergeEqualsRebuild: merging the counts of A and B gives the index
// that build writes for A∪B, byte for byte, with and without pruning; and
// the merged counts written with --counts-out compile to the same index.
func TestMergeEqualsRebuild(t *testing.T) {
	t.Parallel()
	a, b := mergeCorpus(1, 700), mergeCorpus(2, 500)
	union := append(append([]byte{}, a...), b...)
	da, db := countsDir(t, a, 3), countsDir(t, b, 5)
	dir := t.TempDir()

	out := filepath.Join(dir, "m.idx")
	merged := filepath.Join(dir, "merged-counts")
	got, err := runCLI(t, "merge", "--out", out, "--counts-out", merged, "--shards", "4", da, db)
	if err != nil {
		t.Fatalf("%v\n%s", err, got)
	}
	if !strings.Contains(got, "read 2 count set(s)") || !strings.Contains(got, "1200 contexts") {
		t.Errorf("summary:\n%s", got)
	}
	if !bytes.Equal(readFile(t, out), builtIndex(t, union)) {
		t.Fatal("merge of A and B differs from the build of A∪B")
	}

	pruned := filepath.Join(dir, "p.idx")
	got, err = runCLI(t, "merge", "--out", pruned, "--min-support", "20", "--max-neighbors", "3", merged)
	if err != nil {
		t.Fatalf("%v\n%s", err, got)
	}
	if !strings.Contains(got, "pruned:") {
		t.Errorf("pruning not reported:\n%s", got)
	}
	if !bytes.Equal(readFile(t, pruned), builtIndex(t, union, graphidx.WithMinSupport(20), graphidx.WithMaxNeighbors(3))) {
		t.Fatal("pruned merge differs from the pruned build of A∪B")
	}
}

func TestMergeRefuses(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	data := mergeCorpus(3, 50)
	idx := filepath.Join(dir, "a.idx")
	if err := os.WriteFile(idx, builtIndex(t, data), 0o644); err != nil {
		t.Fatal(err)
	}
	good := countsDir(t, data, 2)
	damaged := countsDir(t, data, 2)
	shard := filepath.Join(damaged, counts.CountShardName(1, 2))
	b := readFile(t, shard)
	b[len(b)-1] ^= 1
	if err := os.WriteFile(shard, b, 0o644); err != nil {
		t.Fatal(err)
	}
	// A copy of a set is the same set: refused by identity, not by path.
	copied := filepath.Join(t.TempDir(), "copy")
	if err := os.CopyFS(copied, os.DirFS(good)); err != nil {
		t.Fatal(err)
	}
	notEmpty := t.TempDir()
	if err := os.WriteFile(filepath.Join(notEmpty, "x"), nil, 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"merge", "--out", filepath.Join(dir, "o.idx"), good, idx}, "does not record whether it was pruned"},
		{[]string{"merge", "--out", filepath.Join(dir, "o.idx"), damaged}, "checksum mismatch"},
		{[]string{"merge", "--counts-out", notEmpty, good}, "not empty"},
		{[]string{"merge", good}, "give --out"},
		{[]string{"merge", "--out", filepath.Join(dir, "o.idx"), good, good}, "same count set"},
		{[]string{"merge", "--out", filepath.Join(dir, "o.idx"), good, good + "/"}, "same count set"},
		{[]string{"merge", "--out", filepath.Join(dir, "o.idx"), good, copied}, "same count set"},
		{[]string{"merge", "--counts-out", filepath.Join(dir, "c"), good, copied}, "same count set"},
		{[]string{"merge", "--out", filepath.Join(dir, "o.idx"), "--max-neighbors", "-1", good}, "--max-neighbors must not be negative"},
		// An output that cannot be written is refused before the merge.
		{[]string{"merge", "--out", dir, good}, "--out: graphidx: output " + dir + " is a directory"},
		{[]string{"merge", "--out", filepath.Join(dir, "none", "o.idx"), good}, "--out: graphidx: output directory"},
		{[]string{"build", "--from-counts", good, "--out", dir}, "--out: graphidx: output " + dir + " is a directory"},
	} {
		_, err := runCLI(t, tc.args...)
		var ee *ExitError
		if !errors.As(err, &ee) || ee.Code != 2 || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%v: got %v, want exit 2 with %q", tc.args, err, tc.want)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "o.idx")); !os.IsNotExist(err) {
		t.Errorf("a refused merge left an index: %v", err)
	}
}
