package otelx

import (
	"context"
	"errors"
	"strconv"
	"strings"
	"sync"
	"testing"

	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/sdk/trace/tracetest"

	"github.com/hopwise/hopwise/router"
)

// spanText is every string a span carries: attribute values, event
// attributes and the status description.
func spanText(s sdktrace.ReadOnlySpan) string {
	var b strings.Builder
	for _, kv := range s.Attributes() {
		b.WriteString(kv.Value.Emit() + "\n")
	}
	for _, e := range s.Events() {
		for _, kv := range e.Attributes {
			b.WriteString(kv.Value.Emit() + "\n")
		}
	}
	b.WriteString(s.Status().Description)
	return b.String()
}

// TestHashedErrorSpansHideNames: with WithEntityHashKey, the span of a
// failed decision (unknown entity, unknown value, from = to) records the
// sentinel error, not the router's text that names the entity or value;
// without the key it records the full text (control).
func TestHashedErrorSpansHideNames(t *testing.T) {
	t.Parallel()
	r := newRouter(t)
	cases := []struct {
		q      router.Query
		secret string
		want   error
	}{
		{router.Query{From: "ghost-vent-77", Value: "open", To: "bed-tomato"}, "ghost-vent-77", router.ErrUnknownEntity},
		{router.Query{From: "vent-north", Value: "half-ajar-9", To: "bed-tomato"}, "half-ajar-9", router.ErrUnknownValue},
		{router.Query{From: "vent-north", Value: "open", To: "vent-north"}, "vent-north", router.ErrSameEntity},
	}
	for _, hashed := range []bool{true, false} {
		rec := tracetest.NewSpanRecorder()
		opts := []Option{WithTracerProvider(sdktrace.NewTracerProvider(sdktrace.WithSpanProcessor(rec)))}
		if hashed {
			opts = append(opts, WithEntityHashKey([]byte("greenhouse-secret-key-01")))
		}
		in, err := New(opts...)
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range cases {
			if _, err := in.Decide(context.Background(), r, c.q); !errors.Is(err, c.want) {
				t.Fatalf("%+v: err %v, want %v (the caller still gets the full error)", c.q, err, c.want)
			}
		}
		spans := rec.Ended()
		if len(spans) != len(cases) {
			t.Fatalf("%d spans, want %d", len(spans), len(cases))
		}
		for i, c := range cases {
			txt := spanText(spans[i])
			if leaked := strings.Contains(txt, c.secret); leaked == hashed {
				t.Errorf("hashed=%v: %q in the span of %+v = %v:\n%s", hashed, c.secret, c.q, leaked, txt)
			}
			if hashed && spans[i].Status().Description != c.want.Error() {
				t.Errorf("hashed status %q, want the sentinel %q", spans[i].Status().Description, c.want)
			}
		}
	}
	if got := (&Instrumentation{hashed: true}).spanError(errors.New("something naming bed-4")); got != errWithheld {
		t.Errorf("unknown error with hashing: %v, want errWithheld", got)
	}
}

// TestHashCacheConcurrentAndBounded: pseudonyms served by the cache equal
// freshly computed HMACs under concurrent use (run with -race), and the
// cache stops growing at maxCachedHashes while names past the bound are
// still hashed correctly.
func TestHashCacheConcurrentAndBounded(t *testing.T) {
	t.Parallel()
	in, err := New(WithEntityHashKey([]byte("greenhouse-cache-key-01")))
	if err != nil {
		t.Fatal(err)
	}
	names := []string{"vent-north", "bed-tomato", "pump-2", "humidity-zone1", "open", "dry"}
	var wg sync.WaitGroup
	for g := range 4 {
		wg.Go(func() {
			for i := range 200 {
				n := names[(i+g)%len(names)]
				if got, want := in.HashEntity(n), in.hmacHex(n); got != want {
					t.Errorf("HashEntity(%q) = %s, want %s", n, got, want)
					return
				}
			}
		})
	}
	wg.Wait()
	for i := range maxCachedHashes + 100 {
		in.HashEntity("bed-" + strconv.Itoa(i))
	}
	if n := in.hashes.n.Load(); n != maxCachedHashes {
		t.Errorf("cache holds %d names, want the bound %d", n, maxCachedHashes)
	}
	past := "bed-" + strconv.Itoa(maxCachedHashes+50)
	if _, ok := in.hashes.get(past); ok {
		t.Errorf("%s cached past the bound", past)
	}
	if in.HashEntity(past) != in.hmacHex(past) {
		t.Errorf("name past the bound hashed wrongly")
	}
}
