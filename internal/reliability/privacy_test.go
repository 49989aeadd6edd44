package reliability

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	sdktrace "go.opentelemetry.io/otel/sdk/trace"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
)

// Greenhouse names of the privacy test: distinctive strings that occur
// nowhere in an OTLP file except where a name or value leaks.
var (
	secretEntities = []string{"bed-tomato-7", "pump-east-basin", "sensor-humid-3", "vent-north-roof", "zone-quarantine"}
	secretValues   = []string{"ajar-wide", "shut-tight"}
)

// secretSource is a complete graph over secretEntities, each pair observed
// in a few contexts with both values.
func secretSource() graphidx.Source {
	n := len(secretEntities)
	ents := make([]graphidx.EntityRecord, n)
	for i, name := range secretEntities {
		ents[i] = graphidx.EntityRecord{Name: name, Values: secretValues, Marginal: []uint64{uint64(4 * (n - 1)), uint64(4 * (n - 1))}}
	}
	return &memSource{
		contexts: uint64(8 * n * (n - 1) / 2),
		ents:     ents,
		pairs: func(fn func(graphidx.PairRecord) error) error {
			for a := range n {
				for b := a + 1; b < n; b++ {
					t := []uint32{3 + uint32(a), 1, 1, 2 + uint32(b)}
					if err := fn(graphidx.PairRecord{A: graphidx.EntityID(a), B: graphidx.EntityID(b), Counts: t}); err != nil {
						return err
					}
				}
			}
			return nil
		},
	}
}

// traceFile routes every query through otelx into an OTLP JSON Lines file
// (synchronous span export) and returns the file bytes.
func traceFile(t *testing.T, r *router.Router, queries []router.Query, opts ...otelx.Option) ([]byte, *otelx.Instrumentation) {
	t.Helper()
	p := filepath.Join(t.TempDir(), "traces.jsonl")
	ctx := context.Background()
	exp, err := otlpfile.NewExporter(ctx, p)
	if err != nil {
		t.Fatal(err)
	}
	tp := sdktrace.NewTracerProvider(sdktrace.WithSyncer(exp))
	in, err := otelx.New(append([]otelx.Option{otelx.WithTracerProvider(tp)}, opts...)...)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range queries {
		_, _ = in.Decide(ctx, r, q)
	}
	if err := tp.Shutdown(ctx); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	return b, in
}

// TestHashedTracesHideEntityNames: with WithEntityHashKey, no entity name
// and no value label appears anywhere in the written trace file, for
// successful decisions (direct and chain, so bridges are covered) and for
// failed ones (unknown entity, unknown value, same entity), whose error
// text names the offending entity. The pseudonyms HashEntity gives do
// appear, so the file is still joinable. Control: without the key, the
// names are in the file (so the check can fail).
func TestHashedTracesHideEntityNames(t *testing.T) {
	t.Parallel()
	ix, err := graphidx.Open(writeIndex(t, t.TempDir(), "secret.hwx", secretSource()))
	if err != nil {
		t.Fatal(err)
	}
	// τ = -1 routes every query with a chain through it, so bridges are
	// recorded.
	r, err := router.New(ix, router.WithGainThreshold(-1))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = r.Close() }) // after the parallel subtests
	var ok []router.Query
	for i, from := range secretEntities {
		for j, to := range secretEntities {
			if i != j {
				ok = append(ok, router.Query{From: from, Value: secretValues[(i+j)%2], To: to, Key: "unit-" + itoa(i*10+j)})
			}
		}
	}
	failing := []router.Query{
		{From: "greenhouse-ghost-entity", Value: secretValues[0], To: secretEntities[0]},
		{From: secretEntities[1], Value: "half-open-valve-state", To: secretEntities[2]},
		{From: secretEntities[3], Value: secretValues[1], To: secretEntities[3]},
	}
	secrets := append(append([]string{"greenhouse-ghost-entity", "half-open-valve-state"}, secretEntities...), secretValues...)
	key := []byte("0123456789abcdef-test-only-key")

	leaks := func(b []byte) []string {
		var found []string
		for _, s := range secrets {
			if bytes.Contains(b, []byte(s)) {
				found = append(found, s)
			}
		}
		return found
	}

	t.Run("decisions", func(t *testing.T) {
		t.Parallel()
		b, in := traceFile(t, r, ok, otelx.WithEntityHashKey(key))
		if l := leaks(b); len(l) > 0 {
			t.Fatalf("hashed trace file contains names %v", l)
		}
		if !bytes.Contains(b, []byte(in.HashEntity(secretEntities[0]))) || !bytes.Contains(b, []byte(`"hopwise.chain.bridges"`)) {
			t.Fatalf("hashed trace file lacks the pseudonyms or the bridges:\n%.600s", b)
		}
		plain, _ := traceFile(t, r, ok)
		if l := leaks(plain); len(l) < len(secretEntities) {
			t.Fatalf("control: unhashed trace names only %v", l)
		}
	})
	t.Run("errors", func(t *testing.T) {
		t.Parallel()
		b, _ := traceFile(t, r, failing, otelx.WithEntityHashKey(key))
		plain, _ := traceFile(t, r, failing)
		if l := leaks(plain); len(l) == 0 {
			t.Fatalf("control: unhashed error spans name nothing")
		}
		if l := leaks(b); len(l) > 0 {
			t.Fatalf("hashed trace file names %v in failed decisions' spans (error text or status)", l)
		}
		if !strings.Contains(string(b), `"hopwise.entity.hash"`) {
			t.Fatalf("error spans lack %s", otelx.KeyEntityHash)
		}
	})
}
