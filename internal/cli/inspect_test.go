package cli

import (
	"bytes"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// inspectSource is a hand-made greenhouse index: three entities over five
// contexts, counted by hand.
//
//	c1 pump.a=on  vent.east=open  bed.north=wet
//	c2 pump.a=on  vent.east=open
//	c3 pump.a=off vent.east=closed
//	c4 pump.a=on                  bed.north=dry
//	c5                            bed.north=wet
type inspectSource struct{}

func (inspectSource) Contexts() uint64 { return 5 }
func (inspectSource) Entities() []graphidx.EntityRecord {
	return []graphidx.EntityRecord{
		{Name: "bed.north", Values: []string{"dry", "wet"}, Marginal: []uint64{1, 2}},     // c4; c1 c5
		{Name: "pump.a", Values: []string{"off", "on"}, Marginal: []uint64{1, 3}},         // c3; c1 c2 c4
		{Name: "vent.east", Values: []string{"closed", "open"}, Marginal: []uint64{1, 2}}, // c3; c1 c2
	}
}
func (inspectSource) Pairs(fn func(graphidx.PairRecord) error) error {
	for _, p := range []graphidx.PairRecord{
		{A: 0, B: 1, Counts: []uint32{0, 1, 0, 1}}, // (dry,on) c4; (wet,on) c1
		{A: 0, B: 2, Counts: []uint32{0, 0, 0, 1}}, // (wet,open) c1
		{A: 1, B: 2, Counts: []uint32{1, 0, 0, 2}}, // (off,closed) c3; (on,open) c1 c2
	} {
		if err := fn(p); err != nil {
			return err
		}
	}
	return nil
}

func runCLI(t *testing.T, args ...string) (string, error) {
	t.Helper()
	root := NewRoot()
	var out bytes.Buffer
	root.SetOut(&out)
	root.SetErr(&out)
	root.SetArgs(args)
	err := root.Execute()
	return out.String(), err
}

func TestInspect(t *testing.T) {
	t.Parallel()
	path := filepath.Join(t.TempDir(), "gh.hwx")
	if err := graphidx.WriteFile(path, inspectSource{}); err != nil {
		t.Fatal(err)
	}
	out, err := runCLI(t, "inspect", "--index", path, "--json", "--verify", "--entity", "pump.a", "--top", "1")
	if err != nil {
		t.Fatal(err)
	}
	var rep inspectReport
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	st, _ := os.Stat(path)
	if rep.Entities != 3 || rep.Contexts != 5 || rep.Pairs != 3 || rep.FormatVersion != graphidx.FormatVersion || rep.Bytes != st.Size() || !rep.Verified {
		t.Fatalf("summary = %+v", rep)
	}
	e := rep.Entity
	if e == nil || e.Support != 4 || e.Degree != 2 || len(e.Values) != 2 || e.Values[1].Marginal != 3 {
		t.Fatalf("entity = %+v", e)
	}
	// Supports around pump.a: vent.east 3 (c1 c2 c3) > bed.north 2 (c1 c4).
	if len(e.Neighbors) != 1 || e.Neighbors[0].Name != "vent.east" || e.Neighbors[0].Support != 3 {
		t.Fatalf("neighbours = %+v", e.Neighbors)
	}
	// Rows are pump.a's values (off, on), columns vent.east's (closed, open).
	if tab := e.Neighbors[0].Table; tab[0][0] != 1 || tab[0][1] != 0 || tab[1][0] != 0 || tab[1][1] != 2 {
		t.Fatalf("table = %v", tab)
	}
	// bed.north is stored as (bed, pump): the table must come out transposed.
	out, err = runCLI(t, "inspect", "--index", path, "--json", "--entity", "pump.a")
	if err != nil {
		t.Fatal(err)
	}
	rep = inspectReport{}
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if nb := rep.Entity.Neighbors[1]; nb.Name != "bed.north" || nb.Table[1][0] != 1 || nb.Table[1][1] != 1 || nb.Table[0][1] != 0 {
		t.Fatalf("bed.north neighbour = %+v", nb)
	}

	// Human output.
	out, err = runCLI(t, "inspect", "--index", path, "--entity", "vent.east")
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"entities        3", "contexts        5", "pairs           3 (6 directed edges)",
		"pump.a     3        closed: off=1 on=0  open: off=0 on=2"} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q:\n%s", want, out)
		}
	}

	// Unknown entity: a clear error naming it.
	_, err = runCLI(t, "inspect", "--index", path, "--entity", "pump.z")
	if err == nil || !strings.Contains(err.Error(), `"pump.z"`) {
		t.Fatalf("unknown entity: %v", err)
	}

	// A damaged file: exit status 2 with a corruption error.
	b, _ := os.ReadFile(path)
	b[len(b)-1] ^= 1
	bad := filepath.Join(t.TempDir(), "bad.hwx")
	if err := os.WriteFile(bad, b, 0o644); err != nil {
		t.Fatal(err)
	}
	_, err = runCLI(t, "inspect", "--index", bad, "--verify")
	var ee *ExitError
	if !errors.As(err, &ee) || ee.Code != 2 || !graphidx.IsCorruption(err) {
		t.Fatalf("damaged index: %v", err)
	}
	if _, err := runCLI(t, "inspect"); err == nil {
		t.Fatal("missing --index accepted")
	}
}

