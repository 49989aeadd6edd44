package bench

import (
	"cmp"
	"context"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
)

// Harness defaults.
const (
	DefaultQueries      = 2000
	DefaultHubQueries   = 1000
	DefaultAgreeQueries = 300
	// DefaultBaselineLimit is the largest graph on which BaselinesAuto runs
	// the baselines (their nested maps take about 0.5 GB per 100k entities
	// at average degree 32).
	DefaultBaselineLimit = 200_000
	// DefaultContextLimit is the largest number of contexts BuildAuto sends
	// through graphidx.Build; above it the Source is written directly.
	DefaultContextLimit = 40_000_000
	// cachedCalls is the number of timed cache hits.
	cachedCalls = 200_000
	// throughputMin is the least wall time of one throughput pass.
	throughputMin = 400 * time.Millisecond
)

// BuildMode selects how the index is built.
type BuildMode int

const (
	// BuildAuto builds through contexts up to DefaultContextLimit contexts.
	BuildAuto BuildMode = iota
	// BuildContexts always runs graphidx.Build over the generated contexts.
	BuildContexts
	// BuildDirect writes the generated Source with graphidx.WriteFile.
	BuildDirect
)

// Toggle is auto / on / off.
type Toggle int

// Toggle values.
const (
	Auto Toggle = iota
	On
	Off
)

// RunConfig configures Run.
type RunConfig struct {
	Graph        GraphConfig
	Queries      int // uncached queries (default DefaultQueries)
	Bounds       Bounds
	Build        BuildMode
	Baselines    Toggle
	Hub          bool // measure the hub attack
	HubQueries   int  // default DefaultHubQueries
	AgreeQueries int  // per agreement check (default DefaultAgreeQueries)
	// RankPrefix is the index's rank prefix R (graphidx.WithRankPrefix;
	// 0 keeps graphidx.DefaultRankPrefix).
	RankPrefix int
	IndexPath  string
	// ReadIndex opens the index with graphidx.WithoutMmap (a private copy,
	// on Linux with transparent huge pages) instead of mapping it.
	ReadIndex bool
	// SharedIndex opens the mapped index with graphidx.WithoutHotCopy
	// (every section in the shared page cache); ignored with ReadIndex.
	SharedIndex bool
	// Progress receives one line per phase (nil: silent).
	Progress io.Writer
}

// Latency summarises per-call wall times in nanoseconds.
type Latency struct {
	N    int     `json:"n"`
	Mean float64 `json:"mean_ns"`
	P50  float64 `json:"p50_ns"`
	P90  float64 `json:"p90_ns"`
	P99  float64 `json:"p99_ns"`
	Max  float64 `json:"max_ns"`
}

// Phase is one measured workload.
type Phase struct {
	// Latency is wall time per call.
	Latency Latency `json:"latency"`
	// CPU is the calling thread's CPU time per call (CLOCK_THREAD_CPUTIME_ID
	// on Linux, minus the clock's own median cost): it leaves out the time
	// the thread waited for a core, which dominates wall-time tails on a
	// shared machine. Absent where the clock is unavailable.
	CPU            *Latency `json:"cpu,omitempty"`
	AllocsPerOp    float64  `json:"allocs_per_op"`
	BytesPerOp     float64  `json:"bytes_per_op"`
	TruncatedShare float64  `json:"truncated_share"`
	ChainShare     float64  `json:"chain_found_share"`
	ChainModeShare float64  `json:"chain_mode_share"`
	// LoopMeanNs is the median over batches of 1000 calls of the batch's
	// mean time per call, timed without per-call timers (cached phase
	// only): robust to the preemptions a shared machine adds.
	LoopMeanNs float64 `json:"loop_mean_ns,omitempty"`
	// MinorFaults and MajorFaults are page faults of the deciding thread
	// per call (Linux getrusage): first touches of index pages (minor) and
	// reads from disk (major).
	MinorFaults float64 `json:"minor_faults_per_op"`
	MajorFaults float64 `json:"major_faults_per_op"`
	// Cuts counts, per bound name (router.Cut.Names), the decisions that
	// bound cut (router phases only).
	Cuts map[string]int `json:"cuts,omitempty"`
	// Load is the time to build the baseline's structures from the index.
	LoadSeconds float64 `json:"load_seconds,omitempty"`
}

// Agreement counts the queries on which a baseline and the router name the
// same best chain. A query is checked when neither search was cut by a
// bound (router Truncated false and the baseline complete): both then
// claim the exact optimum over all simple chains of at most H bridges.
// It agrees when both found no chain, or both found one with equal direct
// errors (|Δ| ≤ 1e-12) and either the same bridges or chain errors within
// 1e-12 (a tie between different chains).
type Agreement struct {
	Queries  int      `json:"queries"`
	Checked  int      `json:"checked"`
	Agreed   int      `json:"agreed"`
	Rate     float64  `json:"rate"`
	SameBest int      `json:"same_bridges"`
	Ties     int      `json:"ties"`
	Examples []string `json:"disagreements,omitempty"`
	// NoWorse counts, over all queries (cut or not), those where the
	// router's best chain error is at most the baseline's (+1e-12), or the
	// baseline found no chain: a quality comparison under the bounds.
	NoWorse     int     `json:"router_no_worse"`
	NoWorseRate float64 `json:"router_no_worse_rate"`
}

// AgreementCheck is one agreement experiment.
type AgreementCheck struct {
	Name   string    `json:"name"`
	Graph  string    `json:"graph"`
	Bounds Bounds    `json:"bounds"`
	Map    Agreement `json:"map_bfs"`
	Gonum  Agreement `json:"gonum"`
}

