package cli

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// A hand-checked greenhouse corpus with one bad line of each of two kinds.
const buildCorpus = `{"id":"c1","obs":{"vent3":"open","zone2.humidity":"high","pump1":"on"}}
{"id":"c2","obs":{"vent3":"closed","zone2.humidity":"high"}}
{"id":"c3","obs":{"zone2.humidity":"low","vent3":"open"}}
{"id":"c4","obs":{"pump1":"off","bed4":"present"}}
{"id":"c5","ents":["bed4"]}
{"id":"c6","obs":{"a":"1","a":"2"}}
not json
`

func TestBuildCommand(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	corpus := filepath.Join(dir, "gh.jsonl")
	if err := os.WriteFile(corpus, []byte(buildCorpus), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "gh.idx")
	got, err := runCLI(t, "build", "--corpus", corpus, "--out", out, "--quiet", "--mem-budget", "8MiB")
	if err != nil {
		t.Fatalf("%v\n%s", err, got)
	}
	for _, want := range []string{"contexts      5 (10 observations)", "entities      4", "pairs         4 kept of 4",
		"records       7 read, 5 ok, 2 skipped", "skipped bad-json           1", "skipped duplicate-entity   1", "gh.jsonl:6: obs.a: duplicate-entity"} {
		if !strings.Contains(got, want) {
			t.Errorf("summary lacks %q:\n%s", want, got)
		}
	}
	// The index holds the hand-checked counts: vent3/zone2.humidity has
	// closed&high=1, open&high=1, open&low=1 (contexts c1, c2, c3).
	x, err := graphidx.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	v, _ := x.Lookup("vent3")
	z, _ := x.Lookup("zone2.humidity")
	p, ok := x.Pair(v, z)
	if !ok || p.Count(0, 0) != 1 || p.Count(0, 1) != 0 || p.Count(1, 0) != 1 || p.Count(1, 1) != 1 || x.NumContexts() != 5 || x.NumPairs() != 4 {
		t.Errorf("pair %+v ok=%v contexts=%d pairs=%d", p, ok, x.NumContexts(), x.NumPairs())
	}

	// --strict stops at line 6 with exit status 2.
	_, err = runCLI(t, "build", "--corpus", corpus, "--out", filepath.Join(dir, "s.idx"), "--strict", "--quiet")
	var ee *ExitError
	if !errors.As(err, &ee) || ee.Code != 2 || !strings.Contains(err.Error(), "gh.jsonl:6: obs.a: duplicate-entity") {
		t.Errorf("strict: %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "s.idx")); !os.IsNotExist(err) {
		t.Errorf("strict failure left an index: %v", err)
	}
	// --counts-out then --from-counts gives the same index bytes.
	counts := filepath.Join(dir, "counts")
	direct := filepath.Join(dir, "direct.idx")
	if got, err := runCLI(t, "build", "--corpus", corpus, "--out", direct, "--quiet", "--counts-out", counts, "--shards", "3"); err != nil {
		t.Fatalf("%v\n%s", err, got)
	}
	viaCounts := filepath.Join(dir, "counts.idx")
	if got, err := runCLI(t, "build", "--from-counts", counts, "--out", viaCounts); err != nil {
		t.Fatalf("%v\n%s", err, got)
	}
	a, _ := os.ReadFile(direct)
	b, _ := os.ReadFile(viaCounts)
	if len(a) == 0 || !bytes.Equal(a, b) {
		t.Errorf("index from counts differs: %d vs %d bytes", len(a), len(b))
	}
	if _, err := runCLI(t, "build", "--out", viaCounts); err == nil {
		t.Error("build without --corpus or --from-counts succeeded")
	}

	// Pruning flags reach the builder.
	got, err = runCLI(t, "build", "--corpus", corpus, "--out", out, "--quiet", "--min-support", "2")
	if err != nil || !strings.Contains(got, "pairs         1 kept of 4; 3 below min support 2") {
		t.Errorf("min support: %v\n%s", err, got)
	}
}

func TestParseByteSize(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		in   string
		want int64
	}{{"512MiB", 512 << 20}, {"2GiB", 2 << 30}, {"500MB", 500e6}, {"65536", 65536}, {"1.5k", 1536}, {" 64 mib ", 64 << 20}} {
		if got, err := parseByteSize(c.in); err != nil || got != c.want {
			t.Errorf("%q: %d %v", c.in, got, err)
		}
	}
	for _, bad := range []string{"", "MiB", "12 parsecs", "-1", "0"} {
		if _, err := parseByteSize(bad); err == nil {
			t.Errorf("%q accepted", bad)
		}
	}
}
