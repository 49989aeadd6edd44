package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/examples/gateway/simmodel"
	"github.com/hopwise/hopwise/examples/internal/ghtest"
	"github.com/hopwise/hopwise/graphidx"
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
	// DecideTimeout bounds each routing decision (default one minute). An
	// experiment wants every request decided: a decision that times out is
	// answered directly and logged as a failed span, one unit fewer in its
	// arm; the gateway's serving default (gw.DefaultDecideTimeout) is far
	// shorter, and a loaded machine can miss it now and then.
	DecideTimeout time.Duration
	Out           io.Writer
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
	if c.DecideTimeout == 0 {
		c.DecideTimeout = time.Minute
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
	Index, Traces, Tuned, Plots string
}

// ArmCount is what the traffic loop itself saw per arm.
type ArmCount struct {
	N, Successes, Chained, Passed int
	InputTokens, OutputTokens     int64
}

// Accuracy is the share of correct answers.
func (c *ArmCount) Accuracy() float64 { return float64(c.Successes) / float64(max(c.N, 1)) }

// Wilson returns the Wilson score interval of the accuracy at 95%
// (E. B. Wilson, "Probable inference, the law of succession, and
// statistical inference", JASA 22, 1927): (p̂ + z²/2n ± z√(p̂(1−p̂)/n + z²/4n²)) / (1 + z²/n), z = 1.96.
func (c *ArmCount) Wilson() (lo, hi float64) {
	if c.N == 0 {
		return 0, 1
	}
	const z = 1.959963984540054
	n, p := float64(c.N), c.Accuracy()
	den := 1 + z*z/n
	mid := (p + z*z/(2*n)) / den
	half := z * math.Sqrt(p*(1-p)/n+z*z/(4*n*n)) / den
	return max(mid-half, 0), min(mid+half, 1)
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
		Traces: filepath.Join(cfg.Dir, "traces.otlp.jsonl"),
		Tuned:  filepath.Join(cfg.Dir, "tuned.json"),
		Plots:  filepath.Join(cfg.Dir, "plots"),
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

	// 2. The simulated model, and the gateway in front of it with arms and
	// exploration, traced to a file. The batcher blocks instead of dropping
	// spans: a dropped decision would be unrecorded sampling and bias the
	// off-policy estimates.
	if err := os.Remove(res.Files.Traces); err != nil && !errors.Is(err, os.ErrNotExist) {
		return nil, err
	}
	ix, err := graphidx.Open(res.Files.Index)
	if err != nil {
		return nil, err
	}
	defer ix.Close()
	model, err := simmodel.New(ix, simmodel.Options{Seed: uint64(cfg.Seed)})
	if err != nil {
		return nil, err
	}
	up := httptest.NewServer(model)
	defer up.Close()
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
		IndexPath:      res.Files.Index,
		Upstream:       up.URL + "/v1",
		DecideTimeout:  cfg.DecideTimeout,
		Telemetry:      tel,
		TracerProvider: tp,
		RouterOptions:  []router.Option{router.WithArms(arms...), router.WithExploration(cfg.Exploration, "abtest")},
	})
	if err != nil {
		return nil, err
	}
	defer srv.Close()
	hs := httptest.NewServer(srv.Handler())
	defer hs.Close()

	fmt.Fprintf(out, "2. Sending %d chat requests over HTTP through the gateway to the simulated model (arms routed 50%%, direct-only 25%%, chain-always 25%%; exploration ε = %.2f), each followed by POST /v1/outcomes ...\n",
		cfg.Requests, cfg.Exploration)
	t0 := time.Now()
	if err := traffic(ctx, cfg, w, hs, res); err != nil {
		return nil, err
	}
	if err := tp.Shutdown(ctx); err != nil {
		return nil, fmt.Errorf("flushing traces: %w", err)
	}
	el := time.Since(t0)
	fmt.Fprintf(out, "   %d requests in %.1fs (%.0f req/s); traces with decisions and outcomes in %s\n\n", cfg.Requests, el.Seconds(),
		float64(cfg.Requests)/el.Seconds(), res.Files.Traces)
	printTable(out, res, cfg.CostPerToken)

	// 3. hopwise tune.
	reps := fmt.Sprint(cfg.Reps)
	cpt := fmt.Sprint(cfg.CostPerToken)
	fmt.Fprintf(out, "\n3. hopwise tune --traces %s --objective score-cost --cost-per-token %s --out %s --plots %s\n\n",
		res.Files.Traces, cpt, res.Files.Tuned, res.Files.Plots)
	res.TuneExit, err = hopwise(ctx, out, nil, "tune", "--traces", res.Files.Traces,
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
	abArgs := []string{"ab", "--traces", res.Files.Traces, "--control", router.ArmDirectOnly,
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
	fmt.Fprintf(out, "\nFiles: %s, %s, %s/\n", res.Files.Traces, res.Files.Tuned, res.Files.Plots)
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

// question words a greenhouse question the way a user would.
func question(w *world.World, q query, i int) string {
	from, value, to := w.Name(q.from), w.Labels(q.from)[q.value], w.Name(q.to)
	switch i % 3 {
	case 0:
		return fmt.Sprintf("In the greenhouse, %s is %s. What is the most likely state of %s?", from, value, to)
	case 1:
		return fmt.Sprintf("%s reads %s right now; what should I expect %s to be?", from, value, to)
	}
	return fmt.Sprintf("Given %s = %s, how is %s most likely?", from, value, to)
}

// traffic sends cfg.Requests chat requests over HTTP from cfg.Workers
// clients, scores each answer against the exact one, and reports each
// outcome with POST /v1/outcomes.
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
	type result struct {
		arm, route string
		score      float64
		in, out    int64
	}
	results := make([]result, len(qs))
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
				unit := fmt.Sprintf("unit-%06d", i)
				rep, err := chat(ctx, client, hs.URL, unit, question(w, q, i))
				if err != nil {
					errs[wk] = fmt.Errorf("request %d (%s): %w", i, unit, err)
					return
				}
				truth, err := w.TrueConditional(q.from, q.value, q.to)
				if err != nil {
					errs[wk] = err
					return
				}
				r := result{arm: rep.arm, route: rep.route, in: rep.in, out: rep.out}
				if v, ok := simmodel.ParseAnswer(rep.text); ok && v == w.Labels(q.to)[argmax(truth)] {
					r.score = 1
				}
				results[i] = r
				if rep.route == "pass" {
					continue // no decision to report against
				}
				if err := outcome(ctx, client, hs.URL, unit, r.score); err != nil {
					errs[wk] = fmt.Errorf("outcome of %s: %w", unit, err)
					return
				}
			}
		}()
	}
	wg.Wait()
	if err := errors.Join(append(errs, ctx.Err())...); err != nil {
		return err
	}
	for _, r := range results {
		c := res.Arms[r.arm]
		if c == nil {
			c = &ArmCount{}
			res.Arms[r.arm] = c
		}
		c.N++
		c.Successes += int(r.score)
		c.InputTokens += r.in
		c.OutputTokens += r.out
		switch r.route {
		case "chain":
			c.Chained++
		case "pass":
			c.Passed++
		}
	}
	return nil
}

