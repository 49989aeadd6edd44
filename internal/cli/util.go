package cli

import (
	"errors"
	"fmt"
	"runtime"

	"github.com/spf13/pflag"
)

func asExit(err error, target **ExitError) bool { return errors.As(err, target) }

// workersFlag registers --workers with the same default and meaning in every
// command: 0 (the default) means one goroutine per core, GOMAXPROCS.
func workersFlag(f *pflag.FlagSet, p *int, what string) {
	f.IntVar(p, "workers", 0, what+" (0: one per core)")
}

// resolveWorkers turns a --workers value into a goroutine count: 0 becomes
// GOMAXPROCS, a negative value is an error.
func resolveWorkers(n int) (int, error) {
	switch {
	case n < 0:
		return 0, fmt.Errorf("--workers must not be negative, got %d (0 means one per core)", n)
	case n == 0:
		return runtime.GOMAXPROCS(0), nil
	}
	return n, nil
}
