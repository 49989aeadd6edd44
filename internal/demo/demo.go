package demo

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/eval"
	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
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

// File names in Config.Dir. The corpus, index, queries and truth files are
// written by the eval harness (internal/eval) under its own names.
const (
	CorpusFile  = "corpus.jsonl"
	IndexFile   = "index.hwx"
	QueriesFile = "queries.jsonl"
	TruthFile   = "truth.jsonl"
	TraceFile   = "decisions.otlp.jsonl"
	PlotFile    = "error-by-route.png"
)

// ErrBadConfig wraps an out-of-range Config field.
var ErrBadConfig = errors.New("demo: bad configuration")

// ProgressFunc starts a progress display for a build over a corpus of
// corpusBytes bytes and returns the graphidx.WithProgress callback and a
// function that ends the display.
type ProgressFunc func(corpusBytes int64) (event func(graphidx.ProgressEvent), done func())

// Config configures Run. The zero value runs the default demo in
// ./hopwise-demo.
type Config struct {
	Dir      string // output directory (created); default DefaultDir
	Seed     int64  // world, corpus and exploration seed; 0 means DefaultSeed
	Contexts int    // contexts to sample; 0 means DefaultContexts
	Workers  int    // goroutines answering the eval queries; 0 means GOMAXPROCS
	// Progress, when set, displays the index build.
	Progress ProgressFunc
	// Log receives one line per stage; nil is silent.
	Log io.Writer
	// Examples is the number of explained decisions (default 4, at most 10).
	Examples int
	// RouterOptions are applied after the eval harness's model options
	// (bounds, thresholds; not WithAlpha/WithBeta).
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
	Corpus, Index, Queries, Truth, Trace, Plot string
	// Lexicon (display names and value phrases) and Questions (free-text
	// questions in the `hopwise route --queries` text-line form).
	Lexicon, Questions string
}

// Timings are the wall times of Run's stages.
type Timings struct {
	Prepare time.Duration // sample the corpus and build the index
	Measure time.Duration // answer every query with every estimator
	Route   time.Duration // the traced routing pass
	Total   time.Duration
}

// Report is the result of Run.
type Report struct {
	Seed     int64
	Contexts int
	// Eval is the eval harness's report on the greenhouse world: the MSE of
	// every estimator on held-out and supported queries.
	Eval eval.Report
	// HeldOut and Supported summarise the traced routing pass.
	HeldOut, Supported Traced
	// Explained are a few decisions with their bridges and exact truth.
	Explained []Explained
	// Texts are questions taken from free text to mentions, decisions and
	// rendered plans.
	Texts   []TextExample
	Files   Files
	Timings Timings
}

