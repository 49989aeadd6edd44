package stress

import (
	"os"
	"testing"
)

// Var is the name of the environment variable.
const Var = "HOPWISE_STRESS"

// On reports whether HOPWISE_STRESS=1.
func On() bool { return os.Getenv(Var) == "1" }

// Require skips tb unless HOPWISE_STRESS=1, saying what would run.
func Require(tb testing.TB, what string) {
	tb.Helper()
	if !On() {
		tb.Skipf("%s: set %s=1 to run", what, Var)
	}
}
