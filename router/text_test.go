package router

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// mention simulates a linked mention at byte offset start (values come from
// a three-column lexicon in production).
func mention(entity, value string, start int) graphidx.Mention {
	return graphidx.Mention{Entity: entity, Value: value, HasValue: value != "", Start: start, End: start + 3, Surface: entity}
}

func TestSplitMentions(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name     string
		ms       []graphidx.Mention
		presence bool
		wantEv   []string // entity=value
		wantTg   []string
		wantErr  error
	}{
		{name: "none", wantErr: ErrNoMentions},
		{name: "no value", ms: []graphidx.Mention{mention("a", "", 0), mention("b", "", 5)}, wantErr: ErrNoEvidence},
		{name: "only evidence", ms: []graphidx.Mention{mention("a", "on", 0), mention("b", "x", 5)}, wantErr: ErrNoTarget},
		{name: "target is also evidence", ms: []graphidx.Mention{mention("a", "on", 0), mention("a", "", 5)}, wantErr: ErrNoTarget},
		{name: "one pair", ms: []graphidx.Mention{mention("b", "", 0), mention("a", "on", 5)}, wantEv: []string{"a=on"}, wantTg: []string{"b"}},
		{name: "dedup in first-mention order",
			ms: []graphidx.Mention{mention("c", "", 0), mention("a", "on", 2), mention("c", "", 4), mention("b", "off", 6),
				mention("a", "on", 8), mention("a", "off", 10), mention("d", "", 12)},
			wantEv: []string{"a=on", "b=off", "a=off"}, wantTg: []string{"c", "d"}},
		{name: "presence: first is evidence", presence: true,
			ms:     []graphidx.Mention{mention("p", "", 0), mention("q", "on", 2), mention("p", "", 4), mention("r", "", 6)},
			wantEv: []string{"p="}, wantTg: []string{"q", "r"}},
		{name: "presence: one entity", presence: true, ms: []graphidx.Mention{mention("p", "", 0), mention("p", "", 4)}, wantErr: ErrNoTarget},
	}
	// More distinct mentions than smallSet: the sets switch to maps.
	var many []graphidx.Mention
	var manyEv, manyTg []string
	for i := range 3 * smallSet {
		e := fmt.Sprintf("e%02d", i)
		many = append(many, mention(e, "on", 10*i), mention(e, "on", 10*i+5), mention("t"+e, "", 10*i+7))
		manyEv, manyTg = append(manyEv, e+"=on"), append(manyTg, "t"+e)
	}
	many = append(many, mention("te00", "", 9999), mention("e00", "", 10000))
	tests = append(tests, struct {
		name     string
		ms       []graphidx.Mention
		presence bool
		wantEv   []string
		wantTg   []string
		wantErr  error
	}{name: "many", ms: many, wantEv: manyEv, wantTg: manyTg})
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			ev, tg, err := SplitMentions(tc.ms, tc.presence)
			if tc.wantErr != nil {
				if !errors.Is(err, tc.wantErr) || !errors.Is(err, ErrNoQuery) {
					t.Fatalf("err %v, want %v (and ErrNoQuery)", err, tc.wantErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			var gotEv, gotTg []string
			for _, m := range ev {
				gotEv = append(gotEv, m.Entity+"="+m.Value)
			}
			for _, m := range tg {
				gotTg = append(gotTg, m.Entity)
			}
			if strings.Join(gotEv, ",") != strings.Join(tc.wantEv, ",") || strings.Join(gotTg, ",") != strings.Join(tc.wantTg, ",") {
				t.Fatalf("evidence %v targets %v, want %v %v", gotEv, gotTg, tc.wantEv, tc.wantTg)
			}
		})
	}
}

