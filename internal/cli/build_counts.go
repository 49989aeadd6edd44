package cli

import (
	"context"
	"errors"
	"fmt"
	"io"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/counts"
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
func runBuildFromCounts(cmd *cobra.Command, dir, out string, minSupport uint64, maxNeighbors int, wopts ...graphidx.WriteOption) error {
	if err := graphidx.CheckOutput(out); err != nil {
		return &ExitError{Code: 2, Err: fmt.Errorf("--out: %w", err)}
	}
	src, sum, err := counts.CompileCounts(cmd.Context(), dir,
		graphidx.WithMinSupport(minSupport), graphidx.WithMaxNeighbors(maxNeighbors))
	if err != nil {
		return classifyCountsErr(err)
	}
	w := cmd.OutOrStdout()
	fmt.Fprintf(w, "read %s: %d bytes of count shards\n", dir, sum.SpillBytes)
	if err := writeCompiled(w, out, src, sum.Pairs, wopts...); err != nil {
		return err
	}
	fmt.Fprintf(w, "elapsed %s\n", sum.Elapsed.Round(1e6))
	return nil
}

// partialCellBytes is the heap a counts.Partial spends on one distinct
// count cell: a map entry keyed by four strings plus the strings it keeps
// alive (measured: 3.7 GB peak RSS for the 8.69M-pair benchmark corpus).
const partialCellBytes = 160

// countsPasses returns how many passes over the corpus --counts-out needs so
// that one pass's Partial (the cells of its group of shards) stays within
// half the memory budget, the rest being headroom for the collector. The
// cells are counted in the index just written, scaled up by the pairs that
// pruning removed. At most shards passes. O(cells of the index).
func countsPasses(indexPath string, pairsBefore, pairsAfter uint64, budget int64, shards int) (int, uint64, error) {
	ix, err := graphidx.Open(indexPath, graphidx.WithLazyVerify())
	if err != nil {
		return 0, 0, err
	}
	defer ix.Close()
	var cells uint64
	for a := range graphidx.EntityID(ix.NumEntities()) {
		ka := ix.NumValues(a)
		for _, b := range ix.Neighbors(a) {
			if b <= a {
				continue
			}
			ps, ok := ix.Pair(a, b)
			if !ok {
				continue
			}
			kb := ix.NumValues(b)
			for u := range ka {
				for v := range kb {
					if ps.Count(u, v) > 0 {
						cells++
					}
				}
			}
		}
	}
	if pairsAfter > 0 && pairsBefore > pairsAfter {
		cells = uint64(float64(cells) * float64(pairsBefore) / float64(pairsAfter))
	}
	per := budget / 2
	if per < 1 {
		per = 1
	}
	passes := int((cells*partialCellBytes + uint64(per) - 1) / uint64(per))
	return min(max(passes, 1), shards), cells, nil
}

// writeCorpusCounts counts the contexts of the corpus opened by open into
// graphidx.Partials and writes them as shards to dir, which must be new or
// empty: in passes passes over the corpus, each counting the pair cells of
// one group of shards (shard mod passes), so a pass holds about 1/passes of
// the cells (counts.Partial.AddShards, WriteCountShards; the files are the
// same as from one pass). progress, when not nil, is told each pass.
func writeCorpusCounts(ctx context.Context, open func() (graphidx.ContextReader, io.Closer, error), dir string, shards, passes int, progress func(pass int)) (int64, error) {
	if shards < 1 || shards > counts.MaxCountShards {
		return 0, &ExitError{Code: 2, Err: fmt.Errorf("--shards must be in 1..%d, got %d", counts.MaxCountShards, shards)}
	}
	if err := checkEmptyDir(dir); err != nil {
		return 0, &ExitError{Code: 2, Err: err}
	}
	passes = min(max(passes, 1), shards)
	var total int64
	for g := range passes {
		if progress != nil {
			progress(g)
		}
		var mine []int
		for s := range shards {
			if s%passes == g {
				mine = append(mine, s)
			}
		}
		keep := func(s int) bool { return s%passes == g }
		if passes == 1 {
			keep = nil
		}
		n, err := countPass(ctx, open, dir, shards, mine, keep)
		total += n
		if err != nil {
			return total, err
		}
	}
	return total, nil
}

// countPass reads the corpus once, counting the cells keep selects, and
// writes the shards mine.
func countPass(ctx context.Context, open func() (graphidx.ContextReader, io.Closer, error), dir string, shards int, mine []int, keep func(int) bool) (int64, error) {
	r, closer, err := open()
	if err != nil {
		return 0, classifyBuildErr(err)
	}
	defer closer.Close()
	p := counts.NewPartial()
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
		if err := p.AddShards(c, shards, keep); err != nil {
			return 0, classifyBuildErr(err)
		}
	}
	return counts.WriteCountShards(dir, p, shards, mine)
}
