package bench

import (
	"fmt"
	"io"
	"slices"
	"strings"
	"text/tabwriter"
)

// Target is one of the project's performance targets checked against a Report.
type Target struct {
	Name     string  `json:"name"`
	Want     string  `json:"want"`
	Measured float64 `json:"measured"`
	Unit     string  `json:"unit"`
	Met      bool    `json:"met"`
	// Applies is false when the run's settings differ from the target's
	// (graph size, degree, bounds); the figure is then indicative only.
	Applies bool   `json:"applies"`
	Note    string `json:"note,omitempty"`
}

// EvalTargets evaluates the performance targets on the report.
// Latency targets use wall time; on a shared machine compare with the CPU
// columns too. Run stores the result in Report.Targets.
func (r *Report) EvalTargets() []Target {
	var ts []Target
	big := r.Graph.Entities >= 1_000_000 && r.Graph.AvgDegreeCfg == 32 && r.Bounds.Beam == 64 && r.Bounds.MaxBridges == 3
	mid := r.Graph.Entities == 100_000
	cached := r.Cached.LoopMeanNs
	ts = append(ts, Target{Name: "cached decision", Want: "≤ 300 ns", Measured: cached, Unit: "ns (median batch mean)", Met: cached <= 300, Applies: true})
	ts = append(ts, Target{Name: "cached allocations", Want: "0 per decision", Measured: r.Cached.AllocsPerOp, Unit: "allocs/op", Met: r.Cached.AllocsPerOp < 0.01, Applies: true})
	ts = append(ts, Target{Name: "uncached p50", Want: "≤ 25 µs (1M entities, D=32, H=3, B=64)", Measured: r.Uncached.Latency.P50 / 1e3, Unit: "µs wall", Met: r.Uncached.Latency.P50 <= 25e3, Applies: big})
	ts = append(ts, Target{Name: "uncached p99", Want: "≤ 250 µs (1M entities, D=32, H=3, B=64)", Measured: r.Uncached.Latency.P99 / 1e3, Unit: "µs wall", Met: r.Uncached.Latency.P99 <= 250e3, Applies: big})
	if r.Uncached.CPU != nil {
		c := r.Uncached.CPU
		ts = append(ts, Target{Name: "uncached p99 (thread CPU)", Want: "≤ 250 µs", Measured: c.P99 / 1e3, Unit: "µs CPU", Met: c.P99 <= 250e3, Applies: big,
			Note: "CPU time of the deciding thread, immune to waiting for a core"})
	}
	if r.Hub != nil {
		hl := r.Hub.Latency
		t := Target{Name: "hub query p99", Want: "≤ 250 µs (hub ≥ 100k neighbours)", Measured: hl.P99 / 1e3, Unit: "µs wall", Met: hl.P99 <= 250e3,
			Applies: r.Graph.HubDegree >= 100_000, Note: fmt.Sprintf("truncated share %.2f", r.Hub.TruncatedShare)}
		ts = append(ts, t)
		if r.Hub.CPU != nil {
			ts = append(ts, Target{Name: "hub query p99 (thread CPU)", Want: "≤ 250 µs", Measured: r.Hub.CPU.P99 / 1e3, Unit: "µs CPU", Met: r.Hub.CPU.P99 <= 250e3,
				Applies: r.Graph.HubDegree >= 100_000})
		}
	}
	// Speed ratios: the smaller of the wall-time and the CPU-time mean
	// ratio (wall time on a loaded machine penalises the longer calls).
	ratio := func(key string) (float64, string, bool) {
		v, ok := r.Ratios[key+"_mean"]
		if !ok {
			return 0, "", false
		}
		unit := "× (mean wall)"
		if c, ok := r.Ratios[key+"_cpu_mean"]; ok && c < v {
			v, unit = c, "× (mean CPU)"
		}
		return v, unit, true
	}
	if v, unit, ok := ratio("gonum_vs_router"); ok {
		ts = append(ts, Target{Name: "vs gonum baseline", Want: "≥ 30× (100k entities)", Measured: v, Unit: unit, Met: v >= 30, Applies: mid,
			Note: "smaller of the wall and CPU ratios"})
	}
	if v, unit, ok := ratio("map_bfs_vs_router"); ok {
		ts = append(ts, Target{Name: "vs map-BFS baseline", Want: "≥ 10× (100k entities)", Measured: v, Unit: unit, Met: v >= 10, Applies: mid,
			Note: "smaller of the wall and CPU ratios"})
	}
	tp := r.Throughput
	ts = append(ts, Target{Name: "throughput scaling", Want: "≥ 1.7× on 2 goroutines", Measured: tp.Ratio, Unit: "×", Met: tp.Ratio >= 1.7,
		Applies: r.GOMAXPROCS == 2, Note: fmt.Sprintf("the process obtained %.2f cores in the parallel pass, %.2f in the single one", tp.ParallelCores, tp.SingleCores)})
	return ts
}

