package cli

import (
	"context"
	"fmt"
	"os"
	"sort"
	"strings"

	"github.com/spf13/cobra"
)

var commands []func() *cobra.Command

// register adds a command constructor to the root command.
func register(f func() *cobra.Command) { commands = append(commands, f) }

// NewRoot returns the hopwise root command with every registered subcommand.
func NewRoot() *cobra.Command {
	root := &cobra.Command{
		Use:   "hopwise",
		Short: "Route language-model queries direct or through bridge chains",
		Long: `hopwise builds a locality index from a corpus of contexts and decides, per
query, whether a direct answer or a chain through bridge entities is expected
to be more accurate. Run "hopwise demo" for a tour on generated greenhouse data.`,
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	var subs []*cobra.Command
	for _, f := range commands {
		subs = append(subs, f())
	}
	sort.Slice(subs, func(i, j int) bool { return subs[i].Name() < subs[j].Name() })
	root.AddCommand(subs...)
	root.SetFlagErrorFunc(renamedFlagError)
	return root
}

// renamedFlags maps flags that were renamed to their new names.
var renamedFlags = map[string]string{
	"budget":   "expansion-budget", // route, bench: the config field is expansion_budget
	"fallback": "unknown-entity",   // route: the config field is unknown_entity
}

// renamedFlagError turns cobra's "unknown flag: --budget" for a renamed
// flag into an error that names the new flag; other flag errors pass.
func renamedFlagError(cmd *cobra.Command, err error) error {
	name, ok := strings.CutPrefix(err.Error(), "unknown flag: --")
	if !ok {
		return err
	}
	if nw, ok := renamedFlags[name]; ok && cmd.Flags().Lookup(nw) != nil {
		return fmt.Errorf("%s: flag --%s was renamed to --%s", cmd.Name(), name, nw)
	}
	return err
}

// ExitError carries a process exit status through cobra.
type ExitError struct {
	Code int
	Err  error
}

func (e *ExitError) Error() string {
	if e.Err == nil {
		return fmt.Sprintf("exit status %d", e.Code)
	}
	return e.Err.Error()
}

func (e *ExitError) Unwrap() error { return e.Err }

// Main runs the command line and returns the process exit status.
func Main(ctx context.Context, args []string) int {
	root := NewRoot()
	root.SetArgs(args)
	err := root.ExecuteContext(ctx)
	if err == nil {
		return 0
	}
	var ee *ExitError
	if asExit(err, &ee) {
		if ee.Err != nil {
			fmt.Fprintln(os.Stderr, "hopwise:", ee.Err)
		}
		return ee.Code
	}
	fmt.Fprintln(os.Stderr, "hopwise:", err)
	return 1
}
