package main_test

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"os"
	"regexp"
	"testing"

	"github.com/hopwise/hopwise/examples/internal/ghtest"
	quickstart "github.com/hopwise/hopwise/examples/quickstart"
	"github.com/hopwise/hopwise/router"
)

var (
	// Greenhouse (seed 1) queries: a held-out pair, never observed together,
	// and a parent–child pair.
	far  = router.Query{From: "bed-11/moisture-probe", Value: "reads-wet", To: "bed-10/leaf-wilt"}
	near = router.Query{From: "zone-3/air-temp", Value: "hot", To: "zone-3/vent-a"}
)

// Example decides a far-apart and a well-supported query on a tiny index
// (5 000 greenhouse contexts) and compares the far-apart answer with the
// world's exact one. It prints facts that hold whatever the fine tuning of
// the error model; quickstart.Print shows the full decision.
func Example() {
	dir, err := os.MkdirTemp("", "quickstart-")
	if err != nil {
		panic(err)
	}
	defer os.RemoveAll(dir)
	path, err := ghtest.Build(dir, "index.hwx", 1, 5000, 1)
	if err != nil {
		panic(err)
	}
	ctx := context.Background()
	for _, q := range []router.Query{far, near} {
		d, err := quickstart.Decide(ctx, path, q)
		if err != nil {
			panic(err)
		}
		fmt.Printf("%s → %s: %s (support %d)\n", q.From, q.To, d.Mode, d.Direct.Support)
	}

	d, err := quickstart.Decide(ctx, path, far)
	if err != nil {
		panic(err)
	}
	w, err := ghtest.World(1)
	if err != nil {
		panic(err)
	}
	s, _ := w.Index(far.From)
	t, _ := w.Index(far.To)
	exact, err := w.TrueConditional(s, 1, t) // value 1 = reads-wet
	if err != nil {
		panic(err)
	}
	fmt.Printf("exact P(firm) = %.3f; chained answer closer than direct: %v\n",
		exact[0], math.Abs(d.Estimate[0]-exact[0]) < math.Abs(d.Direct.Estimate[0]-exact[0]))
	// Output:
	// bed-11/moisture-probe → bed-10/leaf-wilt: chain (support 0)
	// zone-3/air-temp → zone-3/vent-a: direct (support 515)
	// exact P(firm) = 0.702; chained answer closer than direct: true
}

// TestPrint checks the layout of the program's output.
func TestPrint(t *testing.T) {
	t.Parallel()
	path, err := ghtest.Build(t.TempDir(), "index.hwx", 1, 5000, 1)
	if err != nil {
		t.Fatal(err)
	}
	d, err := quickstart.Decide(context.Background(), path, far)
	if err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	quickstart.Print(&b, far, d)
	re := regexp.MustCompile(`^bed-11/moisture-probe=reads-wet → bed-10/leaf-wilt: answer chain via \S+( → \S+)* \(gain-above-threshold\)
  P\(firm\) = 0\.\d{3}
  P\(wilted\) = 0\.\d{3}
  direct error 0\.\d{4} \(support 0\), gain 0\.\d{4}
$`)
	if !re.Match(b.Bytes()) {
		t.Errorf("output:\n%s", b.String())
	}
	if _, err := quickstart.Decide(context.Background(), path+".missing", far); err == nil {
		t.Error("missing index opened")
	}
}