// Throughput is decisions per second at 1 and at GOMAXPROCS goroutines.
type Throughput struct {
	Goroutines int     `json:"goroutines"`
	Single     float64 `json:"single_per_s"`
	Parallel   float64 `json:"parallel_per_s"`
	Ratio      float64 `json:"ratio"`
	// SingleCores and ParallelCores are the cores the process obtained
	// during the passes (process CPU seconds / wall seconds): on a shared
	// machine the wall ratio cannot exceed ParallelCores/SingleCores.
	SingleCores   float64 `json:"single_cores,omitempty"`
	ParallelCores float64 `json:"parallel_cores,omitempty"`
	// PerCPURatio compares decisions per CPU second in the parallel and
	// the single pass: 1 means no loss to contention (locks, shared cache
	// lines), whatever the machine's other load.
	PerCPURatio float64 `json:"per_cpu_ratio,omitempty"`
}

// GraphInfo describes the generated graph and the index.
type GraphInfo struct {
	Entities     int     `json:"entities"`
	AvgDegreeCfg float64 `json:"avg_degree_config"`
	MeanDegree   float64 `json:"mean_degree"`
	Gamma        float64 `json:"gamma"`
	Seed         uint64  `json:"seed"`
	Pairs        uint64  `json:"pairs"`
	Contexts     uint64  `json:"contexts"`
	MeanSupport  float64 `json:"mean_support"`
	HubName      string  `json:"hub"`
	HubDegree    int     `json:"hub_degree"`
	BuildMode    string  `json:"build"`
	GenSeconds   float64 `json:"generate_seconds"`
	BuildSeconds float64 `json:"build_seconds"`
	IndexBytes   int64   `json:"index_bytes"`
	RankPrefix   int     `json:"rank_prefix"`
	// Open is how the index was opened: "mmap", "shared" (SharedIndex) or
	// "read" (ReadIndex).
	Open string `json:"open"`
}

// Report is the result of Run.
type Report struct {
	Graph      GraphInfo          `json:"graph"`
	Bounds     Bounds             `json:"bounds"`
	GOMAXPROCS int                `json:"gomaxprocs"`
	TimerNs    float64            `json:"timer_overhead_ns"`
	Uncached   Phase              `json:"router_uncached"`
	Cached     Phase              `json:"router_cached"`
	Throughput Throughput         `json:"throughput"`
	MapBFS     *Phase             `json:"map_bfs,omitempty"`
	Gonum      *Phase             `json:"gonum,omitempty"`
	Ratios     map[string]float64 `json:"ratios,omitempty"`
	Agreement  []AgreementCheck   `json:"agreement,omitempty"`
	Hub        *Phase             `json:"hub,omitempty"`
	Targets    []Target           `json:"targets"`
	Notes      []string           `json:"notes,omitempty"`
	Elapsed    float64            `json:"elapsed_seconds"`
}

type runner struct {
	cfg   RunConfig
	start time.Time
}

func (r *runner) logf(format string, args ...any) {
	if r.cfg.Progress != nil {
		fmt.Fprintf(r.cfg.Progress, "bench %6.1fs: %s\n", time.Since(r.start).Seconds(), fmt.Sprintf(format, args...))
	}
}

