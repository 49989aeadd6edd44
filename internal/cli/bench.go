package cli

import (
	"encoding/json"
	"fmt"
	"io"
	"strings"

	"github.com/spf13/cobra"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/bench"
)

func init() { register(newBenchCmd) }

// benchOptions are the flags of `hopwise bench`.
type benchOptions struct {
	entities      int
	avgDegree     float64
	gamma         float64
	queries       int
	seed          uint64
	json          bool
	hub           bool
	hubQueries    int
	agreeQueries  int
	baselines     string
	build         string
	indexOut      string
	open          string
	maxBridges    int
	beam          int
	fanOut        int
	maxCandidates int
	budget        int
	rankPrefix    int
	parallel      bool
}

func newBenchCmd() *cobra.Command {
	var o benchOptions
	cmd := &cobra.Command{
		Use:   "bench [--entities N] [--avg-degree D] [--queries Q] [--seed S] [--json] [--hub]",
		Short: "Measure the router on a generated power-law locality index against two baselines",
		Long: `bench generates a seeded Chung–Lu locality graph (degree exponent γ, default
2.1; every edge is a pair observed in a random number of two-entity contexts
with a random 2×2 count table), builds the index through the real builder
(graphidx.Build over the generated contexts, or WriteFile of the generated
Source above 40M contexts), and measures in one run on the same queries:

  - uncached Decide latency (p50, p99; wall and deciding-thread CPU time),
    allocations per decision, truncated and chain-found shares;
  - cached Decide latency and allocations;
  - uncached throughput on 1 and on GOMAXPROCS goroutines, and their ratio;
  - two baselines with the same scorer model and bounds: nested
    map[string]map[string] breadth-first beam search, and the same search
    on gonum's graph/simple; their speed relative to the router (wall and
    thread-CPU means), and the agreement of their best chains with the
    router's where no bound cut either search: up to two bridges with wide
    bounds on --agree-queries queries of the main graph that the router's
    wide search did not cut, the timed queries under the same bounds, one
    bridge with generous bounds on the main graph, and up to three bridges
    with generous bounds on a small companion graph;
  - with --hub, queries from and to the highest-degree entity.

Progress goes to stderr. The baselines hold the whole graph in Go maps
(about 0.5 GB per 100k entities at degree 32) and run by default only up
to 200k entities. The machine's other load shows in wall-time tails; the
CPU columns leave out time spent waiting for a core.`,
		Example: `  hopwise bench --entities 100000 --queries 2000
  hopwise bench --entities 1000000 --avg-degree 32 --hub --json > bench.json`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			return runBench(cmd, o)
		},
	}
	f := cmd.Flags()
	f.IntVar(&o.entities, "entities", 100_000, "number of entities N")
	f.Float64Var(&o.avgDegree, "avg-degree", 32, "expected average degree D")
	f.Float64Var(&o.gamma, "gamma", bench.DefaultGamma, "degree tail exponent γ, in (2, 4)")
	f.IntVar(&o.queries, "queries", bench.DefaultQueries, "number of timed uncached queries")
	f.Uint64Var(&o.seed, "seed", 1, "random seed of the graph and the queries")
	f.BoolVar(&o.json, "json", false, "print the report as JSON instead of tables")
	f.BoolVar(&o.hub, "hub", false, "also measure queries from and to the highest-degree entity")
	f.IntVar(&o.hubQueries, "hub-queries", bench.DefaultHubQueries, "number of hub queries with --hub")
	f.IntVar(&o.agreeQueries, "agree-queries", bench.DefaultAgreeQueries, "queries per generous-bounds agreement check")
	f.StringVar(&o.baselines, "baselines", "auto", `run the baselines: "auto" (up to 200k entities), "on" or "off"`)
	f.StringVar(&o.build, "build", "auto", `index build: "auto", "contexts" (graphidx.Build) or "direct" (WriteFile of the Source)`)
	f.StringVar(&o.indexOut, "index-out", "", "keep the generated index at this path (default: a temp file, removed)")
	f.StringVar(&o.open, "open", "mmap", `how to open the index: "mmap" (the default open: mapped, with its per-entity offsets and marginals copied into private huge pages from 65 536 entities), "shared" (mapped, everything in the shared page cache) or "read" (a private copy of the whole file, on Linux with transparent huge pages)`)
	f.IntVar(&o.maxBridges, "max-bridges", bench.DefaultBounds().MaxBridges, "H, largest number of bridges")
	f.IntVar(&o.beam, "beam", bench.DefaultBounds().Beam, "B, width of the first search layer")
	f.IntVar(&o.fanOut, "fan-out", bench.DefaultBounds().FanOut, "f, second-layer neighbours per first-layer node")
	f.IntVar(&o.maxCandidates, "max-candidates", bench.DefaultBounds().MaxCandidates, "k, candidates scored exactly")
	f.IntVar(&o.budget, "expansion-budget", bench.DefaultBounds().Budget, "work units one search may spend (a hub costs at most this)")
	f.IntVar(&o.rankPrefix, "rank-prefix", graphidx.DefaultRankPrefix, "rank prefix R of the generated index")
	f.BoolVar(&o.parallel, "parallel-bridges", bench.DefaultBounds().Parallel, "let the router's parallel answer through two bridges compete (docs/QUALITY.md §4e)")
	return cmd
}

