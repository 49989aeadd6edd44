package collectortest

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"sync"
	"testing"
	"time"

	"go.opentelemetry.io/otel/exporters/otlp/otlptrace/otlptracehttp"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/abreport"
	"github.com/hopwise/hopwise/internal/eval"
	"github.com/hopwise/hopwise/internal/traceset"
	"github.com/hopwise/hopwise/internal/tuner"
	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
)

// greenhouse is a small synthetic world with its index built by the real
// builder, shared by the tests of this package.
var greenhouse = sync.OnceValues(func() (*greenhouseWorld, error) {
	dir, err := os.MkdirTemp("", "hopwise-collectortest-")
	if err != nil {
		return nil, err
	}
	b, err := eval.Prepare(context.Background(), eval.Config{
		Seed: 9, World: &world.Config{Vars: 40, Edges: 40, HeldOut: 12}, Contexts: 8000, Dir: dir,
	})
	if err != nil {
		return nil, err
	}
	defer b.Close()
	g := &greenhouseWorld{index: filepath.Join(dir, "index.hwx"), dir: dir}
	w := b.World
	for _, pairs := range [][][2]int{w.HeldOut(), w.Supported()} {
		for _, p := range pairs {
			for _, d := range [][2]int{{p[0], p[1]}, {p[1], p[0]}} {
				for _, v := range w.Labels(d[0]) {
					g.queries = append(g.queries, router.Query{From: w.Name(d[0]), Value: v, To: w.Name(d[1])})
				}
			}
		}
	}
	return g, nil
})

type greenhouseWorld struct {
	index, dir string
	queries    []router.Query
}

func world0(t testing.TB) *greenhouseWorld {
	t.Helper()
	g, err := greenhouse()
	if err != nil {
		t.Fatal(err)
	}
	return g
}

// decide sends n queries (keys from seed) through a router with arms and
// exploration, instrumented by otelx on a tracer provider that exports
// every span both ways given: each exporter gets the same spans in the
// same order. Outcome spans report score 1 with probability 0.6 for a
// direct answer and 0.7 for a chained one.
func (g *greenhouseWorld) decide(t testing.TB, n int, seed uint64, exporters ...sdktrace.SpanExporter) {
	t.Helper()
	ctx := context.Background()
	ix, err := graphidx.Open(g.index)
	if err != nil {
		t.Fatal(err)
	}
	r, err := router.New(ix, router.WithExploration(0.2, "greenhouse"),
		router.WithArms(router.ArmWeight{Arm: router.ArmRouted, Weight: 0.5}, router.ArmWeight{Arm: router.ArmDirectOnly, Weight: 0.5}))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	var opts []sdktrace.TracerProviderOption
	for _, e := range exporters {
		// WithBlocking: a full queue waits rather than drop spans.
		opts = append(opts, sdktrace.WithBatcher(e, sdktrace.WithBlocking()))
	}
	tp := sdktrace.NewTracerProvider(opts...)
	in, err := otelx.New(otelx.WithTracerProvider(tp))
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(seed, 5))
	for i := range n {
		q := g.queries[rng.IntN(len(g.queries))]
		q.Key = fmt.Sprintf("bed-%d-%05d", seed, i)
		d, err := in.Decide(ctx, r, q)
		if err != nil {
			t.Fatal(err)
		}
		p := 0.6
		if d.Mode == router.ModeChain {
			p = 0.7
		}
		score := 0.0
		if rng.Float64() < p {
			score = 1
		}
		if err := in.RecordOutcome(ctx, d, otelx.Outcome{Score: score, InputTokens: 250 + int64(rng.IntN(100)), OutputTokens: 40, Latency: 70 * time.Millisecond}); err != nil {
			t.Fatal(err)
		}
	}
	if err := tp.Shutdown(ctx); err != nil {
		t.Fatal(err)
	}
}

// toCollector is an OTLP/HTTP exporter to the collector's receiver.
func toCollector(t *testing.T, c *Collector) sdktrace.SpanExporter {
	t.Helper()
	e, err := otlptracehttp.New(context.Background(), otlptracehttp.WithEndpoint(c.Endpoint()), otlptracehttp.WithInsecure())
	if err != nil {
		t.Fatal(err)
	}
	return e
}

// analysis is what tune and ab conclude from one trace file, without the
// file names and line counts (the two writers cut lines differently).
type analysis struct {
	Decisions, Outcomes, Duplicates int
	Join                            otelx.JoinStats
	Tune                            []tuner.Policy
	Decision                        tuner.Decision
	Why                             string
	Config                          router.Config
	Calibration                     []tuner.CalibBin
	Arms                            []abreport.Arm
	Diffs                           []abreport.Diff
	SRM                             *abreport.SRM
}

