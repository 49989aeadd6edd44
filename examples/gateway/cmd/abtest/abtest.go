package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/examples/internal/ghtest"
	"github.com/hopwise/hopwise/internal/cli"
	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/sdk/resource"
	sdktrace "go.opentelemetry.io/otel/sdk/trace"
)

// Arm allocation of the experiment.
var arms = []router.ArmWeight{
	{Arm: router.ArmRouted, Weight: 0.5},
	{Arm: router.ArmDirectOnly, Weight: 0.25},
	{Arm: router.ArmChainAlways, Weight: 0.25},
}

// Config configures Run. Zero fields take the defaults of the command's flags.
type Config struct {
	Dir          string
	Seed         int64
	Contexts     int
	Requests     int
	FarShare     float64
	Exploration  float64
	CostPerToken float64
	Reps         int
	Workers      int // concurrent clients (default 4)
	Out          io.Writer
}

func (c *Config) defaults() error {
	if c.Dir == "" {
		c.Dir = "hopwise-abtest"
	}
	if c.Seed == 0 {
		c.Seed = 1
	}
	if c.Contexts == 0 {
		c.Contexts = 30000
	}
	if c.Requests == 0 {
		c.Requests = 10000
	}
	if c.FarShare == 0 {
		c.FarShare = 0.4
	}
	if c.Exploration == 0 {
		c.Exploration = 0.1
	}
	if c.CostPerToken == 0 {
		c.CostPerToken = 2e-4
	}
	if c.Reps == 0 {
		c.Reps = 400
	}
	if c.Workers == 0 {
		c.Workers = 4
	}
	if c.Out == nil {
		c.Out = io.Discard
	}
	switch {
	case c.Contexts < 1000:
		return fmt.Errorf("contexts %d < 1000", c.Contexts)
	case c.Requests < 100 || c.Requests > 10_000_000:
		return fmt.Errorf("requests %d outside [100, 10000000]", c.Requests)
	case c.FarShare < 0 || c.FarShare > 1:
		return fmt.Errorf("far-share %v outside [0, 1]", c.FarShare)
	case c.Exploration <= 0 || c.Exploration > router.MaxExploration:
		return fmt.Errorf("exploration %v outside (0, %v]: tune needs exploration", c.Exploration, router.MaxExploration)
	case c.CostPerToken < 0:
		return fmt.Errorf("cost-per-token %v < 0", c.CostPerToken)
	case c.Workers < 1 || c.Workers > 64:
		return fmt.Errorf("workers %d outside [1, 64]", c.Workers)
	}
	return nil
}

// Files are the paths Run wrote.
type Files struct {
	Index, Traces, Outcomes, Tuned, Plots string
}

// ArmCount is what the traffic loop itself saw per arm.
type ArmCount struct {
	N, Successes, Chained int
	Tokens                int64
}

// Verdict is one arm compared with the control, from `hopwise ab --json`.
type Verdict struct {
	Arm, Control  string
	Diff, Lo, Hi  float64 // success proportion difference (Newcombe)
	CostDiff      float64 // mean cost difference (tokens × cost-per-token)
	Better, Worse bool
}

// Result is what Run found.
type Result struct {
	Files    Files
	Arms     map[string]*ArmCount
	TuneExit int
	Tuned    *router.Config // nil when tune could not recommend
	ABExit   int
	Verdicts []Verdict
	SRM      bool // sample-ratio mismatch flagged
}