// Run generates the graph, builds and opens the index, and measures the
// router and the baselines on the same queries (see Report). It honours
// ctx between phases and between decisions.
func Run(ctx context.Context, cfg RunConfig) (*Report, error) {
	if cfg.Queries == 0 {
		cfg.Queries = DefaultQueries
	}
	if cfg.HubQueries == 0 {
		cfg.HubQueries = DefaultHubQueries
	}
	if cfg.AgreeQueries == 0 {
		cfg.AgreeQueries = DefaultAgreeQueries
	}
	if cfg.Bounds == (Bounds{}) {
		cfg.Bounds = DefaultBounds()
	}
	if cfg.Queries < 1 || cfg.HubQueries < 1 || cfg.AgreeQueries < 1 {
		return nil, fmt.Errorf("%w: query counts must be ≥ 1", ErrBadConfig)
	}
	if cfg.RankPrefix < 0 || cfg.RankPrefix > graphidx.MaxRankPrefix {
		return nil, fmt.Errorf("%w: rank prefix %d (want 0 for the default, or 1..%d)", ErrBadConfig, cfg.RankPrefix, graphidx.MaxRankPrefix)
	}
	if err := cfg.Bounds.validate(); err != nil {
		return nil, err
	}
	r := &runner{cfg: cfg, start: time.Now()}
	rep := &Report{Bounds: cfg.Bounds, GOMAXPROCS: runtime.GOMAXPROCS(0), Ratios: map[string]float64{}}

	// Graph and index.
	r.logf("generating Chung–Lu graph: %d entities, average degree %g", cfg.Graph.Entities, cfg.Graph.AvgDegree)
	t0 := time.Now()
	g, err := NewGraph(cfg.Graph)
	if err != nil {
		return nil, err
	}
	hub, hubDeg := g.MaxDegree()
	gc := g.Config()
	rep.Graph = GraphInfo{Entities: g.NumEntities(), AvgDegreeCfg: gc.AvgDegree, MeanDegree: g.MeanDegree(), Gamma: gc.Gamma,
		Seed: gc.Seed, Pairs: g.NumPairs(), Contexts: g.NumContexts(), MeanSupport: g.MeanSupport(),
		HubName: g.Name(hub), HubDegree: hubDeg, GenSeconds: time.Since(t0).Seconds()}
	r.logf("generated %d pairs, %d contexts, mean degree %.2f, hub %s degree %d", g.NumPairs(), g.NumContexts(), g.MeanDegree(), g.Name(hub), hubDeg)

	path := cfg.IndexPath
	if path == "" {
		dir, err := os.MkdirTemp("", "hopwise-bench-")
		if err != nil {
			return nil, err
		}
		defer os.RemoveAll(dir)
		path = filepath.Join(dir, "bench.hwx")
	}
	if err := r.build(ctx, g, path, rep); err != nil {
		return nil, err
	}
	var openOpts []graphidx.OpenOption
	rep.Graph.Open = "mmap"
	switch {
	case cfg.ReadIndex:
		openOpts, rep.Graph.Open = append(openOpts, graphidx.WithoutMmap()), "read"
	case cfg.SharedIndex:
		openOpts, rep.Graph.Open = append(openOpts, graphidx.WithoutHotCopy()), "shared"
	}
	ix, err := graphidx.Open(path, openOpts...)
	if err != nil {
		return nil, fmt.Errorf("bench: open %s: %w", path, err)
	}
	defer ix.Close()
	rep.Graph.IndexBytes = ix.Bytes()
	rep.Graph.RankPrefix = ix.RankPrefix()
	if hid, ok := ix.Lookup(g.Name(hub)); !ok || ix.Degree(hid) != hubDeg {
		return nil, fmt.Errorf("bench: index disagrees with the generator on the hub %s", g.Name(hub))
	}

	model, err := scorer.NewBayes()
	if err != nil {
		return nil, err
	}
	qs := makeQueries(g, cfg.Queries, gc.Seed+1)
	rep.TimerNs = timerOverhead()

	// Router, uncached.
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	r.logf("router uncached: %d queries (bounds H=%d B=%d k=%d budget=%d)", len(qs), cfg.Bounds.MaxBridges, cfg.Bounds.Beam, cfg.Bounds.MaxCandidates, cfg.Bounds.Budget)
	unc, err := newRouter(ix, model, cfg.Bounds, 0)
	if err != nil {
		return nil, err
	}
	defer unc.Close()
	decisions, ph, err := measureRouter(ctx, unc, qs, min(len(qs), 200))
	if err != nil {
		return nil, err
	}
	rep.Uncached = ph

	// Router, cached.
	r.logf("router cached: %d timed hits", cachedCalls)
	cached, err := newRouter(ix, model, cfg.Bounds, max(2*len(qs), 1024))
	if err != nil {
		return nil, err
	}
	defer cached.Close()
	if rep.Cached, err = measureCached(ctx, cached, qs); err != nil {
		return nil, err
	}

	// Throughput.
	r.logf("throughput at 1 and %d goroutines", rep.GOMAXPROCS)
	if rep.Throughput, err = measureThroughput(ctx, unc, qs); err != nil {
		return nil, err
	}

	// Baselines.
	runBase := cfg.Baselines == On || (cfg.Baselines == Auto && g.NumEntities() <= DefaultBaselineLimit)
	if !runBase {
		rep.Notes = append(rep.Notes, fmt.Sprintf("baselines skipped (%d entities > %d; use --baselines on)", g.NumEntities(), DefaultBaselineLimit))
	} else {
		if err := r.baselines(ctx, ix, model, qs, decisions, rep); err != nil {
			return nil, err
		}
	}

	// Hub attack.
	if cfg.Hub {
		r.logf("hub attack: %d queries touching %s (degree %d)", cfg.HubQueries, g.Name(hub), hubDeg)
		hq := hubQueries(g, hub, cfg.HubQueries, gc.Seed+2)
		_, hph, err := measureRouter(ctx, unc, hq, min(len(hq), 100))
		if err != nil {
			return nil, err
		}
		rep.Hub = &hph
		if hubDeg < 100_000 {
			rep.Notes = append(rep.Notes, fmt.Sprintf("hub degree %d < 100000: the issue's hub target needs about 1M entities at degree 32", hubDeg))
		}
	}
	rep.Elapsed = time.Since(r.start).Seconds()
	rep.Targets = rep.EvalTargets()
	r.logf("done")
	return rep, nil
}

// rankPrefix is the configured rank prefix option.
func (r *runner) rankPrefix() graphidx.RankPrefixOption {
	if r.cfg.RankPrefix == 0 {
		return graphidx.WithRankPrefix(graphidx.DefaultRankPrefix)
	}
	return graphidx.WithRankPrefix(r.cfg.RankPrefix)
}

func (r *runner) build(ctx context.Context, g *Graph, path string, rep *Report) error {
	mode := r.cfg.Build
	if mode == BuildAuto {
		mode = BuildContexts
		if g.NumContexts() > DefaultContextLimit {
			mode = BuildDirect
		}
	}
	t0 := time.Now()
	if mode == BuildDirect {
		rep.Graph.BuildMode = "direct-source"
		r.logf("writing the Source directly (%d contexts; building through contexts would take long)", g.NumContexts())
		if r.cfg.Build == BuildAuto {
			rep.Notes = append(rep.Notes, fmt.Sprintf("index written from the generated Source with graphidx.WriteFile, not through graphidx.Build: %d contexts > %d", g.NumContexts(), DefaultContextLimit))
		}
		if err := graphidx.WriteFile(path, g.Source(), r.rankPrefix()); err != nil {
			return fmt.Errorf("bench: write index: %w", err)
		}
	} else {
		rep.Graph.BuildMode = "graphidx.Build"
		r.logf("building the index through graphidx.Build over %d generated contexts", g.NumContexts())
		var last time.Time
		prog := graphidx.WithProgress(func(ev graphidx.ProgressEvent) {
			if time.Since(last) >= 2*time.Second {
				last = time.Now()
				r.logf("  build %s: %d contexts, %d pairs", ev.Phase, ev.Contexts, ev.Pairs)
			}
		})
		sum, err := graphidx.Build(ctx, g.Contexts(), path, prog, r.rankPrefix())
		if err != nil {
			return fmt.Errorf("bench: build index: %w", err)
		}
		if sum.Contexts != g.NumContexts() || sum.Pairs.After != g.NumPairs() {
			return fmt.Errorf("bench: build counted %d contexts and %d pairs, generator made %d and %d",
				sum.Contexts, sum.Pairs.After, g.NumContexts(), g.NumPairs())
		}
	}
	rep.Graph.BuildSeconds = time.Since(t0).Seconds()
	r.logf("index built in %.1fs", rep.Graph.BuildSeconds)
	return nil
}

