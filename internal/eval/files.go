package eval

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"github.com/hopwise/hopwise/internal/world"
)

// QueryLine is one line of queries.jsonl, in the batch input format of
// `hopwise route --queries`.
type QueryLine struct {
	ID    string `json:"id"`
	From  string `json:"from"`
	Value string `json:"value"`
	To    string `json:"to"`
}

// TruthLine is one line of truth.jsonl: the exact P(to | from = value) of the
// query with the same id, by value label, and the query's set.
type TruthLine struct {
	ID    string             `json:"id"`
	Set   string             `json:"set"`
	Truth map[string]float64 `json:"truth"`
}

// WriteQueries writes dir/queries.jsonl (every query of the bench, held-out
// first, ids "heldout-N" and "supported-N") and dir/truth.jsonl (the exact
// answers), so that the router can be measured through `hopwise route
// --queries` on dir/index.hwx. Queries whose evidence has probability zero are
// left out. O(queries) exact conditionals (cached by the world).
func (b *Bench) WriteQueries(dir string) (err error) {
	qf, err := os.Create(filepath.Join(dir, "queries.jsonl"))
	if err != nil {
		return fmt.Errorf("eval: %w", err)
	}
	defer func() { err = errors.Join(err, qf.Close()) }()
	tf, err := os.Create(filepath.Join(dir, "truth.jsonl"))
	if err != nil {
		return fmt.Errorf("eval: %w", err)
	}
	defer func() { err = errors.Join(err, tf.Close()) }()
	qw, tw := bufio.NewWriter(qf), bufio.NewWriter(tf)
	qe, te := json.NewEncoder(qw), json.NewEncoder(tw)
	w := b.World
	count := map[string]int{}
	for _, q := range b.queries {
		truth, err := w.TrueConditional(q.from, q.value, q.to)
		if errors.Is(err, world.ErrImpossibleEvidence) {
			continue
		}
		if err != nil {
			return fmt.Errorf("eval: truth: %w", err)
		}
		count[q.set]++
		id := fmt.Sprintf("%s-%d", q.set, count[q.set])
		if err := qe.Encode(QueryLine{ID: id, From: w.Name(q.from), Value: w.Labels(q.from)[q.value], To: w.Name(q.to)}); err != nil {
			return fmt.Errorf("eval: %w", err)
		}
		tm := make(map[string]float64, len(truth))
		for v, l := range w.Labels(q.to) {
			tm[l] = truth[v]
		}
		if err := te.Encode(TruthLine{ID: id, Set: q.set, Truth: tm}); err != nil {
			return fmt.Errorf("eval: %w", err)
		}
	}
	if err := qw.Flush(); err != nil {
		return fmt.Errorf("eval: %w", err)
	}
	if err := tw.Flush(); err != nil {
		return fmt.Errorf("eval: %w", err)
	}
	return nil
}