// Run executes the demo: sample, build, measure against exact truth, route
// again with tracing, explain, plot.
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
	rep := &Report{Seed: cfg.Seed, Contexts: cfg.Contexts}
	rep.Files = Files{
		Corpus:  filepath.Join(cfg.Dir, CorpusFile),
		Index:   filepath.Join(cfg.Dir, IndexFile),
		Queries: filepath.Join(cfg.Dir, QueriesFile),
		Truth:   filepath.Join(cfg.Dir, TruthFile),
		Trace:   filepath.Join(cfg.Dir, TraceFile),
		Plot:    filepath.Join(cfg.Dir, PlotFile),

		Lexicon:   filepath.Join(cfg.Dir, LexiconFile),
		Questions: filepath.Join(cfg.Dir, QuestionsFile),
	}
	w, err := world.Greenhouse(cfg.Seed)
	if err != nil {
		return nil, fmt.Errorf("demo: greenhouse world: %w", err)
	}

	// 1–2. Corpus and index, by the eval harness (real builder).
	logf("sampling %d local contexts of the %d-entity greenhouse and building the index in %s ...", cfg.Contexts, w.NumVars(), cfg.Dir)
	var done func()
	ecfg := eval.Config{Network: w, Seed: cfg.Seed, Contexts: cfg.Contexts, Dir: cfg.Dir, Workers: cfg.Workers, RouterOptions: cfg.RouterOptions}
	if cfg.Progress != nil {
		var event func(graphidx.ProgressEvent)
		ecfg.BuildOptions = []graphidx.BuildOption{graphidx.WithProgress(func(ev graphidx.ProgressEvent) {
			if event == nil { // first event: the corpus is complete
				var size int64 = -1
				if st, err := os.Stat(rep.Files.Corpus); err == nil {
					size = st.Size()
				}
				event, done = cfg.Progress(size)
			}
			if event != nil {
				event(ev)
			}
		})}
	}
	t0 := time.Now()
	bench, err := eval.Prepare(ctx, ecfg)
	if done != nil {
		done()
	}
	if err != nil {
		return nil, fmt.Errorf("demo: %w", err)
	}
	defer bench.Close()
	rep.Timings.Prepare = time.Since(t0)
	logf("index: %d entities, %d pairs from %d contexts (%.1fs)", bench.Index.NumEntities(), bench.Index.NumPairs(),
		bench.Index.NumContexts(), rep.Timings.Prepare.Seconds())

	// 3. Accuracy against exact truth, by the eval harness.
	t0 = time.Now()
	rep.Eval, err = bench.Answer(ctx, nil, cfg.RouterOptions...)
	if err != nil {
		return nil, fmt.Errorf("demo: %w", err)
	}
	rep.Timings.Measure = time.Since(t0)
	logf("measured %d queries against exact truth (%.1fs)", rep.Eval.HeldOut.N+rep.Eval.Supported.N, rep.Timings.Measure.Seconds())

	// 4. The same queries through an instrumented router, traced to a file.
	t0 = time.Now()
	if err := tracedPass(ctx, cfg, w, rep); err != nil {
		return nil, err
	}
	rep.Timings.Route = time.Since(t0)
	logf("routed %d queries with tracing to %s (%.1fs)", rep.HeldOut.Queries+rep.Supported.Queries, rep.Files.Trace, rep.Timings.Route.Seconds())

	// 5. Free-text questions: a lexicon and questions next to the index,
	// and two of them taken from text to a plan.
	if err := textPass(ctx, cfg, w, rep); err != nil {
		return nil, err
	}
	logf("linked %d free-text questions to decisions and plans (%s)", len(rep.Texts), rep.Files.Questions)

	// 6. Plot (the harness's plot of one world).
	sum := eval.Summarize([]eval.Report{rep.Eval})
	sum.Title = fmt.Sprintf("greenhouse demo (seed %d, %d contexts): MSE vs exact truth by route", cfg.Seed, cfg.Contexts)
	if err := sum.WritePlot(rep.Files.Plot); err != nil {
		return nil, fmt.Errorf("demo: %w", err)
	}
	rep.Timings.Total = time.Since(start)
	return rep, nil
}

// tracedPass opens the index in a router configured as the harness's, wraps
// it in otelx instrumentation exporting to an OTLP JSON Lines file, and routes
// every query again, keeping the decisions to explain.
func tracedPass(ctx context.Context, cfg Config, w *world.World, rep *Report) (err error) {
	idx, err := graphidx.Open(rep.Files.Index)
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	model, err := scorer.NewBayes(scorer.WithBeta(rep.Eval.Beta))
	if err != nil {
		idx.Close()
		return fmt.Errorf("demo: %w", err)
	}
	r, err := router.New(idx, append([]router.Option{router.WithModel(model)}, cfg.RouterOptions...)...)
	if err != nil {
		idx.Close()
		return fmt.Errorf("demo: %w", err)
	}
	defer r.Close() // closes idx

	_ = os.Remove(rep.Files.Trace) // the exporter appends; start fresh
	exp, err := otlpfile.NewExporter(ctx, rep.Files.Trace)
	if err != nil {
		return fmt.Errorf("demo: trace file %s: %w", rep.Files.Trace, err)
	}
	tp := sdktrace.NewTracerProvider(
		sdktrace.WithBatcher(exp),
		sdktrace.WithResource(resource.NewSchemaless(attribute.String("service.name", "hopwise-demo"))),
	)
	defer func() {
		sctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), 10*time.Second)
		defer cancel()
		if e := tp.Shutdown(sctx); e != nil && err == nil {
			err = fmt.Errorf("demo: flushing traces to %s: %w", rep.Files.Trace, e)
		}
	}()
	inst, err := otelx.New(otelx.WithTracerProvider(tp), otelx.WithMeterProvider(noop.NewMeterProvider()))
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	res, err := route(ctx, w, r, inst, cfg.Examples)
	if err != nil {
		return err
	}
	rep.HeldOut, rep.Supported, rep.Explained = res.heldOut, res.supported, res.explained
	return nil
}