func analyse(t *testing.T, path string) analysis {
	t.Helper()
	s, err := traceset.Load([]string{path}, "")
	if err != nil {
		t.Fatal(err)
	}
	to := tuner.DefaultOptions()
	to.Reps = 100
	tr, err := tuner.Run(s, to)
	if err != nil {
		t.Fatal(err)
	}
	ao := abreport.DefaultOptions()
	ao.Reps = 200
	ao.Allocation = map[string]float64{router.ArmRouted: 0.5, router.ArmDirectOnly: 0.5}
	ar, err := abreport.Compare(s, ao)
	if err != nil {
		t.Fatal(err)
	}
	a := analysis{Decisions: s.Stats.Decisions, Outcomes: s.Stats.Outcomes, Duplicates: s.Stats.DuplicateSpans, Join: s.Join,
		Tune: tr.Policies, Decision: tr.Decision, Why: tr.Why, Calibration: tr.Calibration, Arms: ar.Arms, Diffs: ar.Diffs, SRM: ar.SRM}
	if tr.Config != nil {
		a.Config = *tr.Config
	}
	return a
}

// TestCollectorFileMatchesOtlpfile: decisions exported over OTLP/HTTP
// through the Collector's OTLP receiver and file exporter, and the same
// decisions written by hopwise's otlpfile exporter, give tune and ab the
// same result.
func TestCollectorFileMatchesOtlpfile(t *testing.T) {
	t.Parallel()
	g := world0(t)
	dir := t.TempDir()
	ctx := context.Background()
	collected, own := filepath.Join(dir, "collector.jsonl"), filepath.Join(dir, "otlpfile.jsonl")
	col, err := Start(ctx, FileConfig{"path": collected, "append": true, "format": "json"})
	if err != nil {
		t.Fatal(err)
	}
	fileExp, err := otlpfile.NewExporter(ctx, own)
	if err != nil {
		t.Fatal(err)
	}
	g.decide(t, 4000, 1, toCollector(t, col), fileExp)
	if err := col.Shutdown(ctx); err != nil {
		t.Fatal(err)
	}
	want, got := analyse(t, own), analyse(t, collected)
	if want.Decisions != 4000 || want.Outcomes != 4000 || want.Join.Joined != 4000 {
		t.Fatalf("otlpfile output: %d decisions, %d outcomes, %+v", want.Decisions, want.Outcomes, want.Join)
	}
	if !reflect.DeepEqual(got, want) {
		gj, _ := json.MarshalIndent(got, "", " ")
		wj, _ := json.MarshalIndent(want, "", " ")
		t.Fatalf("the collector's file gives another result:\ncollector: %.3000s\notlpfile: %.3000s", gj, wj)
	}
	t.Logf("tune from both files: %s (%s); ab: %d arms, success diff %v", got.Decision, got.Why, len(got.Arms), got.Diffs[0].Success)
}

// TestCollectorRestartNeedsAppend: the file exporter truncates its file
// when it starts unless append is true, so a collector restart loses the
// traces written before it; with append: true both sessions are kept.
func TestCollectorRestartNeedsAppend(t *testing.T) {
	t.Parallel()
	g := world0(t)
	ctx := context.Background()
	for _, appendMode := range []bool{false, true} {
		path := filepath.Join(t.TempDir(), "traces.jsonl")
		for session := range 2 {
			col, err := Start(ctx, FileConfig{"path": path, "append": appendMode, "format": "json"})
			if err != nil {
				t.Fatal(err)
			}
			g.decide(t, 150, uint64(10+session), toCollector(t, col))
			if err := col.Shutdown(ctx); err != nil {
				t.Fatal(err)
			}
		}
		lg, err := otelx.ReadTraceFiles(path)
		if err != nil {
			t.Fatal(err)
		}
		want := 150
		if appendMode {
			want = 300
		}
		if len(lg.Decisions) != want {
			t.Errorf("append %v: %d decisions after a restart, want %d", appendMode, len(lg.Decisions), want)
		}
	}
}

// TestMain removes the shared world's directory.
func TestMain(m *testing.M) {
	code := m.Run()
	if g, err := greenhouse(); err == nil {
		os.RemoveAll(g.dir)
	}
	os.Exit(code)
}

// TestCollectorFormatsNamed: files the file exporter writes with format
// proto, or with zstd compression, are rejected by hopwise's reader at
// line 1 with what they are, not as bad JSON.
func TestCollectorFormatsNamed(t *testing.T) {
	t.Parallel()
	g := world0(t)
	ctx := context.Background()
	for _, c := range []struct {
		file FileConfig
		want string
	}{
		{FileConfig{"format": "proto"}, "likely OTLP protobuf"},
		{FileConfig{"format": "json", "compression": "zstd"}, "zstd-compressed"},
	} {
		path := filepath.Join(t.TempDir(), "traces.jsonl")
		c.file["path"] = path
		col, err := Start(ctx, c.file)
		if err != nil {
			t.Fatal(err)
		}
		g.decide(t, 50, 20, toCollector(t, col))
		if err := col.Shutdown(ctx); err != nil {
			t.Fatal(err)
		}
		_, err = otelx.ReadTraceFiles(path)
		if !errors.Is(err, otlpfile.ErrNotJSONLines) || !strings.Contains(err.Error(), path+":1:") || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v: err = %v, want %q at line 1", c.file, err, c.want)
		}
	}
}
