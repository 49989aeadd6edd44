package counts

import (
	"errors"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// TestPartialCompileBadOption: Partial.Compile refuses a build option
// outside its domain (ErrBadBuildOption) before compiling anything.
func TestPartialCompileBadOption(t *testing.T) {
	t.Parallel()
	p := NewPartial()
	if _, _, err := p.Compile(graphidx.WithMaxNeighbors(-3)); !errors.Is(err, graphidx.ErrBadBuildOption) {
		t.Errorf("Partial.Compile with WithMaxNeighbors(-3): error %v, want ErrBadBuildOption", err)
	}
}