func (r *runner) baselines(ctx context.Context, ix *graphidx.Index, model scorer.Model, qs []router.Query, decisions []router.Decision, rep *Report) error {
	b := r.cfg.Bounds
	nq := min(r.cfg.AgreeQueries, len(qs))

	// Exhaustive check on the main graph: up to two bridges with wide
	// bounds (an exhaustive three-bridge search of a power-law graph of
	// this size meets millions of paths per query; the companion graph
	// below checks three bridges). Fresh queries are drawn until nq of
	// them were not cut in the router (at most exhaustiveDraws·nq draws);
	// the baselines search the same queries with the same wide bounds, and
	// every query neither search cut is compared.
	wide := Bounds{MaxBridges: min(b.MaxBridges, 2), Beam: 1 << 20, FanOut: 1 << 20, MaxCandidates: 1 << 16, Budget: 1 << 22, GainThreshold: b.GainThreshold}
	// The router picks the queries under a budget of exhaustiveBudget
	// units, which keeps the baselines' exhaustive searches (that walk
	// every two-hop path in Go maps) to seconds in all.
	pick := wide
	pick.Budget = exhaustiveBudget
	rtw, err := newRouter(ix, model, pick, 0)
	if err != nil {
		return err
	}
	var exQs []router.Query
	var exDs []router.Decision
	pool := makeQueriesIx(ix, exhaustiveDraws*nq, r.cfg.Graph.Seed+4)
	drawn := 0
	for _, q := range pool {
		if len(exQs) == nq {
			break
		}
		drawn++
		d, err := rtw.Decide(ctx, q)
		if err != nil {
			return err
		}
		if !d.Truncated {
			exQs, exDs = append(exQs, q), append(exDs, d)
		}
	}
	rtw.Close()
	r.logf("exhaustive check: %d of %d drawn queries not cut in the router under wide bounds", len(exQs), drawn)
	// One bridge with generous candidates: the router's intersection is
	// exact, the baselines scan every neighbour of From.
	h1 := Bounds{MaxBridges: 1, Beam: 1 << 20, FanOut: 1 << 20, MaxCandidates: 1 << 16, Budget: 1 << 30, GainThreshold: b.GainThreshold}
	r.logf("router, one bridge, generous bounds: %d queries", nq)
	rt1, err := newRouter(ix, model, h1, 0)
	if err != nil {
		return err
	}
	h1Ds := make([]router.Decision, nq)
	for i, q := range qs[:nq] {
		if h1Ds[i], err = rt1.Decide(ctx, q); err != nil {
			return err
		}
	}
	rt1.Close()

	type baseline struct {
		name string
		load func() (func(context.Context, router.Query, Bounds) (Result, error), error)
	}
	var phases [2]*Phase
	var timed, exhaustive, one [2][]Result
	for k, bl := range []baseline{
		{"map", func() (func(context.Context, router.Query, Bounds) (Result, error), error) {
			m, err := LoadMap(ix, model, b)
			if err != nil {
				return nil, err
			}
			return m.DecideWith, nil
		}},
		{"gonum", func() (func(context.Context, router.Query, Bounds) (Result, error), error) {
			g, err := LoadGonum(ix, model, b)
			if err != nil {
				return nil, err
			}
			return g.DecideWith, nil
		}},
	} {
		r.logf("loading the %s baseline", bl.name)
		t0 := time.Now()
		decide, err := bl.load()
		if err != nil {
			return err
		}
		load := time.Since(t0).Seconds()
		r.logf("%s baseline: %d timed queries", bl.name, len(qs))
		res, ph, err := measureBaseline(ctx, func(ctx context.Context, q router.Query) (Result, error) { return decide(ctx, q, b) }, qs)
		if err != nil {
			return err
		}
		ph.LoadSeconds = load
		phases[k], timed[k] = &ph, res
		r.logf("%s baseline: exhaustive search of %d queries, one-bridge check on %d", bl.name, len(exQs), nq)
		for _, q := range exQs {
			x, err := decide(ctx, q, wide)
			if err != nil {
				return err
			}
			exhaustive[k] = append(exhaustive[k], x)
		}
		for _, q := range qs[:nq] {
			x, err := decide(ctx, q, h1)
			if err != nil {
				return err
			}
			one[k] = append(one[k], x)
		}
		decide = nil
		runtime.GC()
	}
	mph, gph := phases[0], phases[1]
	rep.MapBFS, rep.Gonum = mph, gph

	u := rep.Uncached.Latency
	rep.Ratios["map_bfs_vs_router_mean"] = mph.Latency.Mean / u.Mean
	rep.Ratios["map_bfs_vs_router_p50"] = mph.Latency.P50 / u.P50
	rep.Ratios["gonum_vs_router_mean"] = gph.Latency.Mean / u.Mean
	rep.Ratios["gonum_vs_router_p50"] = gph.Latency.P50 / u.P50
	if c := rep.Uncached.CPU; c != nil && mph.CPU != nil && gph.CPU != nil {
		rep.Ratios["map_bfs_vs_router_cpu_mean"] = mph.CPU.Mean / c.Mean
		rep.Ratios["gonum_vs_router_cpu_mean"] = gph.CPU.Mean / c.Mean
	}

	rep.Agreement = append(rep.Agreement,
		AgreementCheck{Name: "up to 2 bridges, wide bounds, queries the router did not cut", Graph: "main", Bounds: wide,
			Map: agreement(exDs, exhaustive[0]), Gonum: agreement(exDs, exhaustive[1])},
		AgreementCheck{Name: "same queries, timed bounds", Graph: "main", Bounds: b,
			Map: agreement(decisions, timed[0]), Gonum: agreement(decisions, timed[1])},
		AgreementCheck{Name: "one bridge, generous bounds", Graph: "main", Bounds: h1,
			Map: agreement(h1Ds, one[0]), Gonum: agreement(h1Ds, one[1])},
	)

	// Up to three bridges, generous bounds, on a small sparse companion
	// graph where exhaustive search is affordable.
	gc := r.cfg.Graph
	small := GraphConfig{Entities: min(gc.Entities, 2000), AvgDegree: min(gc.AvgDegree, 4), Gamma: gc.Gamma, SupportScale: gc.SupportScale, Seed: gc.Seed + 3}
	if small.AvgDegree > float64(small.Entities-1)/4 {
		small.AvgDegree = float64(small.Entities-1) / 4
	}
	r.logf("agreement, up to 3 bridges, generous bounds, companion graph of %d entities", small.Entities)
	sg, err := NewGraph(small)
	if err != nil {
		return err
	}
	dir, err := os.MkdirTemp("", "hopwise-bench-small-")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	spath := filepath.Join(dir, "small.hwx")
	if _, err := graphidx.Build(ctx, sg.Contexts(), spath, r.rankPrefix()); err != nil {
		return fmt.Errorf("bench: build companion index: %w", err)
	}
	six, err := graphidx.Open(spath)
	if err != nil {
		return err
	}
	defer six.Close()
	chk, err := agreementRun(ctx, six, model, GenerousBounds(), makeQueries(sg, r.cfg.AgreeQueries, small.Seed+1),
		fmt.Sprintf("companion N=%d D=%g", small.Entities, small.AvgDegree))
	if err != nil {
		return err
	}
	chk.Name = "up to 3 bridges, generous bounds"
	rep.Agreement = append(rep.Agreement, chk)
	return nil
}