// TestInspectBeyondRankPrefix asks for more neighbours than the index's
// ranked prefix holds, so inspect ranks the full adjacency list itself.
func TestInspectBeyondRankPrefix(t *testing.T) {
	t.Parallel()
	path := filepath.Join(t.TempDir(), "gh1.hwx")
	if err := graphidx.WriteFile(path, inspectSource{}, graphidx.WithRankPrefix(1)); err != nil {
		t.Fatal(err)
	}
	out, err := runCLI(t, "inspect", "--index", path, "--json", "--entity", "pump.a", "--top", "5")
	if err != nil {
		t.Fatal(err)
	}
	var rep inspectReport
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	// vent.east support 3 (c1 c2 c3), bed.north 2 (c1 c4).
	nb := rep.Entity.Neighbors
	if rep.RankPrefix != 1 || len(nb) != 2 || nb[0].Name != "vent.east" || nb[0].Support != 3 || nb[1].Name != "bed.north" || nb[1].Support != 2 {
		t.Fatalf("neighbours = %+v", nb)
	}
}

// hostileSource is an index written by another tool whose names and values
// carry terminal escapes and a newline (the corpus readers reject them, an
// index file need not).
type hostileSource struct{}

func (hostileSource) Contexts() uint64 { return 2 }
func (hostileSource) Entities() []graphidx.EntityRecord {
	return []graphidx.EntityRecord{
		{Name: "bed\x1b[2J", Values: []string{"dry\x07", "wet"}, Marginal: []uint64{1, 1}},
		{Name: "pump\nfake", Values: []string{"off", "on\u009b"}, Marginal: []uint64{1, 1}},
	}
}
func (hostileSource) Pairs(fn func(graphidx.PairRecord) error) error {
	return fn(graphidx.PairRecord{A: 0, B: 1, Counts: []uint32{1, 0, 0, 1}})
}

// TestInspectEscapesControl: the text output (an entity's statistics and
// --list) escapes control characters of names and values, as route does;
// --json keeps the names exact (JSON escapes them itself).
func TestInspectEscapesControl(t *testing.T) {
	t.Parallel()
	path := filepath.Join(t.TempDir(), "hostile.hwx")
	if err := graphidx.WriteFile(path, hostileSource{}); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		args []string
		want []string
	}{
		{[]string{"--entity", "bed\x1b[2J"}, []string{`entity bed\x1b[2J (id 0)`, `dry\x07`, `pump\x0afake`, `on\u009b=1`}},
		{[]string{"--entity", "pump\nfake"}, []string{`entity pump\x0afake (id 1)`, `on\u009b`, `bed\x1b[2J`, `off: dry\x07=1`}},
		{[]string{"--list"}, []string{"bed\\x1b[2J\npump\\x0afake\n"}},
	} {
		out, err := runCLI(t, append([]string{"inspect", "--index", path}, tc.args...)...)
		if err != nil {
			t.Fatalf("%q: %v", tc.args, err)
		}
		for _, w := range tc.want {
			if !strings.Contains(out, w) {
				t.Errorf("%q: output lacks %q:\n%s", tc.args, w, out)
			}
		}
		if strings.ContainsAny(out, "\x1b\x07\u009b") || strings.Count(out, "pump") != strings.Count(out, "pump\\x0afake") {
			t.Errorf("%q: raw control characters in the output:\n%q", tc.args, out)
		}
	}
	out, err := runCLI(t, "inspect", "--index", path, "--json", "--entity", "pump\nfake")
	if err != nil {
		t.Fatal(err)
	}
	var rep inspectReport
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if rep.Entity.Name != "pump\nfake" || rep.Entity.Values[1].Label != "on\u009b" || rep.Entity.Neighbors[0].Name != "bed\x1b[2J" {
		t.Fatalf("--json changed the names: %+v", rep.Entity)
	}
}
