// Command quickstart opens a locality index, builds a router, decides one
// query and prints the decision. Build an index first, for example with
// `hopwise demo`, then:
//
//	go run ./examples/quickstart -index hopwise-demo/index.hwx \
//	    -from bed-11/moisture-probe -value reads-wet -to bed-10/leaf-wilt
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
	if err := Run(context.Background(), os.Stdout, *index, router.Query{From: *from, Value: *value, To: *to}); err != nil {
		fmt.Fprintln(os.Stderr, "quickstart:", err)
		os.Exit(1)
	}
}

// Run opens the index at path, decides q and prints the decision to w.
func Run(ctx context.Context, w io.Writer, path string, q router.Query) error {
	idx, err := graphidx.Open(path)
	if err != nil {
		return err
	}
	r, err := router.New(idx) // the router owns idx and closes it
	if err != nil {
		idx.Close()
		return err
	}
	defer r.Close()
	ctx, cancel := context.WithTimeout(ctx, 100*time.Millisecond) // a search deadline
	defer cancel()
	d, err := r.Decide(ctx, q)
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "%s=%s → %s: answer %s", q.From, q.Value, q.To, d.Mode)
	if d.Mode == router.ModeChain {
		fmt.Fprintf(w, " via %s", strings.Join(d.Bridges, " → "))
	}
	fmt.Fprintf(w, " (%s)\n", d.Reason.Code)
	for i, v := range d.Values {
		fmt.Fprintf(w, "  P(%s) = %.3f\n", v, d.Estimate[i])
	}
	fmt.Fprintf(w, "  direct error %.4f (support %d), gain %.4f\n", d.Direct.Err, d.Direct.Support, d.Gain)
	return nil
}