// agreementRun decides qs with the router and both baselines under b and
// compares the best chains.
func agreementRun(ctx context.Context, ix router.Graph, model scorer.Model, b Bounds, qs []router.Query, graphName string) (AgreementCheck, error) {
	chk := AgreementCheck{Graph: graphName, Bounds: b}
	rt, err := newRouter(ix, model, b, 0)
	if err != nil {
		return chk, err
	}
	defer rt.Close()
	ds := make([]router.Decision, len(qs))
	for i, q := range qs {
		if ds[i], err = rt.Decide(ctx, q); err != nil {
			return chk, err
		}
	}
	mb, err := LoadMap(ix, model, b)
	if err != nil {
		return chk, err
	}
	mres := make([]Result, len(qs))
	for i, q := range qs {
		if mres[i], err = mb.Decide(ctx, q); err != nil {
			return chk, err
		}
	}
	mb = nil
	gb, err := LoadGonum(ix, model, b)
	if err != nil {
		return chk, err
	}
	gres := make([]Result, len(qs))
	for i, q := range qs {
		if gres[i], err = gb.Decide(ctx, q); err != nil {
			return chk, err
		}
	}
	chk.Map = agreement(ds, mres)
	chk.Gonum = agreement(ds, gres)
	return chk, nil
}

// Agree reports whether a router decision and a baseline result name the
// same best chain (see Agreement), with a reason when they do not.
func Agree(d router.Decision, r Result) (bool, bool, string) {
	const tol = 1e-12
	if math.Abs(d.Direct.Err-r.DirectErr) > tol {
		return false, false, fmt.Sprintf("direct error %.17g vs %.17g", d.Direct.Err, r.DirectErr)
	}
	if (d.Chain != nil) != r.HasChain {
		return false, false, fmt.Sprintf("chain found: router %v, baseline %v %v", d.Chain != nil, r.HasChain, r.Bridges)
	}
	if d.Chain == nil {
		return true, false, ""
	}
	if slices.Equal(d.Chain.Bridges, r.Bridges) {
		if math.Abs(d.Chain.Err-r.ChainErr) > tol {
			return false, false, fmt.Sprintf("same bridges %v, errors %.17g vs %.17g", r.Bridges, d.Chain.Err, r.ChainErr)
		}
		return true, false, ""
	}
	if math.Abs(d.Chain.Err-r.ChainErr) <= tol {
		return true, true, ""
	}
	return false, false, fmt.Sprintf("router %v err %.6g, baseline %v err %.6g", d.Chain.Bridges, d.Chain.Err, r.Bridges, r.ChainErr)
}

func agreement(ds []router.Decision, rs []Result) Agreement {
	a := Agreement{Queries: len(ds)}
	for i := range ds {
		if !rs[i].HasChain || (ds[i].Chain != nil && ds[i].Chain.Err <= rs[i].ChainErr+1e-12) {
			a.NoWorse++
		}
		if ds[i].Truncated || rs[i].Truncated {
			continue
		}
		a.Checked++
		ok, tie, why := Agree(ds[i], rs[i])
		if ok {
			a.Agreed++
			if tie {
				a.Ties++
			} else {
				a.SameBest++
			}
		} else if len(a.Examples) < 5 {
			a.Examples = append(a.Examples, why)
		}
	}
	if a.Checked > 0 {
		a.Rate = float64(a.Agreed) / float64(a.Checked)
	}
	if a.Queries > 0 {
		a.NoWorseRate = float64(a.NoWorse) / float64(a.Queries)
	}
	return a
}

