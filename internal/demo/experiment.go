package demo

import (
	"context"
	"errors"
	"fmt"
	"math/rand/v2"
	"strings"
	"time"

	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
)

// ExperimentFile is the trace file of the experiment pass: decisions under
// A/B arms and exploration, each with its outcome span, the input of
// "hopwise tune" and "hopwise ab".
const ExperimentFile = "experiment.otlp.jsonl"

// Settings of the experiment pass.
const (
	// ExperimentRounds is how many simulated users ask every query.
	ExperimentRounds = 4
	// ExperimentExploration is ε of the routed arm.
	ExperimentExploration = 0.1
)

// ExperimentArms is the A/B allocation of the experiment pass.
var ExperimentArms = []router.ArmWeight{
	{Arm: router.ArmRouted, Weight: 0.5},
	{Arm: router.ArmDirectOnly, Weight: 0.25},
	{Arm: router.ArmChainAlways, Weight: 0.25},
}

// Experiment summarises the experiment pass.
type Experiment struct {
	Decisions int            // decisions traced, each with an outcome span
	ByArm     map[string]int // decisions per arm
	Explored  int            // decisions where exploration overrode the routed policy
	MeanScore float64        // mean outcome score over all decisions
}

// describe is one line on the experiment: decisions per arm, explored
// decisions and the mean outcome score.
func (e Experiment) describe() string {
	var arms []string
	for _, a := range ExperimentArms {
		arms = append(arms, fmt.Sprintf("%s %d", a.Arm, e.ByArm[a.Arm]))
	}
	return fmt.Sprintf("%d decisions with outcomes (%s; %d explored, ε = %g), mean score %.3f",
		e.Decisions, strings.Join(arms, ", "), e.Explored, ExperimentExploration, e.MeanScore)
}

// Invented costs of an answer, for the outcome spans: a direct answer reads
// a prompt of answerInTokens and writes answerOutTokens; each bridge of a
// chained answer adds bridgeInTokens and bridgeOutTokens (its reasoning
// step). Latency is tokenLatency per output token.
const (
	answerInTokens  = 120
	answerOutTokens = 40
	bridgeInTokens  = 40
	bridgeOutTokens = 60
	tokenLatency    = 10 * time.Millisecond
)

// experimentPass asks every demo query ExperimentRounds times, each time for
// a new simulated user (unit key), through a router with ExperimentArms and
// exploration ε = ExperimentExploration, and records each decision's
// outcome against the world's exact answer, all traced to
// rep.Files.Experiment.
//
// The outcome score of an answer p̂ is 1 − ½ Σ_v (p̂_v − 1[v = y])², with y
// drawn from the exact P(to | from = value): one minus half the Brier score
// (Brier 1950, Monthly Weather Review 78:1) of the answer against the value
// that came true, in [0, 1]. Its mean over draws is
// 1 − ½ (Σ_v (p̂_v − p_v)² + 1 − Σ_v p_v²), so the answer with the smaller
// squared error scores more on average. Draws come from a PCG stream of
// cfg.Seed.
func experimentPass(ctx context.Context, cfg Config, w *world.World, rep *Report) (err error) {
	r, inst, done, err := tracedRouter(ctx, cfg, rep, rep.Files.Experiment,
		router.WithArms(ExperimentArms...), router.WithExploration(ExperimentExploration, "hopwise-demo"))
	if err != nil {
		return err
	}
	defer func() {
		if e := done(); e != nil && err == nil {
			err = e
		}
	}()
	qs, _, err := demoQueries(w)
	if err != nil {
		return err
	}
	rng := rand.New(rand.NewPCG(uint64(cfg.Seed), 0x6f7574636f6d65)) // "outcome"
	ex := Experiment{ByArm: map[string]int{}}
	var sumScore float64
	for round := range ExperimentRounds {
		for n, dq := range qs {
			q := dq.query(w, fmt.Sprintf("grower-%d-%04d", round+1, n+1))
			d, err := inst.Decide(ctx, r, q)
			if errors.Is(err, router.ErrUnknownValue) {
				continue // never observed in the corpus: skipped as in the table
			}
			if err == nil {
				err = dq.checkValues(w, d)
			}
			if err != nil {
				return fmt.Errorf("demo: experiment: %s=%s → %s: %w", q.From, q.Value, q.To, err)
			}
			o := outcome(d, dq.truth, rng)
			if err := inst.RecordOutcome(ctx, d, o); err != nil {
				return fmt.Errorf("demo: experiment: outcome of %s: %w", q.Key, err)
			}
			ex.Decisions++
			ex.ByArm[d.Arm]++
			if d.Explored {
				ex.Explored++
			}
			sumScore += o.Score
		}
	}
	if ex.Decisions > 0 {
		ex.MeanScore = sumScore / float64(ex.Decisions)
	}
	rep.Experiment = ex
	return nil
}

// outcome scores the decision's answer against a value drawn from the exact
// answer (see experimentPass) and prices it with the invented token costs.
func outcome(d router.Decision, truth []float64, rng *rand.Rand) otelx.Outcome {
	y, u, acc := len(truth)-1, rng.Float64(), 0.0
	for v, p := range truth {
		if acc += p; u < acc {
			y = v
			break
		}
	}
	var brier float64
	for v, p := range d.Estimate {
		hit := 0.0
		if v == y {
			hit = 1
		}
		brier += (p - hit) * (p - hit)
	}
	m := int64(len(d.Bridges))
	in, out := answerInTokens+bridgeInTokens*m, answerOutTokens+bridgeOutTokens*m
	return otelx.Outcome{
		Score:        min(1, max(0, 1-brier/2)),
		InputTokens:  in,
		OutputTokens: out,
		Latency:      time.Duration(out) * tokenLatency,
	}
}
