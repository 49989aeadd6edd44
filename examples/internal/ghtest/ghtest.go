// Package ghtest builds small greenhouse indexes for the examples' tests.
package ghtest

import (
	"bytes"
	"context"
	"fmt"
	"path/filepath"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
	"github.com/hopwise/hopwise/internal/world"
)

// World returns the greenhouse world of seed.
func World(seed int64) (*world.World, error) { return world.Greenhouse(seed) }

// Build samples n local contexts of the greenhouse world of seed (corpus seed
// corpusSeed) and writes their index to dir/name, returning its path. The
// bytes depend only on the arguments.
func Build(dir, name string, seed int64, n int, corpusSeed int64) (string, error) {
	w, err := world.Greenhouse(seed)
	if err != nil {
		return "", err
	}
	cond, err := world.ConditionByName(world.CondLocalGeometric)
	if err != nil {
		return "", err
	}
	var data bytes.Buffer
	if _, err := w.WriteCorpus(context.Background(), &data, n, cond, corpusSeed); err != nil {
		return "", err
	}
	path := filepath.Join(dir, name)
	rd := corpus.NewJSONLReader(&data, "greenhouse.jsonl", graphidx.WithPolicy(graphidx.Strict))
	if _, err := graphidx.Build(context.Background(), rd, path); err != nil {
		return "", fmt.Errorf("ghtest: build %s: %w", path, err)
	}
	return path, nil
}