func newRouter(g router.Graph, model scorer.Model, b Bounds, cache int) (*router.Router, error) {
	opts := append(b.RouterOptions(), router.WithModel(model), router.WithCacheSize(cache))
	return router.New(noClose{g}, opts...)
}

// noClose keeps the shared index open when a router retires it. It
// forwards the optional methods the router uses: the batch pair look-ups
// (router.PairBatcher, router.HintedPairBatcher, router.RankedPairBatcher),
// the ranked-list prefetch (router.RankedPrefetcher), RankPrefix, AppendName
// (router.NameAppender) and Marginal (scorer.Marginals), so that the timed
// router decides exactly as one opened on the index itself
// (TestBenchRouterDecidesAsIndex).
type noClose struct{ router.Graph }

// Marginal forwards to the graph's Marginal (scorer.Marginals), or returns
// nil (the Bayes model's uniform prior). Without it the timed decisions
// would skip the marginal-based terms of the direct estimate (the
// empirical-Bayes prior and the influence bound) that real decisions pay.
func (n noClose) Marginal(id graphidx.EntityID) []uint64 {
	if m, has := n.Graph.(scorer.Marginals); has {
		return m.Marginal(id)
	}
	return nil
}

// RankPrefix forwards to the graph's RankPrefix, or returns 0 (unknown).
func (n noClose) RankPrefix() int {
	if p, has := n.Graph.(interface{ RankPrefix() int }); has {
		return p.RankPrefix()
	}
	return 0
}

// PairBatch forwards to the graph's PairBatch, or looks the pairs up one by
// one when it has none.
func (n noClose) PairBatch(a, b []graphidx.EntityID, out []graphidx.PairStats, ok []bool) {
	if pb, has := n.Graph.(router.PairBatcher); has {
		pb.PairBatch(a, b, out, ok)
		return
	}
	for i := range a {
		out[i], ok[i] = n.Graph.Pair(a[i], b[i])
	}
}

// RankedPairHints forwards to the graph's RankedPairHints
// (router.HintedPairBatcher), or returns nil (no hints).
func (n noClose) RankedPairHints(id graphidx.EntityID) []uint32 {
	if hp, has := n.Graph.(router.HintedPairBatcher); has {
		return hp.RankedPairHints(id)
	}
	return nil
}

// PairBatchHinted forwards to the graph's PairBatchHinted, or to PairBatch
// without the hints.
func (n noClose) PairBatchHinted(a, b []graphidx.EntityID, hint []uint32, out []graphidx.PairStats, ok []bool) {
	if hp, has := n.Graph.(router.HintedPairBatcher); has {
		hp.PairBatchHinted(a, b, hint, out, ok)
		return
	}
	n.PairBatch(a, b, out, ok)
}

// PairBatchRanked forwards to the graph's PairBatchRanked
// (router.RankedPairBatcher), or looks the pairs up without their entries.
func (n noClose) PairBatchRanked(a, b []graphidx.EntityID, entry []uint32, out []graphidx.PairStats, ok []bool) {
	if rp, has := n.Graph.(router.RankedPairBatcher); has {
		rp.PairBatchRanked(a, b, entry, out, ok)
		return
	}
	n.PairBatch(a, b, out, ok)
}

// PrefetchRankedOffsets forwards to the graph's (router.RankedPrefetcher),
// or does nothing (a hint).
func (n noClose) PrefetchRankedOffsets(ids []graphidx.EntityID) {
	if rp, has := n.Graph.(router.RankedPrefetcher); has {
		rp.PrefetchRankedOffsets(ids)
	}
}

// PrefetchRankedHeads forwards to the graph's (router.RankedPrefetcher),
// or does nothing (a hint).
func (n noClose) PrefetchRankedHeads(ids []graphidx.EntityID, k int) {
	if rp, has := n.Graph.(router.RankedPrefetcher); has {
		rp.PrefetchRankedHeads(ids, k)
	}
}

// PrefetchEntity forwards to the graph's (router.EntityPrefetcher), or
// does nothing (a hint).
func (n noClose) PrefetchEntity(id graphidx.EntityID, k int) {
	if ep, has := n.Graph.(router.EntityPrefetcher); has {
		ep.PrefetchEntity(id, k)
	}
}

// PrefetchRankedTables forwards to the graph's
// (router.RankedTablePrefetcher), or does nothing (a hint).
func (n noClose) PrefetchRankedTables(ids []graphidx.EntityID, k int) {
	if rp, has := n.Graph.(router.RankedTablePrefetcher); has {
		rp.PrefetchRankedTables(ids, k)
	}
}

// PrefetchRankedCounts forwards to the graph's
// (router.RankedTablePrefetcher), or does nothing (a hint).
func (n noClose) PrefetchRankedCounts(ids []graphidx.EntityID, k int) {
	if rp, has := n.Graph.(router.RankedTablePrefetcher); has {
		rp.PrefetchRankedCounts(ids, k)
	}
}

// LookupTwo forwards to the graph's LookupTwo (router.TwoLookuper), or
// looks the names up one after the other.
func (n noClose) LookupTwo(a, b string) (graphidx.EntityID, bool, graphidx.EntityID, bool) {
	if l2, has := n.Graph.(router.TwoLookuper); has {
		return l2.LookupTwo(a, b)
	}
	ia, oka := n.Graph.Lookup(a)
	ib, okb := n.Graph.Lookup(b)
	return ia, oka, ib, okb
}