func TestDecideMentionsOrderAndErrors(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	r, err := New(greenhouse(1))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	// vent=open with targets bed (never together: support 0), humidity
	// (support 200) and pump (support 6).
	ms := []graphidx.Mention{mention("humidity-zone1", "", 0), mention("vent-north", "open", 10),
		mention("pump-2", "", 20), mention("bed-tomato", "", 30)}
	td, err := r.DecideMentions(ctx, ms)
	if err != nil {
		t.Fatal(err)
	}
	var order []string
	for i, q := range td.Queries {
		order = append(order, q.To)
		d := td.Decisions[i]
		want, err := r.Decide(ctx, q.Query)
		if err != nil || d.Mode != want.Mode || d.Err != want.Err || d.Direct.Support != q.Support {
			t.Errorf("query %d: decision %v err %g support %d, Decide gives %v %g (%v)", i, d.Mode, d.Err, q.Support, want.Mode, want.Err, err)
		}
		if q.From != "vent-north" || q.Value != "open" {
			t.Errorf("query %d from %s=%s", i, q.From, q.Value)
		}
	}
	if got := strings.Join(order, ","); got != "bed-tomato,pump-2,humidity-zone1" {
		t.Errorf("order %s, want least support first: bed-tomato (0), pump-2 (6), humidity-zone1 (200)", got)
	}
	if len(td.Mentions) != 4 || td.PresenceOnly || td.Dropped != 0 {
		t.Errorf("mentions %d presence %v dropped %d", len(td.Mentions), td.PresenceOnly, td.Dropped)
	}

	td, err = r.DecideMentions(ctx, ms, WithMaxQueries(2), WithTextKey("unit-7"))
	if err != nil || len(td.Decisions) != 2 || td.Dropped != 1 || td.Decisions[0].Key != "unit-7" {
		t.Errorf("capped: %d decisions, dropped %d, key %q, %v", len(td.Decisions), td.Dropped, td.Decisions[0].Key, err)
	}
	if _, err := r.DecideMentions(ctx, ms, WithMaxQueries(0)); !errors.Is(err, ErrBadOption) {
		t.Errorf("WithMaxQueries(0): %v", err)
	}

	bad := []graphidx.Mention{mention("vent-north", "ajar", 0), mention("bed-tomato", "", 9)}
	_, err = r.DecideMentions(ctx, bad)
	if !errors.Is(err, ErrUnknownValue) || !strings.Contains(err.Error(), `the index knows "closed", "open"`) {
		t.Errorf("unknown value: %v", err)
	}
	var crowd []graphidx.Mention
	crowd = append(crowd, mention("vent-north", "open", 0))
	for i := range MaxTextEntities + 1 {
		crowd = append(crowd, mention(fmt.Sprintf("bed-%03d", i), "", 10+i))
	}
	if _, err := r.DecideMentions(ctx, crowd); !errors.Is(err, ErrTooManyMentions) {
		t.Errorf("%d targets: %v", MaxTextEntities+1, err)
	}
	unknown := []graphidx.Mention{mention("vent-south", "open", 0), mention("bed-tomato", "", 9)}
	if _, err := r.DecideMentions(ctx, unknown); !errors.Is(err, ErrUnknownEntity) || !strings.Contains(err.Error(), "vent-south") {
		t.Errorf("unknown entity: %v", err)
	}
	fb, err := New(greenhouse(1), WithFallback(ModeDirect))
	if err != nil {
		t.Fatal(err)
	}
	defer fb.Close()
	td, err = fb.DecideMentions(ctx, append(unknown, mention("vent-north", "ajar", 20)))
	if err != nil || len(td.Decisions) != 2 {
		t.Fatalf("fallback: %v, %d decisions", err, len(td.Decisions))
	}
	for _, d := range td.Decisions {
		if c := d.Reason.Code; c != ReasonUnknownEntityFallback && c != ReasonUnknownValueFallback {
			t.Errorf("fallback reason %q", c)
		}
	}
}

func TestDecideTextPresenceOnly(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	lex, err := graphidx.ParseLexicon(strings.NewReader("north vent\tvent-north\npump two\tpump-2\nbed four\tbed-4\n"), "lex.tsv")
	if err != nil {
		t.Fatal(err)
	}
	r, err := New(presenceGraph(false))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	td, err := r.DecideText(ctx, lex, "With the North vent running, what happens to bed four? Pump two is near.")
	if err != nil {
		t.Fatal(err)
	}
	if !td.PresenceOnly || len(td.Mentions) != 3 || len(td.Queries) != 2 {
		t.Fatalf("presence %v, %d mentions, %d queries", td.PresenceOnly, len(td.Mentions), len(td.Queries))
	}
	// bed-4 (support 2) before pump-2 (support 300).
	if q := td.Queries[0]; q.From != "vent-north" || q.Value != graphidx.PresentValue || q.To != "bed-4" || q.Support != 2 {
		t.Errorf("first query %+v", q.Query)
	}
	if td.Decisions[0].Mode != ModeChain || td.Decisions[0].Bridges[0] != "pump-2" {
		t.Errorf("decision %v via %v", td.Decisions[0].Mode, td.Decisions[0].Bridges)
	}
	valued, err := New(greenhouse(1))
	if err != nil {
		t.Fatal(err)
	}
	defer valued.Close()
	if _, err := valued.DecideText(ctx, lex, "the north vent and bed four"); !errors.Is(err, ErrNoEvidence) {
		t.Errorf("valued index, mentions without values: %v", err)
	}
	if _, err := r.DecideText(ctx, lex, "nothing here"); !errors.Is(err, ErrNoMentions) {
		t.Errorf("no mentions: %v", err)
	}
	if _, err := r.DecideText(ctx, nil, "x"); !errors.Is(err, ErrBadOption) {
		t.Errorf("nil lexicon: %v", err)
	}
	if _, err := r.DecideText(ctx, lex, "bad \xff byte"); !errors.Is(err, graphidx.ErrInvalidText) {
		t.Errorf("invalid text: %v", err)
	}
}

