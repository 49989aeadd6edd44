package cli

import (
	"errors"
	"fmt"
	"io"
	"os"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/counts"
	"github.com/spf13/cobra"
)

func init() { register(newMergeCmd) }

// mergeOpts are the flags of `hopwise merge`.
type mergeOpts struct {
	out, countsOut string
	shards         int
	minSupport     uint64
	maxNeighbors   int
}

// errIndexInput explains why merge takes count shards and not index files.
var errIndexInput = errors.New("index files cannot be merged: an index (format v2) does not record whether it " +
	"was pruned (--min-support, --max-neighbors), and summing pruned counts would silently differ from a " +
	"rebuild; merge the count-shard directories the indexes were compiled from (written by hopwise-beam, " +
	"hopwise build --counts-out or hopwise merge --counts-out)")

func newMergeCmd() *cobra.Command {
	var o mergeOpts
	cmd := &cobra.Command{
		Use:   "merge --out NEW.idx [--counts-out DIR] COUNTS_DIR...",
		Short: "Merge count-shard directories into one locality index (incremental updates)",
		Long: `merge sums the count shards of one or more directories and compiles them
into a locality index. Counts are sums, so merging the counts of corpus A with
those of corpus B gives byte for byte the index that "hopwise build" writes
for A and B together: an incremental update counts only the new contexts and
merges them into the old counts.

Inputs are directories of count shards (counts-IIIII-of-NNNNN.hwc, see
graphidx/COUNTS.md) written by the Beam job (hopwise-beam), by
"hopwise build --counts-out" or by an earlier "merge --counts-out". Each set
must be complete; the shard counts of different sets need not agree. One set
given twice (by any path, or a copy of it) is refused: it would be counted
twice.

Pruning happens only here, at compile time (--min-support, --max-neighbors),
never in the counts, so merged counts are always exact. Index files are
refused as inputs: the index format does not record whether an index was
pruned, and a pruned index no longer holds the counts a merge needs.

--counts-out also writes the merged, unpruned counts as --shards shards to a
new or empty directory, ready for the next incremental merge.
Exit status: 0 on success, 2 for bad inputs (damaged or inconsistent shards,
an index file given as input), 1 for other errors.`,
		Example: `  hopwise merge --out greenhouse.idx counts-2026-11/ counts-2026-12/
  hopwise merge --out all.idx --counts-out counts-all/ counts-old/ counts-new/
  hopwise merge --out pruned.idx --min-support 3 --max-neighbors 100 counts-all/`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runMerge(cmd, o, args)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.out, "out", "", "index file to write")
	f.StringVar(&o.countsOut, "counts-out", "", "also write the merged counts to this new or empty directory")
	f.IntVar(&o.shards, "shards", 16, "number of shards for --counts-out")
	f.Uint64Var(&o.minSupport, "min-support", 1, "drop pairs observed together in fewer than N contexts (index only)")
	f.IntVar(&o.maxNeighbors, "max-neighbors", 0, "keep each entity's N best neighbours by support (0: no limit; index only)")
	return cmd
}

