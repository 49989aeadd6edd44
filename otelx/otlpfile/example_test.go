package otlpfile_test

import (
	"encoding/hex"
	"fmt"
	"strings"

	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"

	"github.com/hopwise/hopwise/otelx/otlpfile"
)

func ExampleAppendLine() {
	tid, _ := hex.DecodeString("5b8efff798038103d269b633813fc60c")
	sid, _ := hex.DecodeString("eee19b7ec3c1b174")
	line := otlpfile.AppendLine(nil, []*tracepb.ResourceSpans{{
		ScopeSpans: []*tracepb.ScopeSpans{{Spans: []*tracepb.Span{{
			TraceId: tid, SpanId: sid, Name: "pump-2.check",
			Kind: tracepb.Span_SPAN_KIND_INTERNAL, StartTimeUnixNano: 1700000000000000000,
		}}}},
	}})
	fmt.Print(string(line))
	// Output: {"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"5b8efff798038103d269b633813fc60c","spanId":"eee19b7ec3c1b174","name":"pump-2.check","kind":1,"startTimeUnixNano":"1700000000000000000"}]}]}]}
}

func ExampleScanner() {
	file := `{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"5b8efff798038103d269b633813fc60c","spanId":"eee19b7ec3c1b174","name":"vent-north.open"}]}]}]}
{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"5b8e","spanId":"eee19b7ec3c1b174"}]}]}]}
`
	sc := otlpfile.NewScanner(strings.NewReader(file), "zone1.jsonl", 0)
	for sc.Scan() {
		sp := sc.TracesData().ResourceSpans[0].ScopeSpans[0].Spans[0]
		fmt.Printf("%s trace %x\n", sp.Name, sp.TraceId)
	}
	fmt.Println(sc.Err())
	// Output:
	// vent-north.open trace 5b8efff798038103d269b633813fc60c
	// zone1.jsonl:2: otlpfile: malformed OTLP/JSON line: resourceSpans[0].scopeSpans[0].spans[0].traceId: want 32 hex digits, got 4 ("5b8e")
}
