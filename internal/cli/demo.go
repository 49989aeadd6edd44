package cli

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime/debug"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/demo"
	"github.com/spf13/cobra"
)

func init() { register(newDemoCmd) }

func newDemoCmd() *cobra.Command {
	var cfg demo.Config
	var quiet bool
	cmd := &cobra.Command{
		Use:   "demo [--dir DIR] [--seed N] [--contexts N]",
		Short: "Run the whole job on a generated greenhouse world and measure it against exact truth",
		Long: `demo needs no setup. On an invented greenhouse (zones, vents, pumps, sensors,
crop beds; a Bayesian network with exact answers) it:

  1. samples a corpus of local contexts (DIR/corpus.jsonl),
  2. builds the locality index (DIR/index.hwx) with a progress display,
  3. measures direct, chained and routed estimates of every far-apart
     (held-out) and well-supported query against the exact answer, with the
     same harness as "hopwise eval" (DIR/queries.jsonl, DIR/truth.jsonl),
  4. routes the queries again through the router wrapped in OpenTelemetry
     instrumentation, tracing each decision to DIR/decisions.otlp.jsonl
     (OTLP JSON Lines),
  5. asks every query 4 more times, each time for a new simulated user,
     under A/B arms (routed 50%, direct-only 25%, chain-always 25%) and
     exploration (ε = 0.1), scores each answer against a value drawn from
     the exact answer (one minus half its Brier score) with invented token
     costs, and traces decisions and outcomes to DIR/experiment.otlp.jsonl,
     which "hopwise tune" and "hopwise ab" read,
  6. prints the mean squared errors (averaged over the target's values),
     the share routed to chains and a few explained decisions with their
     bridges, writes DIR/error-by-route.png, and names what to run next.

Far-apart pairs are never observed in the same context, so their direct
estimate has no support; chaining local conditionals through bridges recovers
them. Well-supported pairs are answered directly.

Progress goes to stderr and the results to stdout; --quiet prints only the
accuracy table, the files written and the timings.`,
		Example: `  hopwise demo
  hopwise demo --dir /tmp/gh --seed 7 --contexts 50000`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			if cfg.Seed == 0 {
				return fmt.Errorf("demo: --seed must be non-zero (0 would mean the default seed %d)", demo.DefaultSeed)
			}
			out, stderr := cmd.OutOrStdout(), cmd.ErrOrStderr()
			if !quiet { // progress and stage lines go to stderr, results to stdout
				cfg.Log = stderr
				cfg.Progress = func(size int64) (func(graphidx.ProgressEvent), func()) {
					return newBuildProgress(stderr, size, false) // as hopwise build
				}
			}
			rep, err := demo.Run(cmd.Context(), cfg)
			if err != nil {
				return err
			}
			if quiet {
				rep.Explained = nil
			}
			if err := rep.WriteTable(out); err != nil {
				return err
			}
			fmt.Fprintln(out)
			if err := rep.WriteFiles(out); err != nil {
				return err
			}
			if quiet {
				return nil
			}
			return rep.WriteNext(out, invocation())
		},
	}
	f := cmd.Flags()
	f.StringVar(&cfg.Dir, "dir", demo.DefaultDir, "output directory for the corpus, index, traces and plot")
	f.Int64Var(&cfg.Seed, "seed", demo.DefaultSeed, "seed of the greenhouse world and its corpus (non-zero)")
	f.IntVar(&cfg.Contexts, "contexts", demo.DefaultContexts, fmt.Sprintf("contexts to sample, in [100, %d]", demo.MaxContexts))
	f.IntVar(&cfg.Examples, "explain", 4, "explained decisions to print, in [1, 10]")
	f.BoolVarP(&quiet, "quiet", "q", false, "print only the accuracy table, the files written and the timings (no progress, explained decisions or next steps)")
	return cmd
}

// invocation returns how the reader should run hopwise again: "hopwise"
// when the running binary is the hopwise found on PATH (installed); else,
// in a checkout (./cmd/hopwise exists), "go run ./cmd/hopwise"; else (a
// binary run by "go run <module>/cmd/hopwise@version" from any directory)
// that module command at the running version, "@latest" for a development
// build.
func invocation() string {
	self, err1 := os.Executable()
	onPath, err2 := exec.LookPath("hopwise")
	if err1 == nil && err2 == nil && sameFile(self, onPath) {
		return "hopwise"
	}
	version := ""
	if bi, ok := debug.ReadBuildInfo(); ok {
		version = bi.Main.Version
	}
	return goRunInvocation(".", version)
}

// modulePath is the module of the hopwise command, for "go run" lines
// outside a checkout.
const modulePath = "github.com/hopwise/hopwise"

// goRunInvocation is the "go run" form of invocation for a working
// directory dir and the running module version ("" or "(devel)" when not
// built from a tagged module).
func goRunInvocation(dir, version string) string {
	if fi, err := os.Stat(filepath.Join(dir, "cmd", "hopwise")); err == nil && fi.IsDir() {
		return "go run ./cmd/hopwise"
	}
	if version == "" || version == "(devel)" {
		version = "latest"
	}
	return "go run " + modulePath + "/cmd/hopwise@" + version
}

// sameFile reports whether two paths name the same file after resolving
// symbolic links.
func sameFile(a, b string) bool {
	sa, err1 := os.Stat(a)
	sb, err2 := os.Stat(b)
	if err1 != nil || err2 != nil {
		return false
	}
	if os.SameFile(sa, sb) {
		return true
	}
	ra, err1 := filepath.EvalSymlinks(a)
	rb, err2 := filepath.EvalSymlinks(b)
	return err1 == nil && err2 == nil && ra == rb
}
