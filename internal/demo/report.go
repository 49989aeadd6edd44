package demo

import (
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"

	"github.com/hopwise/hopwise/internal/eval"
)

// num formats an MSE: five decimals, or scientific below 1e-3.
func num(x float64) string {
	if math.IsNaN(x) {
		return "-"
	}
	if x != 0 && math.Abs(x) < 1e-3 {
		return fmt.Sprintf("%.1e", x)
	}
	return fmt.Sprintf("%.5f", x)
}

// WriteTable prints the accuracy table, the share routed to chains and the
// explained decisions.
func (r *Report) WriteTable(out io.Writer) error {
	var b strings.Builder
	e := r.Eval
	fmt.Fprintf(&b, "Mean squared error vs the exact answer (greenhouse seed %d, %d contexts, %d entities):\n\n", r.Seed, e.Contexts, e.Entities)
	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "query set\tpairs\tqueries\tdirect\tchained\trouted\tideal*\trouted to chain\tmean support\t")
	for _, row := range []struct {
		name  string
		pairs int
		s     eval.Scores
		t     Traced
	}{{r.HeldOut.Set, e.HeldOutPairs, e.HeldOut, r.HeldOut}, {r.Supported.Set, e.SupportedPairs, e.Supported, r.Supported}} {
		fmt.Fprintf(tw, "%s\t%d\t%d\t%s\t%s\t%s\t%s\t%.1f%%\t%.0f\t\n", row.name, row.pairs, row.s.N,
			num(row.s.Direct), num(row.s.Chain), num(row.s.Routed), num(row.s.Ideal), 100*row.s.ChainShare, row.t.MeanSupport)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	b.WriteString("\n* ideal: chained through the true separator path of the network, a yardstick the router cannot see.\n")
	total := e.HeldOut.N + e.Supported.N
	chained := e.HeldOut.ChainShare*float64(e.HeldOut.N) + e.Supported.ChainShare*float64(e.Supported.N)
	if total > 0 {
		fmt.Fprintf(&b, "Routed to a chain: %.0f of %d queries (%.1f%%).", chained, total, 100*chained/float64(total))
	}
	if e.HeldOut.Routed > 0 {
		fmt.Fprintf(&b, " On far-apart pairs routing cuts the direct error %.1f×.", e.HeldOut.Direct/e.HeldOut.Routed)
	}
	if s := e.HeldOut.Skipped + e.Supported.Skipped; s > 0 {
		fmt.Fprintf(&b, " (%d queries without an exact answer or unseen value skipped.)", s)
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
	r.writeTexts(&b)
	_, err := io.WriteString(out, b.String())
	return err
}

// WriteFiles prints the files written and the commands to run next.
func (r *Report) WriteFiles(out io.Writer) error {
	var b strings.Builder
	fmt.Fprintf(&b, "Wrote:\n  corpus (JSONL contexts)   %s\n  locality index            %s\n  queries and exact truth   %s, %s\n  decision traces (OTLP)    %s\n  error by route (PNG)      %s\n  lexicon and questions     %s, %s\n",
		r.Files.Corpus, r.Files.Index, r.Files.Queries, r.Files.Truth, r.Files.Trace, r.Files.Plot, r.Files.Lexicon, r.Files.Questions)
	fmt.Fprintf(&b, "Timings: corpus+index %.1fs, measure %.1fs, traced routing %.1fs, total %.1fs\n",
		r.Timings.Prepare.Seconds(), r.Timings.Measure.Seconds(), r.Timings.Route.Seconds(), r.Timings.Total.Seconds())
	from, value, to := "zone-1/vent-a", "open", "bed-18/yield"
	if len(r.Explained) > 0 {
		from, value, to = r.Explained[0].From, r.Explained[0].Value, r.Explained[0].To
	}
	fmt.Fprintf(&b, "\nNext:\n  hopwise inspect --index %s --entity %s\n  hopwise route --index %s --from %s --value %s --to %s\n  hopwise route --index %s --queries %s\n",
		r.Files.Index, to, r.Files.Index, from, value, to, r.Files.Index, r.Files.Queries)
	if len(r.Texts) > 0 {
		fmt.Fprintf(&b, "  hopwise route --index %s --lexicon %s --text %s\n  hopwise route --index %s --lexicon %s --queries %s\n",
			r.Files.Index, r.Files.Lexicon, shellQuote(r.Texts[0].Question), r.Files.Index, r.Files.Lexicon, r.Files.Questions)
	}
	b.WriteString("  hopwise eval\n")
	_, err := io.WriteString(out, b.String())
	return err
}

// shellQuote quotes s for a POSIX shell: single quotes, with each embedded
// single quote written as '\”.
func shellQuote(s string) string {
	return "'" + strings.ReplaceAll(s, "'", `'\''`) + "'"
}
