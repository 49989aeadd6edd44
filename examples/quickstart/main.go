// Command quickstart opens a locality index, builds a router, decides one
// query and prints the decision. Build an index first, for example with
// `hopwise demo`, then:
//
//	go run ./examples/quickstart --index hopwise-demo/index.hwx \
//	    --from bed-11/moisture-probe --value reads-wet --to bed-10/leaf-wilt
package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

func main() {
	index := flag.String("index", "hopwise-demo/index.hwx", "locality index file")
	from := flag.String("from", "bed-11/moisture-probe", "observed entity")
	value := flag.String("value", "reads-wet", "its observed value")
	to := flag.String("to", "bed-10/leaf-wilt", "target entity")
	flag.Parse()
	q := router.Query{From: *from, Value: *value, To: *to}
	d, err := Decide(context.Background(), *index, q)
	if err != nil {
		fmt.Fprintln(os.Stderr, "quickstart:", err)
		os.Exit(1)
	}
	Print(os.Stdout, q, d)
}

// Decide opens the index at path, builds a router and decides q.
func Decide(ctx context.Context, path string, q router.Query) (router.Decision, error) {
	idx, err := graphidx.Open(path)
	if err != nil {
		return router.Decision{}, err
	}
	r, err := router.New(idx) // the router owns idx and closes it
	if err != nil {
		idx.Close()
		return router.Decision{}, err
	}
	defer r.Close()
	ctx, cancel := context.WithTimeout(ctx, 100*time.Millisecond) // a search deadline
	defer cancel()
	return r.Decide(ctx, q)
}

// Print writes the decision: the mode, the bridges, the estimate, and the
// direct error it was compared with.
func Print(w io.Writer, q router.Query, d router.Decision) {
	fmt.Fprintf(w, "%s=%s → %s: answer %s", q.From, q.Value, q.To, d.Mode)
	if d.Mode == router.ModeChain {
		fmt.Fprintf(w, " via %s", strings.Join(d.Bridges, " → "))
	}
	fmt.Fprintf(w, " (%s)\n", d.Reason.Code)
	for i, v := range d.Values {
		fmt.Fprintf(w, "  P(%s) = %.3f\n", v, d.Estimate[i])
	}
	fmt.Fprintf(w, "  direct error %.4f (support %d), gain %.4f\n", d.Direct.Err, d.Direct.Support, d.Gain)
}
