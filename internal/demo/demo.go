package demo

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/metric/noop"
	"go.opentelemetry.io/otel/sdk/resource"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
)

// Defaults of Config.
const (
	DefaultDir      = "hopwise-demo"
	DefaultSeed     = 1
	DefaultContexts = 100_000
	// MaxContexts bounds Config.Contexts so a typo cannot fill the disk.
	MaxContexts = 50_000_000
)

// File names written into Config.Dir.
const (
	CorpusFile = "corpus.jsonl"
	IndexFile  = "greenhouse.hwx"
	TraceFile  = "decisions.otlp.jsonl"
	PlotFile   = "error-by-route.png"
)

// ErrBadConfig wraps an out-of-range Config field.
var ErrBadConfig = errors.New("demo: bad configuration")

// Config configures Run. The zero value runs the default demo in
// ./hopwise-demo.
type Config struct {
	Dir      string // output directory (created); default DefaultDir
	Seed     int64  // world, corpus and exploration seed; 0 means DefaultSeed
	Contexts int    // contexts to sample; 0 means DefaultContexts
	Workers  int    // builder goroutines; 0 means GOMAXPROCS
	// Progress receives the index-build progress (a bar on a terminal,
	// plain lines otherwise); nil builds silently.
	Progress io.Writer
	// Log receives one line per stage; nil is silent.
	Log io.Writer
	// Examples is the number of explained decisions (default 4, at most 10).
	Examples int
	// RouterOptions are applied over the router defaults.
	RouterOptions []router.Option
}

func (c Config) withDefaults() (Config, error) {
	if c.Dir == "" {
		c.Dir = DefaultDir
	}
	if c.Seed == 0 {
		c.Seed = DefaultSeed
	}
	if c.Contexts == 0 {
		c.Contexts = DefaultContexts
	}
	if c.Contexts < 100 || c.Contexts > MaxContexts {
		return c, fmt.Errorf("%w: contexts %d outside [100, %d]", ErrBadConfig, c.Contexts, MaxContexts)
	}
	if c.Workers < 0 {
		return c, fmt.Errorf("%w: workers %d < 0", ErrBadConfig, c.Workers)
	}
	if c.Examples == 0 {
		c.Examples = 4
	}
	if c.Examples < 0 || c.Examples > 10 {
		return c, fmt.Errorf("%w: examples %d outside [1, 10]", ErrBadConfig, c.Examples)
	}
	return c, nil
}

// Files are the paths Run wrote.
type Files struct {
	Corpus, Index, Trace, Plot string
}

// Timings are the wall times of Run's stages.
type Timings struct {
	Sample, Build, Route, Total time.Duration
}

// Report is the result of Run.
type Report struct {
	Seed     int64
	Contexts int
	Entities int
	Build    graphidx.BuildSummary
	// HeldOut and Supported are the two query sets of the table.
	HeldOut, Supported Row
	// Explained are a few decisions with their bridges and exact truth.
	Explained []Explained
	Files     Files
	Timings   Timings
}

// Run executes the demo: sample, build, route with tracing, measure, plot.
func Run(ctx context.Context, cfg Config) (*Report, error) {
	cfg, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	start := time.Now()
	logf := func(format string, a ...any) {
		if cfg.Log != nil {
			fmt.Fprintf(cfg.Log, format+"\n", a...)
		}
	}
	if err := os.MkdirAll(cfg.Dir, 0o755); err != nil {
		return nil, fmt.Errorf("demo: %w", err)
	}
	rep := &Report{Seed: cfg.Seed, Contexts: cfg.Contexts}
	rep.Files = Files{
		Corpus: filepath.Join(cfg.Dir, CorpusFile),
		Index:  filepath.Join(cfg.Dir, IndexFile),
		Trace:  filepath.Join(cfg.Dir, TraceFile),
		Plot:   filepath.Join(cfg.Dir, PlotFile),
	}

	w, err := world.Greenhouse(cfg.Seed)
	if err != nil {
		return nil, fmt.Errorf("demo: greenhouse world: %w", err)
	}
	rep.Entities = w.NumVars()

	// 1. Corpus.
	t0 := time.Now()
	size, err := writeCorpus(ctx, w, rep.Files.Corpus, cfg.Contexts, cfg.Seed)
	if err != nil {
		return nil, err
	}
	rep.Timings.Sample = time.Since(t0)
	logf("corpus: %d local contexts of %d greenhouse entities, %.1f MB, %s (%.1fs)",
		cfg.Contexts, w.NumVars(), float64(size)/1e6, rep.Files.Corpus, rep.Timings.Sample.Seconds())

	// 2. Index.
	t0 = time.Now()
	rep.Build, err = buildIndex(ctx, rep.Files.Corpus, rep.Files.Index, size, cfg)
	if err != nil {
		return nil, err
	}
	rep.Timings.Build = time.Since(t0)
	logf("index: %d entities, %d pairs, %.1f MB, %s (%.1fs)", rep.Build.Entities, rep.Build.Pairs.After,
		float64(rep.Build.BytesWritten)/1e6, rep.Files.Index, rep.Timings.Build.Seconds())

	// 3. Route with tracing.
	t0 = time.Now()
	idx, err := graphidx.Open(rep.Files.Index)
	if err != nil {
		return nil, fmt.Errorf("demo: %w", err)
	}
	r, err := router.New(idx, cfg.RouterOptions...)
	if err != nil {
		idx.Close()
		return nil, fmt.Errorf("demo: %w", err)
	}
	defer r.Close()                // closes idx
	_ = os.Remove(rep.Files.Trace) // the exporter appends; start fresh
	tp, inst, err := newTracing(ctx, rep.Files.Trace)
	if err != nil {
		return nil, err
	}
	res, evalErr := evaluate(ctx, w, r, inst, cfg.Examples)
	shutCtx, cancel := context.WithTimeout(context.WithoutCancel(ctx), 10*time.Second)
	defer cancel()
	if err := tp.Shutdown(shutCtx); err != nil && evalErr == nil {
		evalErr = fmt.Errorf("demo: flushing traces to %s: %w", rep.Files.Trace, err)
	}
	if evalErr != nil {
		return nil, evalErr
	}
	rep.HeldOut, rep.Supported, rep.Explained = res.heldOut, res.supported, res.explained
	rep.Timings.Route = time.Since(t0)
	logf("routing: %d queries traced to %s (%.1fs)", rep.HeldOut.Queries+rep.Supported.Queries,
		rep.Files.Trace, rep.Timings.Route.Seconds())

	// 4. Plot.
	if err := writePlot(rep.Files.Plot, rep); err != nil {
		return nil, err
	}
	rep.Timings.Total = time.Since(start)
	return rep, nil
}