func parseToggle(flag, s string) (bench.Toggle, error) {
	switch strings.ToLower(s) {
	case "auto", "":
		return bench.Auto, nil
	case "on", "true", "yes":
		return bench.On, nil
	case "off", "false", "no":
		return bench.Off, nil
	}
	return 0, fmt.Errorf("bench: --%s must be auto, on or off, got %q", flag, s)
}

func runBench(cmd *cobra.Command, o benchOptions) error {
	base, err := parseToggle("baselines", o.baselines)
	if err != nil {
		return err
	}
	var mode bench.BuildMode
	switch strings.ToLower(o.build) {
	case "auto", "":
		mode = bench.BuildAuto
	case "contexts":
		mode = bench.BuildContexts
	case "direct":
		mode = bench.BuildDirect
	default:
		return fmt.Errorf("bench: --build must be auto, contexts or direct, got %q", o.build)
	}
	var read, shared bool
	switch strings.ToLower(o.open) {
	case "mmap", "":
	case "shared":
		shared = true
	case "read":
		read = true
	default:
		return fmt.Errorf("bench: --open must be mmap, shared or read, got %q", o.open)
	}
	if o.queries < 1 || o.hubQueries < 1 || o.agreeQueries < 1 {
		return fmt.Errorf("bench: --queries, --hub-queries and --agree-queries must be ≥ 1")
	}
	var progress io.Writer = cmd.ErrOrStderr()
	cfg := bench.RunConfig{
		Graph:        bench.GraphConfig{Entities: o.entities, AvgDegree: o.avgDegree, Gamma: o.gamma, Seed: o.seed},
		Queries:      o.queries,
		Bounds:       bench.Bounds{MaxBridges: o.maxBridges, Beam: o.beam, FanOut: o.fanOut, MaxCandidates: o.maxCandidates, Budget: o.budget, GainThreshold: bench.DefaultBounds().GainThreshold, Parallel: o.parallel},
		Build:        mode,
		Baselines:    base,
		Hub:          o.hub,
		HubQueries:   o.hubQueries,
		AgreeQueries: o.agreeQueries,
		RankPrefix:   o.rankPrefix,
		IndexPath:    o.indexOut,
		ReadIndex:    read,
		SharedIndex:  shared,
		Progress:     progress,
	}
	rep, err := bench.Run(cmd.Context(), cfg)
	if err != nil {
		return err
	}
	out := cmd.OutOrStdout()
	if o.json {
		enc := json.NewEncoder(out)
		enc.SetIndent("", "  ")
		return enc.Encode(rep)
	}
	return rep.WriteTable(out)
}