// AppendName forwards to the graph's AppendName (router.NameAppender), or
// appends Name's copy.
func (n noClose) AppendName(dst []byte, id graphidx.EntityID) []byte {
	if na, has := n.Graph.(router.NameAppender); has {
		return na.AppendName(dst, id)
	}
	return append(dst, n.Graph.Name(id)...)
}

// exhaustiveDraws bounds the queries drawn for the main graph's exhaustive
// check: at most exhaustiveDraws times the wanted number.
const exhaustiveDraws = 40

// exhaustiveBudget is the router's budget when it picks the queries of the
// main graph's exhaustive check (see baselines).
const exhaustiveBudget = 1 << 16

// makeQueriesIx draws n queries from the index like makeQueries does
// from the generator: From uniform, a uniform value of From, To uniform
// and different.
func makeQueriesIx(ix *graphidx.Index, n int, seed uint64) []router.Query {
	rng := rand.New(rand.NewPCG(seed, 0x9b))
	N := ix.NumEntities()
	qs := make([]router.Query, 0, n)
	for N > 1 && len(qs) < n {
		s, t := graphidx.EntityID(rng.IntN(N)), graphidx.EntityID(rng.IntN(N))
		if s == t {
			continue
		}
		vs := ix.Values(s)
		qs = append(qs, router.Query{From: ix.Name(s), Value: vs[rng.IntN(len(vs))], To: ix.Name(t)})
	}
	return qs
}

// makeQueries draws n queries: From uniform over entities, a uniform value
// of From, To uniform and different.
func makeQueries(g *Graph, n int, seed uint64) []router.Query {
	rng := rand.New(rand.NewPCG(seed, 0x9b))
	N := g.NumEntities()
	qs := make([]router.Query, 0, n)
	for len(qs) < n {
		s, t := rng.IntN(N), rng.IntN(N)
		if s == t {
			continue
		}
		vs := g.Values(s)
		qs = append(qs, router.Query{From: g.Name(s), Value: vs[rng.IntN(len(vs))], To: g.Name(t)})
	}
	return qs
}

// hubQueries draws n queries touching the hub: even ones from it, odd ones
// to it.
func hubQueries(g *Graph, hub, n int, seed uint64) []router.Query {
	rng := rand.New(rand.NewPCG(seed, 0x4b))
	N := g.NumEntities()
	qs := make([]router.Query, 0, n)
	for len(qs) < n {
		o := rng.IntN(N)
		if o == hub {
			continue
		}
		s, t := hub, o
		if len(qs)%2 == 1 {
			s, t = o, hub
		}
		vs := g.Values(s)
		qs = append(qs, router.Query{From: g.Name(s), Value: vs[rng.IntN(len(vs))], To: g.Name(t)})
	}
	return qs
}

func summarize(ns []float64) Latency {
	if len(ns) == 0 {
		return Latency{}
	}
	s := slices.Clone(ns)
	slices.Sort(s)
	var sum float64
	for _, v := range s {
		sum += v
	}
	q := func(p float64) float64 {
		// nearest rank (common practice)
		i := int(math.Ceil(p*float64(len(s)))) - 1
		return s[max(0, min(i, len(s)-1))]
	}
	return Latency{N: len(s), Mean: sum / float64(len(s)), P50: q(0.50), P90: q(0.90), P99: q(0.99), Max: s[len(s)-1]}
}

// timerOverhead is the median cost of one time.Now/time.Since pair.
func timerOverhead() float64 {
	ns := make([]float64, 10000)
	for i := range ns {
		t := time.Now()
		ns[i] = float64(time.Since(t))
	}
	return summarize(ns).P50
}

func memDelta(f func() error) (mallocs, bytes uint64, err error) {
	var a, b runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&a)
	err = f()
	runtime.ReadMemStats(&b)
	return b.Mallocs - a.Mallocs, b.TotalAlloc - a.TotalAlloc, err
}

