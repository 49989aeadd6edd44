package router

import (
	"context"
	"fmt"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/cpuclock"
)

// BenchmarkDecideTextOverhead measures what deciding from a prompt adds to
// an uncached decision, both in the same loop on the same queries of the
// power-law bench index: "decide" is Decide(query); "text" links a prompt
// of about 250 bytes naming both endpoints against a lexicon of every
// entity (50k forms), attaches the observed value to the evidence mention
// (what a three-column lexicon line does), forms the query and decides it.
// The cache is off for both, the two run in alternating order, and the
// times are the thread's CPU time (Linux; wall time elsewhere). The text
// span holds one more clock read than the decide span (the one that ends
// the link time); a clock read's own cost, measured in the same loop
// (clock-ns/op), is taken off the text time, so text/decide compares the
// work alone. text/decide is the ratio of their times; the two decisions
// must agree.
func BenchmarkDecideTextOverhead(b *testing.B) {
	ix, src := benchIndex(b)
	var lx strings.Builder
	for _, e := range src.Entities() {
		fmt.Fprintf(&lx, "%s\t%s\n", strings.ReplaceAll(e.Name, "-", " "), e.Name)
	}
	lex, err := graphidx.ParseLexicon(strings.NewReader(lx.String()), "bench-lexicon")
	if err != nil {
		b.Fatal(err)
	}
	r, err := New(wrapIndex(ix), WithCacheSize(0))
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	qs := benchQueries(src, 4096, 5)
	texts := make([]string, len(qs))
	for i, q := range qs {
		texts[i] = fmt.Sprintf("In the north house this morning the log shows %s switched on after the night cycle. "+
			"Before we change the schedule, what state should we expect for %s over the next hour, "+
			"and is it worth checking anything by hand first?", strings.ReplaceAll(q.From, "-", " "), strings.ReplaceAll(q.To, "-", " "))
		qs[i].Key = ""
	}
	ctx := context.Background()
	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	var tDecide, tText, tLink, tClock time.Duration
	i := 0
	b.ReportAllocs()
	for b.Loop() {
		k := i % len(qs)
		// Alternate which path runs first, so that neither always finds
		// the other's pairs warm in the CPU caches.
		first := i%2 == 0
		i++
		var d Decision
		var err error
		decide := func() {
			t0 := cpuclock.ThreadOrWall()
			d, err = r.Decide(ctx, qs[k])
			tDecide += cpuclock.ThreadOrWall() - t0
			if err != nil {
				b.Fatal(err)
			}
		}
		var td TextDecision
		text := func() {
			t0 := cpuclock.ThreadOrWall()
			ms, err := lex.Link(texts[k])
			tLink += cpuclock.ThreadOrWall() - t0
			if err != nil {
				b.Fatal(err)
			}
			for j := range ms {
				if ms[j].Entity == qs[k].From {
					ms[j].Value, ms[j].HasValue = qs[k].Value, true
				}
			}
			td, err = r.DecideMentions(ctx, ms)
			tText += cpuclock.ThreadOrWall() - t0
			if err != nil {
				b.Fatal(err)
			}
		}
		c0 := cpuclock.ThreadOrWall()
		tClock += cpuclock.ThreadOrWall() - c0
		if first {
			decide()
			text()
		} else {
			text()
			decide()
		}
		if len(td.Decisions) != 1 || td.Queries[0].Query != qs[k] || td.Decisions[0].Mode != d.Mode || td.Decisions[0].Err != d.Err {
			b.Fatalf("query %d: text path %+v disagrees with Decide %v %g", k, td.Queries, d.Mode, d.Err)
		}
	}
	tText -= tClock // the extra clock read inside each text span
	b.ReportMetric(float64(tClock.Nanoseconds())/float64(i), "clock-ns/op")
	b.ReportMetric(float64(tDecide.Nanoseconds())/float64(i), "decide-ns/op")
	b.ReportMetric(float64(tText.Nanoseconds())/float64(i), "text-ns/op")
	b.ReportMetric(float64(tLink.Nanoseconds())/float64(i), "link-ns/op")
	b.ReportMetric(float64(tText)/float64(tDecide), "text/decide")
}