func us(ns float64) string { return fmt.Sprintf("%.1f", ns/1e3) }

// WriteTable prints the report as aligned text tables.
func (r *Report) WriteTable(w io.Writer) error {
	var b strings.Builder
	g := r.Graph
	fmt.Fprintf(&b, "graph: %d entities, avg degree %.2f (asked %g), γ=%g, seed %d, %d pairs, %d contexts, mean support %.2f\n",
		g.Entities, g.MeanDegree, g.AvgDegreeCfg, g.Gamma, g.Seed, g.Pairs, g.Contexts, g.MeanSupport)
	fmt.Fprintf(&b, "hub: %s with %d neighbours; index %d bytes (rank prefix %d, opened by %s) via %s (generate %.1fs, build %.1fs)\n",
		g.HubName, g.HubDegree, g.IndexBytes, g.RankPrefix, g.Open, g.BuildMode, g.GenSeconds, g.BuildSeconds)
	par := ""
	if r.Bounds.Parallel {
		par = " parallel answer on;"
	}
	fmt.Fprintf(&b, "bounds: H=%d B=%d f=%d k=%d budget=%d τ=%g;%s GOMAXPROCS=%d; timer overhead %.0f ns\n\n",
		r.Bounds.MaxBridges, r.Bounds.Beam, r.Bounds.FanOut, r.Bounds.MaxCandidates, r.Bounds.Budget, r.Bounds.GainThreshold, par, r.GOMAXPROCS, r.TimerNs)

	tw := tabwriter.NewWriter(&b, 2, 8, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "workload\tn\tp50 µs\tp99 µs\tmean µs\tmax µs\tcpu p50 µs\tcpu p99 µs\tallocs/op\tfaults/op\ttruncated\tchain found\t")
	row := func(name string, p *Phase) {
		if p == nil {
			return
		}
		l := p.Latency
		cp50, cp99 := "-", "-"
		if p.CPU != nil {
			cp50, cp99 = us(p.CPU.P50), us(p.CPU.P99)
		}
		fmt.Fprintf(tw, "%s\t%d\t%s\t%s\t%s\t%s\t%s\t%s\t%.1f\t%.2f\t%.3f\t%.3f\t\n", name, l.N, us(l.P50), us(l.P99), us(l.Mean), us(l.Max),
			cp50, cp99, p.AllocsPerOp, p.MinorFaults+p.MajorFaults, p.TruncatedShare, p.ChainShare)
	}
	row("router uncached", &r.Uncached)
	l := r.Cached.Latency
	fmt.Fprintf(tw, "router cached\t%d\t%.3f\t%.3f\t%.3f\t%s\t-\t-\t%.2f\t-\t-\t-\t\n", l.N, l.P50/1e3, l.P99/1e3, l.Mean/1e3, us(l.Max), r.Cached.AllocsPerOp)
	row("map-BFS baseline", r.MapBFS)
	row("gonum baseline", r.Gonum)
	row("hub attack (router)", r.Hub)
	tw.Flush()
	for _, x := range []struct {
		name string
		p    *Phase
	}{{"router uncached", &r.Uncached}, {"hub attack", r.Hub}} {
		if x.p == nil || len(x.p.Cuts) == 0 {
			continue
		}
		names := make([]string, 0, len(x.p.Cuts))
		for n := range x.p.Cuts {
			names = append(names, n)
		}
		slices.Sort(names)
		fmt.Fprintf(&b, "%s: decisions cut by", x.name)
		for _, n := range names {
			fmt.Fprintf(&b, " %s %d", n, x.p.Cuts[n])
		}
		fmt.Fprintf(&b, " (of %d)\n", x.p.Latency.N)
	}
	fmt.Fprintf(&b, "\ncached, median of 1000-call batch means (no per-call timer): %.0f ns/decision\n", r.Cached.LoopMeanNs)
	t := r.Throughput
	fmt.Fprintf(&b, "throughput (uncached): %.0f/s on 1 goroutine, %.0f/s on %d, ratio %.2f; cores obtained %.2f and %.2f; decisions per CPU-second ratio %.2f\n",
		t.Single, t.Parallel, t.Goroutines, t.Ratio, t.SingleCores, t.ParallelCores, t.PerCPURatio)
	if len(r.Ratios) > 0 {
		fmt.Fprintf(&b, "speed-up of the router: %.1f× vs map-BFS, %.1f× vs gonum (mean wall); %.1f× and %.1f× (p50 wall); %.1f× and %.1f× (mean thread CPU)\n",
			r.Ratios["map_bfs_vs_router_mean"], r.Ratios["gonum_vs_router_mean"], r.Ratios["map_bfs_vs_router_p50"], r.Ratios["gonum_vs_router_p50"],
			r.Ratios["map_bfs_vs_router_cpu_mean"], r.Ratios["gonum_vs_router_cpu_mean"])
		fmt.Fprintf(&b, "baseline load: map %.1fs, gonum %.1fs\n", r.MapBFS.LoadSeconds, r.Gonum.LoadSeconds)
	}
	if len(r.Agreement) > 0 {
		fmt.Fprintln(&b, "\nagreement with the router (checked = neither search cut by a bound; router no worse = over all")
		fmt.Fprintln(&b, "queries, the router's best chain error ≤ the baseline's, or the baseline found none):")
		tw = tabwriter.NewWriter(&b, 2, 8, 2, ' ', 0)
		fmt.Fprintln(tw, "check\tgraph\tbaseline\tqueries\tchecked\tagreed\tsame bridges\tties\trate\trouter no worse\t")
		for _, c := range r.Agreement {
			for _, x := range []struct {
				name string
				a    Agreement
			}{{"map-BFS", c.Map}, {"gonum", c.Gonum}} {
				rate := "-"
				if x.a.Checked > 0 {
					rate = fmt.Sprintf("%.4f", x.a.Rate)
				}
				fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%d\t%d\t%d\t%d\t%s\t%.4f\t\n", c.Name, c.Graph, x.name, x.a.Queries, x.a.Checked, x.a.Agreed, x.a.SameBest, x.a.Ties, rate, x.a.NoWorseRate)
			}
		}
		tw.Flush()
		for _, c := range r.Agreement {
			for _, e := range append(c.Map.Examples, c.Gonum.Examples...) {
				fmt.Fprintf(&b, "  disagreement (%s): %s\n", c.Name, e)
			}
		}
	}
	fmt.Fprintln(&b, "\nperformance targets:")
	tw = tabwriter.NewWriter(&b, 2, 8, 2, ' ', 0)
	fmt.Fprintln(tw, "target\twant\tmeasured\tmet\tapplies to this run\t")
	for _, t := range r.Targets {
		met := "no"
		if t.Met {
			met = "yes"
		}
		ap := "yes"
		if !t.Applies {
			ap = "no (indicative)"
		}
		note := ""
		if t.Note != "" {
			note = " — " + t.Note
		}
		fmt.Fprintf(tw, "%s\t%s\t%.3g %s\t%s\t%s%s\t\n", t.Name, t.Want, t.Measured, t.Unit, met, ap, note)
	}
	tw.Flush()
	for _, n := range r.Notes {
		fmt.Fprintf(&b, "note: %s\n", n)
	}
	fmt.Fprintf(&b, "elapsed %.1fs\n", r.Elapsed)
	_, err := io.WriteString(w, b.String())
	return err
}