// TestDecideMentionsDuringSwap: text decisions stay consistent while the
// index is swapped between a valued and a presence-only one: each call
// forms its queries under one rule and every decision succeeds or names a
// documented error.
func TestDecideMentionsDuringSwap(t *testing.T) {
	t.Parallel()
	r, err := New(greenhouse(1))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	// Both graphs hold vent-north and pump-2; the valued one reads "open"
	// as a value, the presence-only one ignores it.
	ms := []graphidx.Mention{mention("vent-north", "open", 0), mention("pump-2", "", 20)}
	done := make(chan struct{})
	go func() {
		defer close(done)
		for i := range 40 {
			g := Graph(greenhouse(uint64(10 + i)))
			if i%2 == 0 {
				g = presenceGraph(false)
			}
			if err := r.Swap(g); err != nil {
				t.Error(err)
				return
			}
		}
	}()
	defer func() { <-done }() // before r.Close
	ctx := context.Background()
	for range 400 {
		td, err := r.DecideMentions(ctx, ms)
		if err != nil {
			t.Error(err)
			break
		}
		for i, q := range td.Queries {
			if td.PresenceOnly != (q.Value == graphidx.PresentValue) {
				t.Fatalf("query %d %+v under presence=%v", i, q.Query, td.PresenceOnly)
			}
		}
	}
}

// TestFormQueriesMatchesDecideMentions: FormQueries gives exactly the
// queries DecideMentions decides, in its order, with their supports, also
// for one pair (where DecideMentions takes the support from the decision),
// and the no-query errors without deciding anything.
func TestFormQueriesMatchesDecideMentions(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	valued, err := New(greenhouse(1))
	if err != nil {
		t.Fatal(err)
	}
	defer valued.Close()
	presence, err := New(presenceGraph(false))
	if err != nil {
		t.Fatal(err)
	}
	defer presence.Close()
	for _, tc := range []struct {
		name string
		r    *Router
		ms   []graphidx.Mention
	}{
		{"three targets", valued, []graphidx.Mention{mention("humidity-zone1", "", 0), mention("vent-north", "open", 10),
			mention("pump-2", "", 20), mention("bed-tomato", "", 30)}},
		{"one pair", valued, []graphidx.Mention{mention("vent-north", "open", 0), mention("pump-2", "", 20)}},
		{"two evidence", valued, []graphidx.Mention{mention("vent-north", "open", 0), mention("pump-2", "", 5),
			mention("vent-north", "closed", 10), mention("bed-tomato", "", 30), mention("pump-2", "", 40)}},
		{"unknown target", valued, []graphidx.Mention{mention("vent-north", "open", 0), mention("bed-unknown", "", 9),
			mention("pump-2", "", 20)}},
		{"presence", presence, []graphidx.Mention{mention("vent-north", "", 0), mention("pump-2", "", 10), mention("bed-4", "", 20)}},
	} {
		qs, po, err := tc.r.FormQueries(tc.ms)
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		td, derr := tc.r.DecideMentions(ctx, tc.ms, WithMaxQueries(MaxTextEntities))
		if po != td.PresenceOnly || len(qs) != len(td.Queries) {
			t.Fatalf("%s: presence %v, %d queries; DecideMentions %v, %d (%v)", tc.name, po, len(qs), td.PresenceOnly, len(td.Queries), derr)
		}
		for i := range qs {
			want := td.Queries[i]
			want.Key = ""
			if qs[i] != want {
				t.Errorf("%s: query %d %+v, DecideMentions %+v", tc.name, i, qs[i], want)
			}
		}
		if len(qs) == 1 && qs[0].Support == 0 {
			t.Errorf("%s: one pair without its support", tc.name)
		}
	}
	for _, tc := range []struct {
		ms   []graphidx.Mention
		want error
	}{
		{nil, ErrNoMentions},
		{[]graphidx.Mention{mention("vent-north", "", 0), mention("pump-2", "", 9)}, ErrNoEvidence},
		{[]graphidx.Mention{mention("vent-north", "open", 0), mention("vent-north", "", 9)}, ErrNoTarget},
	} {
		if _, _, err := valued.FormQueries(tc.ms); !errors.Is(err, tc.want) || !errors.Is(err, ErrNoQuery) {
			t.Errorf("%v: %v, want %v", tc.ms, err, tc.want)
		}
	}
	closed, err := New(greenhouse(1))
	if err != nil {
		t.Fatal(err)
	}
	closed.Close()
	if _, _, err := closed.FormQueries([]graphidx.Mention{mention("vent-north", "open", 0)}); !errors.Is(err, ErrClosed) {
		t.Errorf("closed router: %v", err)
	}
}