// Run builds a greenhouse index, serves it with the gateway code, sends the
// simulated traffic, then runs hopwise tune and hopwise ab on the logs.
func Run(ctx context.Context, cfg Config) (*Result, error) {
	if err := cfg.defaults(); err != nil {
		return nil, err
	}
	out := cfg.Out
	if err := os.MkdirAll(cfg.Dir, 0o755); err != nil {
		return nil, err
	}
	res := &Result{Arms: map[string]*ArmCount{}, Files: Files{
		Traces:   filepath.Join(cfg.Dir, "traces.otlp.jsonl"),
		Outcomes: filepath.Join(cfg.Dir, "outcomes.jsonl"),
		Tuned:    filepath.Join(cfg.Dir, "tuned.json"),
		Plots:    filepath.Join(cfg.Dir, "plots"),
	}}
	fmt.Fprintf(out, "1. Building a greenhouse index from %d contexts ...\n", cfg.Contexts)
	var err error
	if res.Files.Index, err = ghtest.Build(cfg.Dir, "index.hwx", cfg.Seed, cfg.Contexts, cfg.Seed); err != nil {
		return nil, err
	}
	w, err := ghtest.World(cfg.Seed)
	if err != nil {
		return nil, err
	}

	// 2. The gateway with arms and exploration, traced to a file. The
	// batcher blocks instead of dropping spans: a dropped decision would be
	// unrecorded sampling and bias the off-policy estimates.
	for _, p := range []string{res.Files.Traces, res.Files.Outcomes} {
		if err := os.Remove(p); err != nil && !errors.Is(err, os.ErrNotExist) {
			return nil, err
		}
	}
	exp, err := otlpfile.NewExporter(ctx, res.Files.Traces)
	if err != nil {
		return nil, err
	}
	tp := sdktrace.NewTracerProvider(sdktrace.WithBatcher(exp, sdktrace.WithBlocking()),
		sdktrace.WithResource(resource.NewSchemaless(attribute.String("service.name", "hopwise-abtest"))))
	defer tp.Shutdown(context.WithoutCancel(ctx))
	tel, err := otelx.New(otelx.WithTracerProvider(tp))
	if err != nil {
		return nil, err
	}
	srv, err := gw.New(gw.Config{
		IndexPath:     res.Files.Index,
		Telemetry:     tel,
		SimOptions:    gw.SimOptions{Seed: uint64(cfg.Seed)},
		RouterOptions: []router.Option{router.WithArms(arms...), router.WithExploration(cfg.Exploration, "abtest")},
	})
	if err != nil {
		return nil, err
	}
	defer srv.Close()
	hs := httptest.NewServer(srv.Handler())
	defer hs.Close()

	fmt.Fprintf(out, "2. Sending %d requests through the gateway (arms routed 50%%, direct-only 25%%, chain-always 25%%; exploration ε = %.2f) ...\n",
		cfg.Requests, cfg.Exploration)
	t0 := time.Now()
	if err := traffic(ctx, cfg, w, hs, res); err != nil {
		return nil, err
	}
	if err := tp.Shutdown(ctx); err != nil {
		return nil, fmt.Errorf("flushing traces: %w", err)
	}
	el := time.Since(t0)
	fmt.Fprintf(out, "   %d requests in %.1fs (%.0f req/s); traces %s, outcomes %s\n", cfg.Requests, el.Seconds(),
		float64(cfg.Requests)/el.Seconds(), res.Files.Traces, res.Files.Outcomes)
	fmt.Fprintln(out, "   arm            requests  success  chained  mean tokens")
	for _, a := range arms {
		c := res.Arms[a.Arm]
		if c == nil {
			continue
		}
		fmt.Fprintf(out, "   %-14s %8d  %6.1f%%  %6.1f%%  %11.0f\n", a.Arm, c.N, 100*float64(c.Successes)/float64(c.N),
			100*float64(c.Chained)/float64(c.N), float64(c.Tokens)/float64(c.N))
	}

	// 3. hopwise tune.
	reps := fmt.Sprint(cfg.Reps)
	cpt := fmt.Sprint(cfg.CostPerToken)
	fmt.Fprintf(out, "\n3. hopwise tune --traces %s --outcomes %s --objective score-cost --cost-per-token %s --out %s --plots %s\n\n",
		res.Files.Traces, res.Files.Outcomes, cpt, res.Files.Tuned, res.Files.Plots)
	res.TuneExit, err = hopwise(ctx, out, nil, "tune", "--traces", res.Files.Traces, "--outcomes", res.Files.Outcomes,
		"--objective", "score-cost", "--cost-per-token", cpt, "--out", res.Files.Tuned, "--plots", res.Files.Plots,
		"--tau-points", "9", "--max-hops", "1,3", "--reps", reps, "--seed", fmt.Sprint(cfg.Seed))
	if err != nil {
		return nil, err
	}
	switch res.TuneExit {
	case 0:
		c, err := router.LoadConfig(res.Files.Tuned)
		if err != nil {
			return nil, fmt.Errorf("reading the recommendation: %w", err)
		}
		res.Tuned = &c
		fmt.Fprintf(out, "\n   Recommended thresholds: gain_threshold %.4g, max_bridges %d (written to %s)\n", c.GainThreshold, c.MaxBridges, res.Files.Tuned)
	case 2:
		fmt.Fprintln(out, "\n   tune could not support any policy with these logs (see above); send more traffic or raise exploration.")
	default:
		return nil, fmt.Errorf("hopwise tune exited with status %d", res.TuneExit)
	}

	// 4. hopwise ab: the readable report, then the verdict from its JSON.
	alloc := "routed=0.5,direct-only=0.25,chain-always=0.25"
	abArgs := []string{"ab", "--traces", res.Files.Traces, "--outcomes", res.Files.Outcomes, "--control", router.ArmDirectOnly,
		"--allocation", alloc, "--cost-per-token", cpt, "--reps", reps, "--seed", fmt.Sprint(cfg.Seed)}
	fmt.Fprintf(out, "\n4. hopwise %s\n\n", strings.Join(abArgs, " "))
	if res.ABExit, err = hopwise(ctx, out, nil, abArgs...); err != nil {
		return nil, err
	}
	if res.ABExit != 0 {
		return nil, fmt.Errorf("hopwise ab exited with status %d", res.ABExit)
	}
	var js bytes.Buffer
	if code, err := hopwise(ctx, &js, nil, append(abArgs, "--json")...); err != nil || code != 0 {
		return nil, fmt.Errorf("hopwise ab --json: status %d, %v", code, err)
	}
	if err := verdicts(js.Bytes(), res); err != nil {
		return nil, err
	}
	fmt.Fprintln(out, "\nA/B verdict (success = most likely value correct; Newcombe 95% interval of the difference):")
	for _, v := range res.Verdicts {
		word := "no significant difference from"
		if v.Better {
			word = "significantly better than"
		} else if v.Worse {
			word = "significantly worse than"
		}
		fmt.Fprintf(out, "  %-13s %s %s: %+.3f [%+.3f, %+.3f], cost %+.4f per request\n", v.Arm, word, v.Control, v.Diff, v.Lo, v.Hi, v.CostDiff)
	}
	if res.SRM {
		fmt.Fprintln(out, "  warning: sample-ratio mismatch; the assignment does not match the allocation")
	}
	fmt.Fprintf(out, "\nFiles: %s, %s, %s, %s/\n", res.Files.Traces, res.Files.Outcomes, res.Files.Tuned, res.Files.Plots)
	return res, nil
}

