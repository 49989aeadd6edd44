// Command hopwise-beam counts a JSONL corpus into count shards on Apache
// Beam. Compile the shards with `hopwise build --from-counts DIR --out F`.
//
// Local run on prism (Beam's embedded runner):
//
//	go run ./cmd/hopwise-beam --runner=prism --input='corpus/*.jsonl' --output=counts/
//
// See ../../README.md for Flink, Spark and Dataflow.
package main

import (
	"context"
	"flag"
	"fmt"
	"os"
	"sort"
	"strings"
	"time"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	_ "github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem/gcs"
	_ "github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem/local"
	_ "github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem/s3"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/x/beamx"
	"github.com/hopwise/hopwise/graphidx/beamjob"
)

var (
	input      = flag.String("input", "", "comma-separated globs of JSONL corpus files (local, gs://, s3://)")
	output     = flag.String("output", "", "directory or object prefix for the count shards")
	shards     = flag.Int("shards", beamjob.DefaultShards, "number of count shards")
	strict     = flag.Bool("strict", false, "fail at the first bad corpus line instead of skipping and counting it")
	flushCells = flag.Int("flush_cells", beamjob.DefaultFlushCells, "distinct count cells a worker accumulates per bundle before emitting")
)

func main() {
	flag.Parse()
	beam.Init()
	if err := run(context.Background()); err != nil {
		fmt.Fprintln(os.Stderr, "hopwise-beam:", err)
		os.Exit(1)
	}
}

func run(ctx context.Context) error {
	var globs []string
	for g := range strings.SplitSeq(*input, ",") {
		if g = strings.TrimSpace(g); g != "" {
			globs = append(globs, g)
		}
	}
	p, s := beam.NewPipelineWithRoot()
	if err := beamjob.Pipeline(s, beamjob.Config{Inputs: globs, Output: *output, Shards: *shards,
		Strict: *strict, FlushCells: *flushCells}); err != nil {
		return err
	}
	start := time.Now()
	res, err := beamx.RunWithMetrics(ctx, p)
	if err != nil {
		return err
	}
	fmt.Printf("pipeline finished in %s\n", time.Since(start).Round(time.Millisecond))
	if res != nil {
		counts := beamjob.Counters(res)
		keys := make([]string, 0, len(counts))
		for k := range counts {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		for _, k := range keys {
			fmt.Printf("  %-28s %d\n", k, counts[k])
		}
	}
	return nil
}
