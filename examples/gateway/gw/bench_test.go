package gw_test

import (
	"context"
	"testing"

	"github.com/hopwise/hopwise/examples/gateway/gw"
)

// BenchmarkAsk measures one in-process /v1/answer (decision through the
// instrumentation, traced to a file, plus the simulated answer) on a far-apart
// and a supported query alternately; repeated keys hit the decision cache.
func BenchmarkAsk(b *testing.B) {
	s, _ := newServer(b, gw.Config{})
	ctx := context.Background()
	qs := []gw.AskRequest{farQuery, nearQuery}
	i := 0
	var last gw.AskResponse
	b.ReportAllocs()
	for b.Loop() {
		r, err := s.Ask(ctx, qs[i&1])
		if err != nil {
			b.Fatal(err)
		}
		last = r
		i++
	}
	if last.Answer.Value == "" || len(last.Answer.Distribution) != 2 {
		b.Fatalf("bad answer %+v", last.Answer)
	}
}