// timeEach decides every query once with call under a per-call wall-clock and
// thread-CPU timer, on one locked OS thread, and fills ph's latency, CPU,
// allocation and page-fault figures. It stops early when ctx is done.
func timeEach[T any](ctx context.Context, qs []router.Query, ph *Phase, what string, call func(context.Context, router.Query) (T, error)) ([]T, error) {
	out := make([]T, len(qs))
	ns := make([]float64, len(qs))
	cpu := make([]float64, len(qs))
	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	cpuCost, cpuOK := threadCPUOverhead()
	min0, maj0 := threadFaults()
	mallocs, bytes, err := memDelta(func() error {
		for i, q := range qs {
			if err := ctx.Err(); err != nil {
				return err
			}
			c0 := threadCPU()
			t := time.Now()
			r, err := call(ctx, q)
			ns[i] = float64(time.Since(t))
			cpu[i] = float64(threadCPU()-c0) - cpuCost
			if err != nil {
				return fmt.Errorf("bench: %s %+v: %w", what, q, err)
			}
			out[i] = r
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	min1, maj1 := threadFaults()
	n := float64(len(qs))
	ph.MinorFaults = float64(min1-min0) / n
	ph.MajorFaults = float64(maj1-maj0) / n
	ph.Latency = summarize(ns)
	if cpuOK {
		c := summarize(cpu)
		ph.CPU = &c
	}
	ph.AllocsPerOp = float64(mallocs) / n
	ph.BytesPerOp = float64(bytes) / n
	return out, nil
}

// measureRouter warms up on the first warm queries, then decides every
// query once with a per-call timer.
func measureRouter(ctx context.Context, rt *router.Router, qs []router.Query, warm int) ([]router.Decision, Phase, error) {
	var ph Phase
	for _, q := range qs[:warm] {
		if _, err := rt.Decide(ctx, q); err != nil {
			return nil, ph, err
		}
	}
	ds, err := timeEach(ctx, qs, &ph, "Decide", rt.Decide)
	if err != nil {
		return nil, ph, err
	}
	var tr, ch, cm int
	for _, d := range ds {
		if d.Truncated {
			tr++
		}
		for _, c := range d.Cut.Names() {
			if ph.Cuts == nil {
				ph.Cuts = map[string]int{}
			}
			ph.Cuts[c]++
		}
		if d.Chain != nil {
			ch++
		}
		if d.Mode == router.ModeChain {
			cm++
		}
	}
	n := float64(len(ds))
	ph.TruncatedShare, ph.ChainShare, ph.ChainModeShare = float64(tr)/n, float64(ch)/n, float64(cm)/n
	return ds, ph, nil
}

// measureCached primes the cache with every query, then times cachedCalls
// hits one by one, and again in batches without per-call timers.
func measureCached(ctx context.Context, rt *router.Router, qs []router.Query) (Phase, error) {
	var ph Phase
	for _, q := range qs {
		if _, err := rt.Decide(ctx, q); err != nil {
			return ph, err
		}
	}
	ns := make([]float64, cachedCalls)
	var miss int
	mallocs, bytes, err := memDelta(func() error {
		for i := range ns {
			q := qs[i%len(qs)]
			t := time.Now()
			d, err := rt.Decide(ctx, q)
			ns[i] = float64(time.Since(t))
			if err != nil {
				return err
			}
			if !d.Cached {
				miss++
			}
		}
		return nil
	})
	if err != nil {
		return ph, err
	}
	if miss > 0 {
		return ph, fmt.Errorf("bench: %d of %d cached calls missed the cache", miss, cachedCalls)
	}
	ph.Latency = summarize(ns)
	ph.AllocsPerOp = float64(mallocs) / float64(cachedCalls)
	ph.BytesPerOp = float64(bytes) / float64(cachedCalls)
	const batch = 1000
	means := make([]float64, 0, cachedCalls/batch)
	for i := 0; i < cachedCalls; i += batch {
		t := time.Now()
		for j := i; j < i+batch; j++ {
			if _, err := rt.Decide(ctx, qs[j%len(qs)]); err != nil {
				return ph, err
			}
		}
		means = append(means, float64(time.Since(t))/batch)
	}
	ph.LoopMeanNs = summarize(means).P50
	return ph, nil
}

// measureThroughput runs uncached decisions with 1 goroutine and with
// GOMAXPROCS goroutines, three times each alternating, and keeps the median
// rates.
func measureThroughput(ctx context.Context, rt *router.Router, qs []router.Query) (Throughput, error) {
	p := runtime.GOMAXPROCS(0)
	type result struct{ rate, cores float64 }
	pass := func(workers int) (result, error) {
		var next atomic.Int64
		var firstErr error
		var once sync.Once
		var wg sync.WaitGroup
		cpu0 := processCPU()
		start := time.Now()
		deadline := start.Add(throughputMin)
		var done atomic.Int64
		for w := 0; w < workers; w++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for {
					i := next.Add(1) - 1
					if i >= int64(len(qs)) && time.Now().After(deadline) {
						return
					}
					if _, err := rt.Decide(ctx, qs[i%int64(len(qs))]); err != nil {
						once.Do(func() { firstErr = err })
						return
					}
					done.Add(1)
				}
			}()
		}
		wg.Wait()
		wall := time.Since(start).Seconds()
		r := result{rate: float64(done.Load()) / wall}
		if cpu0 >= 0 {
			r.cores = (processCPU() - cpu0) / wall
		}
		return r, firstErr
	}
	var singles, pars []result
	for i := 0; i < 3; i++ {
		s, err := pass(1)
		if err != nil {
			return Throughput{}, err
		}
		pp, err := pass(p)
		if err != nil {
			return Throughput{}, err
		}
		singles, pars = append(singles, s), append(pars, pp)
	}
	// median pass by rate
	byRate := func(a, b result) int { return cmp.Compare(a.rate, b.rate) }
	slices.SortFunc(singles, byRate)
	slices.SortFunc(pars, byRate)
	s, pp := singles[1], pars[1]
	t := Throughput{Goroutines: p, Single: s.rate, Parallel: pp.rate, SingleCores: s.cores, ParallelCores: pp.cores}
	t.Ratio = t.Parallel / t.Single
	if s.cores > 0 && pp.cores > 0 {
		t.PerCPURatio = (pp.rate / pp.cores) / (s.rate / s.cores)
	}
	return t, nil
}

func measureBaseline(ctx context.Context, decide func(context.Context, router.Query) (Result, error), qs []router.Query) ([]Result, Phase, error) {
	var ph Phase
	warm := min(len(qs), 50)
	for _, q := range qs[:warm] {
		if _, err := decide(ctx, q); err != nil {
			return nil, ph, err
		}
	}
	res, err := timeEach(ctx, qs, &ph, "baseline", decide)
	if err != nil {
		return nil, ph, err
	}
	var tr, ch, cm int
	for _, r := range res {
		if r.Truncated {
			tr++
		}
		if r.HasChain {
			ch++
		}
		if r.Mode == router.ModeChain {
			cm++
		}
	}
	n := float64(len(res))
	ph.TruncatedShare, ph.ChainShare, ph.ChainModeShare = float64(tr)/n, float64(ch)/n, float64(cm)/n
	return res, ph, nil
}
