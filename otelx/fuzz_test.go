package otelx

import (
	"bytes"
	"errors"
	"testing"

	"github.com/hopwise/hopwise/otelx/otlpfile"
)

// FuzzReadTraces: any input either reads or fails with an error that names
// the line (never a panic).
func FuzzReadTraces(f *testing.F) {
	f.Add([]byte(`{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"0af7651916cd43dd8448eb211c80319c","spanId":"b7ad6b7169203331","name":"hopwise.decide","attributes":[{"key":"hopwise.route.mode","value":{"stringValue":"chain"}},{"key":"hopwise.chain.err","value":{"doubleValue":0.1}},{"key":"hopwise.chain.bridges","value":{"arrayValue":{"values":[{"intValue":"3"}]}}}]}]}]}]}`))
	f.Add([]byte(`{"resourceSpans":[{"scopeSpans":[{"spans":[{"name":"hopwise.outcome","attributes":[{"key":"hopwise.query.key","value":{"stringValue":"k"}},{"key":"hopwise.outcome.score","value":{"doubleValue":"NaN"}}]}]}]}]}`))
	f.Add([]byte("{\n}\n{"))
	f.Fuzz(func(t *testing.T, data []byte) {
		_, err := ReadTraces(bytes.NewReader(data), "f.jsonl", nil, nil)
		if err == nil {
			return
		}
		var le *otlpfile.LineError
		if !errors.As(err, &le) && !errors.Is(err, ErrBadRecord) {
			t.Fatalf("error names no line: %v", err)
		}
	})
}

// FuzzReadOutcomes: plain outcome lines read or fail with ErrBadRecord.
func FuzzReadOutcomes(f *testing.F) {
	f.Add([]byte(`{"unit":"bed-4","score":0.5,"input_tokens":10,"output_tokens":2,"latency_ms":3.5}`))
	f.Add([]byte(`{"unit":"bed-4","score":2}`))
	f.Add([]byte(`{"unit":"","score":1}` + "\n" + `[]`))
	f.Add([]byte(`{"unit":"u","Score":0,"score":1}`))
	f.Add([]byte(`{"unit":"u","input_tokens":1e3,"score":null}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		out, err := ReadOutcomes(bytes.NewReader(data), "o.jsonl")
		if err != nil {
			if !errors.Is(err, ErrBadRecord) {
				t.Fatalf("error without ErrBadRecord: %v", err)
			}
			return
		}
		for _, o := range out {
			if !(o.Score >= 0 && o.Score <= 1) || o.Key == "" || o.InputTokens < 0 || o.OutputTokens < 0 || !(o.LatencyMs >= 0) {
				t.Fatalf("accepted an invalid outcome %+v", o)
			}
		}
	})
}