// hopwise runs the hopwise command line in-process, writing its output to out.
func hopwise(ctx context.Context, out io.Writer, errw io.Writer, args ...string) (int, error) {
	root := cli.NewRoot()
	if errw == nil {
		errw = out
	}
	root.SetOut(out)
	root.SetErr(errw)
	root.SetArgs(args)
	err := root.ExecuteContext(ctx)
	if err == nil {
		return 0, nil
	}
	var ee *cli.ExitError
	if errors.As(err, &ee) {
		if ee.Err != nil {
			fmt.Fprintln(errw, "hopwise:", ee.Err)
		}
		return ee.Code, nil
	}
	return 1, fmt.Errorf("hopwise %s: %w", args[0], err)
}

type query struct {
	from, to, value int
}

// traffic sends cfg.Requests requests over HTTP from cfg.Workers clients and
// writes one outcome line per request, in request order.
func traffic(ctx context.Context, cfg Config, w *world.World, hs *httptest.Server, res *Result) error {
	rng := rand.New(rand.NewPCG(uint64(cfg.Seed), 0xab7e57))
	far, near := w.HeldOut(), w.Supported()
	qs := make([]query, cfg.Requests)
	for i := range qs {
		pairs := near
		if rng.Float64() < cfg.FarShare {
			pairs = far
		}
		p := pairs[rng.IntN(len(pairs))]
		if rng.IntN(2) == 1 {
			p[0], p[1] = p[1], p[0]
		}
		qs[i] = query{from: p[0], to: p[1], value: rng.IntN(w.Card(p[0]))}
	}
	type outcome struct {
		Key          string  `json:"key"`
		Score        float64 `json:"score"`
		InputTokens  int64   `json:"input_tokens"`
		OutputTokens int64   `json:"output_tokens"`
		LatencyMs    float64 `json:"latency_ms"`
	}
	outs := make([]outcome, len(qs))
	arm := make([]string, len(qs))
	chained := make([]bool, len(qs))
	errs := make([]error, cfg.Workers)
	var next int
	var mu sync.Mutex
	var wg sync.WaitGroup
	client := hs.Client()
	for wk := range cfg.Workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				mu.Lock()
				i := next
				next++
				mu.Unlock()
				if i >= len(qs) || ctx.Err() != nil {
					return
				}
				q := qs[i]
				req := gw.AskRequest{From: w.Name(q.from), Value: w.Labels(q.from)[q.value], To: w.Name(q.to), Key: fmt.Sprintf("unit-%06d", i)}
				resp, err := ask(ctx, client, hs.URL, req)
				if err != nil {
					errs[wk] = fmt.Errorf("request %d (%s=%s → %s): %w", i, req.From, req.Value, req.To, err)
					return
				}
				truth, err := w.TrueConditional(q.from, q.value, q.to)
				if err != nil {
					errs[wk] = err
					return
				}
				score := 0.0
				if resp.Answer.Value == w.Labels(q.to)[argmax(truth)] {
					score = 1
				}
				outs[i] = outcome{Key: req.Key, Score: score, InputTokens: resp.Usage.InputTokens,
					OutputTokens: resp.Usage.OutputTokens, LatencyMs: resp.ElapsedMs}
				arm[i], chained[i] = resp.Route.Arm, resp.Route.Mode == "chain"
			}
		}()
	}
	wg.Wait()
	if err := errors.Join(append(errs, ctx.Err())...); err != nil {
		return err
	}
	f, err := os.Create(res.Files.Outcomes)
	if err != nil {
		return err
	}
	bw := bufio.NewWriter(f)
	enc := json.NewEncoder(bw)
	for i, o := range outs {
		if err := enc.Encode(o); err != nil {
			f.Close()
			return err
		}
		c := res.Arms[arm[i]]
		if c == nil {
			c = &ArmCount{}
			res.Arms[arm[i]] = c
		}
		c.N++
		c.Successes += int(o.Score)
		c.Tokens += o.InputTokens + o.OutputTokens
		if chained[i] {
			c.Chained++
		}
	}
	if err := bw.Flush(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

func ask(ctx context.Context, c *http.Client, base string, q gw.AskRequest) (gw.AskResponse, error) {
	b, err := json.Marshal(q)
	if err != nil {
		return gw.AskResponse{}, err
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, base+"/v1/answer", bytes.NewReader(b))
	if err != nil {
		return gw.AskResponse{}, err
	}
	req.Header.Set("Content-Type", "application/json")
	resp, err := c.Do(req)
	if err != nil {
		return gw.AskResponse{}, err
	}
	defer resp.Body.Close()
	body, err := io.ReadAll(io.LimitReader(resp.Body, 1<<20))
	if err != nil {
		return gw.AskResponse{}, err
	}
	if resp.StatusCode != http.StatusOK {
		return gw.AskResponse{}, fmt.Errorf("status %d: %s", resp.StatusCode, bytes.TrimSpace(body))
	}
	var r gw.AskResponse
	if err := json.Unmarshal(body, &r); err != nil {
		return gw.AskResponse{}, fmt.Errorf("decoding the answer: %w", err)
	}
	return r, nil
}

func argmax(p []float64) int {
	best := 0
	for i, v := range p {
		if v > p[best] {
			best = i
		}
	}
	return best
}

// verdicts reads the arm comparisons of `hopwise ab --json`.
func verdicts(js []byte, res *Result) error {
	var rep struct {
		Diffs []struct {
			Arm     string `json:"arm"`
			Control string `json:"control"`
			Success struct {
				Est, Lo, Hi float64
			} `json:"success_diff"`
			Cost *struct {
				Est float64 `json:"est"`
			} `json:"cost_diff_welch"`
		} `json:"diffs"`
		SRM *struct {
			Mismatch bool `json:"mismatch"`
		} `json:"srm"`
	}
	if err := json.Unmarshal(js, &rep); err != nil {
		return fmt.Errorf("reading hopwise ab --json: %w", err)
	}
	if len(rep.Diffs) == 0 {
		return errors.New("hopwise ab --json reported no arm comparisons")
	}
	for _, d := range rep.Diffs {
		v := Verdict{Arm: d.Arm, Control: d.Control, Diff: d.Success.Est, Lo: d.Success.Lo, Hi: d.Success.Hi,
			Better: d.Success.Lo > 0, Worse: d.Success.Hi < 0}
		if d.Cost != nil {
			v.CostDiff = d.Cost.Est
		}
		res.Verdicts = append(res.Verdicts, v)
	}
	res.SRM = rep.SRM != nil && rep.SRM.Mismatch
	return nil
}
