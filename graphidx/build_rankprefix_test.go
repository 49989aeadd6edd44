package graphidx

import (
	"context"
	"fmt"
	"path/filepath"
	"strings"
	"testing"
)

// TestBuildRankPrefixOption: WithRankPrefix given to Build sets the stored
// prefix (a star whose centre has 6 neighbours keeps 3 of them, ranked by
// support then id), the default keeps them all, and a bad value fails
// before the corpus is read.
func TestBuildRankPrefixOption(t *testing.T) {
	t.Parallel()
	// Centre c with leaves l1..l6; leaf li is seen with c in i contexts.
	var b strings.Builder
	n := 0
	for i := 1; i <= 6; i++ {
		for j := 0; j < i; j++ {
			n++
			fmt.Fprintf(&b, `{"id":"x%d","obs":{"c":"on","l%d":"up"}}`+"\n", n, i)
		}
	}
	corpus := b.String()
	for _, tc := range []struct {
		name string
		opts []BuildOption
		want []string
	}{
		{"default", nil, []string{"l6", "l5", "l4", "l3", "l2", "l1"}},
		{"prefix 3", []BuildOption{WithRankPrefix(3)}, []string{"l6", "l5", "l4"}},
		{"through WithWriteOptions", []BuildOption{WithWriteOptions(WithRankPrefix(2))}, []string{"l6", "l5"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "x.hwx")
			if _, err := Build(context.Background(), jsonlReader(strings.NewReader(corpus), "c.jsonl"), out, tc.opts...); err != nil {
				t.Fatal(err)
			}
			x, err := Open(out)
			if err != nil {
				t.Fatal(err)
			}
			defer x.Close()
			c, _ := x.Lookup("c")
			var got []string
			for _, id := range x.RankedNeighbors(c) {
				got = append(got, x.Name(id))
			}
			if strings.Join(got, ",") != strings.Join(tc.want, ",") {
				t.Errorf("ranked neighbours of c = %v, want %v", got, tc.want)
			}
			if len(x.Neighbors(c)) != 6 {
				t.Errorf("c has %d neighbours, want 6", len(x.Neighbors(c)))
			}
		})
	}
	for _, bad := range []int{0, -1, MaxRankPrefix + 1} {
		r := &countingReader{ContextReader: jsonlReader(strings.NewReader(corpus), "c.jsonl")}
		_, err := Build(context.Background(), r, filepath.Join(t.TempDir(), "x.hwx"), WithRankPrefix(bad))
		if err == nil || !strings.Contains(err.Error(), "rank prefix") {
			t.Errorf("WithRankPrefix(%d): err = %v, want a rank prefix error", bad, err)
		}
		if r.n != 0 {
			t.Errorf("WithRankPrefix(%d): %d contexts read before the error, want 0", bad, r.n)
		}
	}
}

// countingReader counts the contexts read through it.
type countingReader struct {
	ContextReader
	n int
}

func (r *countingReader) Next() (Context, error) {
	c, err := r.ContextReader.Next()
	if err == nil {
		r.n++
	}
	return c, err
}