// writeCorpus samples n local contexts (DESIGN.md §7, local-geometric) and
// writes them as JSONL through a temporary file, returning the file size.
func writeCorpus(ctx context.Context, w *world.World, path string, n int, seed int64) (int64, error) {
	cond, err := world.ConditionByName(world.CondLocalGeometric)
	if err != nil {
		return 0, fmt.Errorf("demo: %w", err)
	}
	tmp := path + ".tmp"
	f, err := os.Create(tmp)
	if err != nil {
		return 0, fmt.Errorf("demo: %w", err)
	}
	bw := bufio.NewWriterSize(f, 1<<20)
	_, err = w.WriteCorpus(ctx, bw, n, cond, seed)
	if err == nil {
		err = bw.Flush()
	}
	if err == nil {
		err = f.Close()
	} else {
		f.Close()
	}
	if err == nil {
		err = os.Rename(tmp, path)
	}
	if err != nil {
		os.Remove(tmp)
		return 0, fmt.Errorf("demo: writing corpus %s: %w", path, err)
	}
	st, err := os.Stat(path)
	if err != nil {
		return 0, fmt.Errorf("demo: %w", err)
	}
	return st.Size(), nil
}

func buildIndex(ctx context.Context, corpus, out string, size int64, cfg Config) (graphidx.BuildSummary, error) {
	rd, closer, err := graphidx.OpenCorpus(corpus, graphidx.FormatJSONL, "")
	if err != nil {
		return graphidx.BuildSummary{}, fmt.Errorf("demo: %w", err)
	}
	defer closer.Close()
	prog := NewBuildProgress(cfg.Progress, size)
	opts := []graphidx.BuildOption{graphidx.WithProgress(prog.Event)}
	if cfg.Workers > 0 {
		opts = append(opts, graphidx.WithWorkers(cfg.Workers))
	}
	sum, err := graphidx.Build(ctx, rd, out, opts...)
	prog.Finish()
	if err != nil {
		return sum, fmt.Errorf("demo: building %s from %s: %w", out, corpus, err)
	}
	if n := sum.Read.SkippedTotal(); n > 0 {
		return sum, fmt.Errorf("demo: the builder skipped %d lines of the generated corpus %s", n, corpus)
	}
	return sum, nil
}

// newTracing returns a tracer provider exporting to an OTLP JSON Lines file and
// the decision instrumentation on it. The caller shuts the provider down.
func newTracing(ctx context.Context, path string) (*sdktrace.TracerProvider, *otelx.Instrumentation, error) {
	exp, err := otlpfile.NewExporter(ctx, path)
	if err != nil {
		return nil, nil, fmt.Errorf("demo: trace file %s: %w", path, err)
	}
	tp := sdktrace.NewTracerProvider(
		sdktrace.WithBatcher(exp),
		sdktrace.WithResource(resource.NewSchemaless(attribute.String("service.name", "hopwise-demo"))),
	)
	inst, err := otelx.New(otelx.WithTracerProvider(tp), otelx.WithMeterProvider(noop.NewMeterProvider()))
	if err != nil {
		_ = tp.Shutdown(ctx)
		return nil, nil, fmt.Errorf("demo: %w", err)
	}
	return tp, inst, nil
}
