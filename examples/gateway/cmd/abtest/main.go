// Command abtest walks through the loop after deployment, over HTTP: it
// starts the simulated model (package simmodel) and the gateway in front of
// it with three A/B arms (routed, direct-only, chain-always) and
// exploration on, sends chat-completions requests in plain words, scores
// each answer against the exact one and reports it with POST /v1/outcomes,
// prints accuracy and token cost per arm as a table, then runs `hopwise
// tune` and `hopwise ab` on the traces and prints the recommended
// thresholds and the A/B verdict.
//
//	cd examples/gateway
//	go run ./cmd/abtest                      # files in ./hopwise-abtest
//	go run ./cmd/abtest -requests 20000 -dir /tmp/ab
//
// The traffic asks questions about the invented greenhouse world, whose exact
// answers are known: an outcome's score is 1 when the answer's value is the
// exact most likely value, else 0, and its cost is the token usage the
// simulated model reports.
//
// This program cannot be copied out of the repository: the exact answers
// come from the greenhouse world in github.com/hopwise/hopwise/internal/world
// (through examples/internal/ghtest) and tune and ab run in-process through
// github.com/hopwise/hopwise/internal/cli, both internal packages. A copy
// would read the exact answers from the truth.jsonl file that `hopwise demo`
// writes and run the hopwise binary instead.
package main

import (
	"context"
	"flag"
	"fmt"
	"os"
	"os/signal"
	"time"
)

func main() {
	var cfg Config
	flag.StringVar(&cfg.Dir, "dir", "hopwise-abtest", "output directory")
	flag.Int64Var(&cfg.Seed, "seed", 1, "greenhouse world and traffic seed")
	flag.IntVar(&cfg.Contexts, "contexts", 30000, "corpus contexts of the index")
	flag.IntVar(&cfg.Requests, "requests", 10000, "simulated requests")
	flag.Float64Var(&cfg.FarShare, "far-share", 0.4, "share of requests about far-apart (held-out) pairs")
	flag.Float64Var(&cfg.Exploration, "exploration", 0.1, "router exploration rate ε")
	flag.Float64Var(&cfg.CostPerToken, "cost-per-token", 2e-4, "price of one token in score units (tune objective score-cost)")
	flag.IntVar(&cfg.Reps, "reps", 400, "bootstrap replicates of tune and ab")
	flag.DurationVar(&cfg.DecideTimeout, "decide-timeout", time.Minute, "bound on each routing decision (a timed-out one is answered directly and logged as a failed span)")
	flag.Parse()
	cfg.Out = os.Stdout
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	if _, err := Run(ctx, cfg); err != nil {
		fmt.Fprintln(os.Stderr, "abtest:", err)
		os.Exit(1)
	}
}