// printTable prints accuracy and token cost per arm.
func printTable(out io.Writer, res *Result, costPerToken float64) {
	fmt.Fprintln(out, "   arm            requests  accuracy  (Wilson 95%)     chained  mean in  mean out  mean cost")
	for _, a := range arms {
		c := res.Arms[a.Arm]
		if c == nil {
			continue
		}
		lo, hi := c.Wilson()
		n := float64(c.N)
		fmt.Fprintf(out, "   %-14s %8d  %7.1f%%  [%5.1f%%, %5.1f%%]  %6.1f%%  %7.0f  %8.0f  %9.4f\n", a.Arm, c.N, 100*c.Accuracy(), 100*lo, 100*hi,
			100*float64(c.Chained)/n, float64(c.InputTokens)/n, float64(c.OutputTokens)/n,
			costPerToken*float64(c.InputTokens+c.OutputTokens)/n)
	}
	if c := res.Arms[""]; c != nil {
		fmt.Fprintf(out, "   (%d requests had no arm)\n", c.N)
	}
}

// reply is what the client reads from a chat completion.
type reply struct {
	text, arm, route string
	in, out          int64
}

func chat(ctx context.Context, c *http.Client, base, unit, q string) (reply, error) {
	b, err := json.Marshal(map[string]any{"model": "greenhouse-sim",
		"messages": []any{map[string]string{"role": "user", "content": q}}})
	if err != nil {
		return reply{}, err
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, base+"/v1/chat/completions", bytes.NewReader(b))
	if err != nil {
		return reply{}, err
	}
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set(gw.HeaderUnit, unit)
	resp, err := c.Do(req)
	if err != nil {
		return reply{}, err
	}
	defer resp.Body.Close()
	body, err := io.ReadAll(io.LimitReader(resp.Body, 1<<20))
	if err != nil {
		return reply{}, err
	}
	if resp.StatusCode != http.StatusOK {
		return reply{}, fmt.Errorf("status %d: %s", resp.StatusCode, bytes.TrimSpace(body))
	}
	var r simmodel.Completion
	if err := json.Unmarshal(body, &r); err != nil || len(r.Choices) == 0 {
		return reply{}, fmt.Errorf("decoding the completion: %s", bytes.TrimSpace(body))
	}
	return reply{text: r.Choices[0].Message.Content, arm: resp.Header.Get(gw.HeaderArm), route: resp.Header.Get(gw.HeaderRoute),
		in: r.Usage.PromptTokens, out: r.Usage.CompletionTokens}, nil
}

func outcome(ctx context.Context, c *http.Client, base, unit string, score float64) error {
	b, _ := json.Marshal(map[string]any{"unit": unit, "score": score})
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, base+"/v1/outcomes", bytes.NewReader(b))
	if err != nil {
		return err
	}
	resp, err := c.Do(req)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	body, _ := io.ReadAll(io.LimitReader(resp.Body, 1<<16))
	if resp.StatusCode != http.StatusOK {
		return fmt.Errorf("status %d: %s", resp.StatusCode, bytes.TrimSpace(body))
	}
	return nil
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