func runMerge(cmd *cobra.Command, o mergeOpts, inputs []string) error {
	if o.out == "" && o.countsOut == "" {
		return &ExitError{Code: 2, Err: errors.New("merge: give --out, --counts-out or both")}
	}
	if o.maxNeighbors < 0 {
		return &ExitError{Code: 2, Err: fmt.Errorf("--max-neighbors must not be negative, got %d (0 means no limit)", o.maxNeighbors)}
	}
	if o.countsOut != "" {
		if o.shards < 1 || o.shards > counts.MaxCountShards {
			return &ExitError{Code: 2, Err: fmt.Errorf("--shards must be in 1..%d, got %d", counts.MaxCountShards, o.shards)}
		}
		if err := checkEmptyDir(o.countsOut); err != nil {
			return &ExitError{Code: 2, Err: err}
		}
	}
	if o.out != "" {
		if err := graphidx.CheckOutput(o.out); err != nil {
			return &ExitError{Code: 2, Err: fmt.Errorf("--out: %w", err)}
		}
	}
	for _, in := range inputs {
		if err := checkCountsInput(in); err != nil {
			return err
		}
	}
	if err := counts.CheckDistinctCountSets(inputs); err != nil {
		return classifyCountsErr(err)
	}
	start := time.Now()
	w := cmd.OutOrStdout()
	if o.countsOut == "" {
		// Index only: stream the shards (counts.MergeCounts), no Partial.
		src, sum, err := counts.MergeCounts(cmd.Context(), inputs,
			graphidx.WithMinSupport(o.minSupport), graphidx.WithMaxNeighbors(o.maxNeighbors))
		if err != nil {
			return classifyCountsErr(err)
		}
		fmt.Fprintf(w, "read %d count set(s), %d bytes of shards, %d contexts\n", len(inputs), sum.SpillBytes, sum.Contexts)
		if err := writeCompiled(w, o.out, src, sum.Pairs); err != nil {
			return err
		}
		fmt.Fprintf(w, "elapsed %s\n", time.Since(start).Round(time.Millisecond))
		return nil
	}
	p := counts.NewPartial()
	var shardBytes int64
	for _, in := range inputs {
		info, err := counts.ReadCounts(cmd.Context(), in, p)
		if err != nil {
			return classifyCountsErr(err)
		}
		shardBytes += info.Bytes
	}
	if err := p.Check(); err != nil {
		return classifyCountsErr(err)
	}
	fmt.Fprintf(w, "read %d count set(s), %d bytes of shards, %d contexts\n", len(inputs), shardBytes, p.Contexts())
	n, err := counts.WriteCounts(o.countsOut, p, o.shards)
	if err != nil {
		return classifyCountsErr(err)
	}
	fmt.Fprintf(w, "wrote %s: %d shards, %d bytes\n", o.countsOut, o.shards, n)
	if o.out != "" {
		src, st, err := p.Compile(graphidx.WithMinSupport(o.minSupport), graphidx.WithMaxNeighbors(o.maxNeighbors))
		if err != nil {
			return classifyCountsErr(err)
		}
		if err := writeCompiled(w, o.out, src, st); err != nil {
			return err
		}
	}
	fmt.Fprintf(w, "elapsed %s\n", time.Since(start).Round(time.Millisecond))
	return nil
}

// writeCompiled writes src as an index and prints what was written,
// including what pruning removed.
func writeCompiled(w io.Writer, out string, src graphidx.Source, st graphidx.PruneStats, wopts ...graphidx.WriteOption) (err error) {
	if c, ok := src.(io.Closer); ok { // the shards stay mapped until written
		defer func() {
			if cerr := c.Close(); err == nil {
				err = cerr
			}
		}()
	}
	if err := graphidx.WriteFile(out, src, wopts...); err != nil {
		return err
	}
	var size int64
	if fi, err := os.Stat(out); err == nil {
		size = fi.Size()
	}
	fmt.Fprintf(w, "wrote %s: %d bytes, %d contexts, %d entities, %d pairs kept of %d\n",
		out, size, src.Contexts(), len(src.Entities()), st.After, st.Before)
	if st.ByMinSupport > 0 || st.ByMaxNeighbors > 0 {
		fmt.Fprintf(w, "pruned: %d pairs below min support %d, %d outside every top %d\n",
			st.ByMinSupport, st.MinSupport, st.ByMaxNeighbors, st.MaxNeighbors)
	}
	return nil
}

// checkCountsInput refuses inputs that are not directories, with a specific
// message for index files.
func checkCountsInput(path string) error {
	fi, err := os.Stat(path)
	if err != nil {
		return err
	}
	if fi.IsDir() {
		return nil
	}
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	var magic [8]byte
	if _, err := io.ReadFull(f, magic[:]); err == nil && string(magic[:]) == graphidx.Magic {
		return &ExitError{Code: 2, Err: fmt.Errorf("%s: %w", path, errIndexInput)}
	}
	return &ExitError{Code: 2, Err: fmt.Errorf("%s is not a directory of count shards", path)}
}

func checkEmptyDir(dir string) error {
	des, err := os.ReadDir(dir)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	if len(des) > 0 {
		return fmt.Errorf("%s is not empty: write counts to a new or empty directory", dir)
	}
	return nil
}

// classifyCountsErr maps bad count shards to exit status 2.
func classifyCountsErr(err error) error {
	if errors.Is(err, counts.ErrBadCounts) || errors.Is(err, graphidx.ErrTooManyValues) || errors.Is(err, graphidx.ErrCountOverflow) {
		return &ExitError{Code: 2, Err: err}
	}
	return err
}
