package demo

import (
	"fmt"
	"io"
	"strings"
	"text/tabwriter"
)

// WriteTable prints the accuracy table, the share routed to chains and the
// explained decisions.
func (r *Report) WriteTable(out io.Writer) error {
	var b strings.Builder
	fmt.Fprintf(&b, "Mean squared error vs the exact answer (greenhouse seed %d, %d contexts):\n\n", r.Seed, r.Contexts)
	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "query set\tpairs\tqueries\tdirect\tchained\trouted\trouted to chain\tmean support\t")
	for _, row := range []Row{r.HeldOut, r.Supported} {
		fmt.Fprintf(tw, "%s\t%d\t%d\t%.5f\t%.5f\t%.5f\t%.1f%%\t%.0f\t\n", row.Set, row.Pairs, row.Queries,
			row.Direct, row.Chained, row.Routed, 100*row.ChainShare(), row.MeanSupport)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	total := r.HeldOut.Queries + r.Supported.Queries
	chained := r.HeldOut.RoutedChain + r.Supported.RoutedChain
	if total > 0 {
		fmt.Fprintf(&b, "\nRouted to a chain: %d of %d queries (%.1f%%).", chained, total, 100*float64(chained)/float64(total))
	}
	if r.HeldOut.Direct > 0 {
		fmt.Fprintf(&b, " On far-apart pairs routing cuts the error %.1f×.", r.HeldOut.Direct/max(r.HeldOut.Routed, 1e-12))
	}
	if s := r.HeldOut.Skipped + r.Supported.Skipped; s > 0 {
		fmt.Fprintf(&b, " (%d queries with impossible evidence skipped.)", s)
	}
	b.WriteString("\n")
	if len(r.Explained) > 0 {
		b.WriteString("\nExplained decisions:\n")
	}
	for i, e := range r.Explained {
		fmt.Fprintf(&b, "%d. %s=%s → %s  [%s]\n", i+1, e.From, e.Value, e.To, e.Set)
		switch {
		case e.Mode == "chain":
			fmt.Fprintf(&b, "   chain via %s\n", strings.Join(e.Bridges, " → "))
		case len(e.Bridges) > 0:
			fmt.Fprintf(&b, "   direct; best chain was via %s\n", strings.Join(e.Bridges, " → "))
		default:
			b.WriteString("   direct; no chain found\n")
		}
		fmt.Fprintf(&b, "   P(%s=%s): exact %.3f, direct %.3f (support %d)", e.To, e.TargetValue, e.Truth, e.Direct, e.Support)
		if len(e.Bridges) > 0 {
			fmt.Fprintf(&b, ", chained %.3f (weakest link %d)", e.Chained, e.ChainMinSupport)
		}
		fmt.Fprintf(&b, "\n   gain %.5f, reason %s\n", e.Gain, e.Reason)
	}
	_, err := io.WriteString(out, b.String())
	return err
}

// WriteFiles prints the files written and the commands to run next.
func (r *Report) WriteFiles(out io.Writer) error {
	var b strings.Builder
	fmt.Fprintf(&b, "Wrote:\n  corpus (JSONL contexts)   %s\n  locality index            %s\n  decision traces (OTLP)    %s\n  error by route (PNG)      %s\n",
		r.Files.Corpus, r.Files.Index, r.Files.Trace, r.Files.Plot)
	fmt.Fprintf(&b, "Timings: sample %.1fs, build %.1fs, route %.1fs, total %.1fs\n",
		r.Timings.Sample.Seconds(), r.Timings.Build.Seconds(), r.Timings.Route.Seconds(), r.Timings.Total.Seconds())
	from, value, to := "zone-1/vent-a", "open", "bed-18/yield"
	if len(r.Explained) > 0 {
		from, value, to = r.Explained[0].From, r.Explained[0].Value, r.Explained[0].To
	}
	fmt.Fprintf(&b, "\nNext:\n  hopwise inspect --index %s\n  hopwise inspect --index %s --entity %s\n  hopwise route --index %s --from %s --value %s --to %s\n  hopwise eval\n",
		r.Files.Index, r.Files.Index, to, r.Files.Index, from, value, to)
	_, err := io.WriteString(out, b.String())
	return err
}
