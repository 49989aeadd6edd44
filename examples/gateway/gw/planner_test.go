package gw_test

import (
	"context"
	"testing"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// TestTextFormerMatchesRouter: the query TextFormer forms is the first one
// router.DecideMentions would decide, for one and for several candidates.
func TestTextFormerMatchesRouter(t *testing.T) {
	t.Parallel()
	ix, err := graphidx.Open(sharedIndex(t))
	if err != nil {
		t.Fatal(err)
	}
	defer ix.Close()
	ix2, err := graphidx.Open(sharedIndex(t))
	if err != nil {
		t.Fatal(err)
	}
	rt, err := router.New(ix2)
	if err != nil {
		t.Fatal(err)
	}
	defer rt.Close()
	lex, err := gw.IndexLexicon(ix)
	if err != nil {
		t.Fatal(err)
	}
	f := gw.TextFormer{Lex: lex, Router: rt, Vocab: ix}
	for _, text := range []string{
		farQuestion,
		nearQuestion,
		"bed-11/moisture-probe is reads-wet. What are zone-3/vent-a and bed-10/leaf-wilt?",
		"zone-3/vent-a and bed-10/leaf-wilt: what are they, now that bed-11/moisture-probe is reads-wet and zone-3/air-temp is hot?",
		"zone-3/air-temp = hot, zone-6/air-temp = cool; zone-4/air-temp?",
	} {
		q, reason, ok := f.Form(context.Background(), text, "")
		if !ok {
			t.Errorf("%q: passed (%s)", text, reason)
			continue
		}
		ms, _ := lex.Link(text)
		for i := range ms { // the values TextFormer attaches, for the router
			if !ms[i].HasValue {
				m := ms[i]
				if r, _, ok := (gw.LexiconFormer{Lex: lex, Vocab: ix}).Form(text[m.Start:]); ok && r.From == m.Entity {
					ms[i].Value, ms[i].HasValue = r.Value, true
				}
			}
		}
		td, err := rt.DecideMentions(context.Background(), ms, router.WithMaxQueries(1))
		if err != nil {
			t.Fatalf("%q: %v", text, err)
		}
		if want := td.Queries[0].Query; q != want {
			t.Errorf("%q: formed %+v, the router decides %+v first", text, q, want)
		}
	}
}
