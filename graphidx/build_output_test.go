package graphidx

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestBuildChecksOutputFirst: an --out Build cannot write (a directory, a
// path in a missing directory, a directory that is a file) is an error
// naming it before the corpus is read. Both used to fail only at the final
// rename or temp-file creation, after the whole build (hours on a large
// corpus), and --out / wrote its temporary file into the root directory.
func TestBuildChecksOutputFirst(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	file := filepath.Join(dir, "plain")
	if err := os.WriteFile(file, []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	const corpus = `{"id":"a","obs":{"vent":"open","pump":"on"}}` + "\n"
	for _, tc := range []struct{ out, want string }{
		{dir, "is a directory"},
		{filepath.Join(dir, "missing", "x.hwx"), "missing: no such file or directory"},
		{filepath.Join(file, "x.hwx"), "plain: not a directory"},
	} {
		r := &countingReader{ContextReader: jsonlReader(strings.NewReader(corpus), "c.jsonl")}
		_, err := Build(context.Background(), r, tc.out)
		if err == nil || !strings.Contains(err.Error(), tc.want) || r.n != 0 {
			t.Errorf("Build to %s: %v after reading %d contexts; want %q before reading", tc.out, err, r.n, tc.want)
		}
	}
	out := filepath.Join(dir, "ok.hwx")
	if _, err := Build(context.Background(), jsonlReader(strings.NewReader(corpus), "c.jsonl"), out); err != nil {
		t.Fatal(err)
	}
	ents, _ := os.ReadDir(dir)
	for _, e := range ents {
		if strings.HasPrefix(e.Name(), TempPrefix(out)) {
			t.Errorf("probe or temporary file left: %s", e.Name())
		}
	}
}
