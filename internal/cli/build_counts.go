package cli

import (
	"context"
	"errors"
	"fmt"
	"io"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/spf13/cobra"
)

// Count-shard support of `hopwise build`: --from-counts DIR compiles an index
// from count shards (written by the Beam job or by --counts-out) instead of
// reading a corpus, and --counts-out DIR also writes the corpus's counts as
// shards for later incremental merges (`hopwise merge`).

// buildCountsOpts are the count-shard flags of `hopwise build`.
type buildCountsOpts struct {
	fromCounts string
	countsOut  string
	shards     int
}

// addBuildCountsFlags adds --from-counts, --counts-out and --shards to the
// build command.
func addBuildCountsFlags(cmd *cobra.Command, o *buildCountsOpts) {
	f := cmd.Flags()
	f.StringVar(&o.fromCounts, "from-counts", "", "compile the index from this directory of count shards instead of --corpus")
	f.StringVar(&o.countsOut, "counts-out", "", "also write the corpus's counts as shards to this new or empty directory (for hopwise merge)")
	f.IntVar(&o.shards, "shards", 16, "number of shards for --counts-out")
}

// runBuildFromCounts compiles the count shards in dir with the pruning
// options and writes the index to out.
func runBuildFromCounts(cmd *cobra.Command, dir, out string, minSupport uint64, maxNeighbors int) error {
	src, sum, err := graphidx.CompileCounts(cmd.Context(), dir,
		graphidx.WithMinSupport(minSupport), graphidx.WithMaxNeighbors(maxNeighbors))
	if err != nil {
		return classifyCountsErr(err)
	}
	w := cmd.OutOrStdout()
	fmt.Fprintf(w, "read %s: %d bytes of count shards\n", dir, sum.SpillBytes)
	if err := writeCompiled(w, out, src, sum.Pairs); err != nil {
		return err
	}
	fmt.Fprintf(w, "elapsed %s\n", sum.Elapsed.Round(1e6))
	return nil
}

// writeCorpusCounts counts every context of r into a graphidx.Partial and
// writes it as shards to dir, which must be new or empty. Memory is about
// 100 bytes per distinct count cell (the Partial is not spilled).
func writeCorpusCounts(ctx context.Context, r graphidx.ContextReader, dir string, shards int) (int64, error) {
	if shards < 1 || shards > graphidx.MaxCountShards {
		return 0, &ExitError{Code: 2, Err: fmt.Errorf("--shards must be in 1..%d, got %d", graphidx.MaxCountShards, shards)}
	}
	if err := checkEmptyDir(dir); err != nil {
		return 0, &ExitError{Code: 2, Err: err}
	}
	p := graphidx.NewPartial()
	for n := 0; ; n++ {
		if n%4096 == 0 {
			if err := ctx.Err(); err != nil {
				return 0, err
			}
		}
		c, err := r.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return 0, classifyBuildErr(err)
		}
		if err := p.Add(c); err != nil {
			return 0, classifyBuildErr(err)
		}
	}
	return graphidx.WriteCounts(dir, p, shards)
}
