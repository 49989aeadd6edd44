package otelx

import (
	"errors"
	"strings"
	"testing"
)

// TestOutcomeKeysMatchExactly: in a plain outcomes line each field is
// spelt exactly and given once. encoding/json matched "Score" to score and
// kept the last of two, so {"unit":"u","Score":0,"score":1} was read as a
// success and {"unit":"u","score":0,"score":1} too: a poisoned statistic
// from one hostile or garbled line. Numbers of the wrong kind are named
// without Go type names.
func TestOutcomeKeysMatchExactly(t *testing.T) {
	t.Parallel()
	for _, c := range []struct{ line, want string }{
		{`{"unit":"u","score":0,"score":1}`, `out.jsonl:1: field score: appears twice`},
		{`{"unit":"u","Score":0,"score":1}`, `out.jsonl:1: field "Score": differs from "score" only in case`},
		{`{"UNIT":"u","score":1}`, `out.jsonl:1: field "UNIT": differs from "unit" only in case`},
		{`{"unit":"u","unit":"v","score":1}`, `out.jsonl:1: field unit: appears twice`},
		{`{"unit":"u","score":1,"key":"v"}`, `out.jsonl:1: field "key": unknown (want unit, score, input_tokens, output_tokens, latency_ms)`},
		{`{"unit":"u","score":1,"input_tokens":1e3}`, `out.jsonl:1: field input_tokens: want a whole number of tokens, got 1e3`},
		{`{"unit":"u","score":"1"}`, `out.jsonl:1: field score: want a number, got a string`},
		{`{"unit":1,"score":1}`, `out.jsonl:1: field unit: want a string, got a number`},
		{`{"unit":"u","score":1`, `out.jsonl:1: truncated JSON object`},
		{`["key","u"]`, `out.jsonl:1: want a JSON object`},
	} {
		_, err := ReadOutcomes(strings.NewReader(c.line), "out.jsonl")
		if !errors.Is(err, ErrBadRecord) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err = %v, want %q", c.line, err, c.want)
		}
	}
	o, err := ReadOutcomes(strings.NewReader(`{"latency_ms":5,"output_tokens":2,"input_tokens":3,"score":0.5,"unit":"u"}`), "out.jsonl")
	if err != nil || len(o) != 1 || o[0].Key != "u" || o[0].Score != 0.5 || o[0].Tokens() != 5 || o[0].LatencyMs != 5 {
		t.Errorf("fields in any order: %+v, %v", o, err)
	}
}

// TestSpanAttributesChecked: a span that gives one attribute twice (the
// OpenTelemetry attribute model has unique keys, so no SDK writes that)
// is a bad record naming the attribute, where the last one used to win
// silently; and the figures tune and ab compute with (gain, score, direct
// and chain error) must be finite: a gain of +Inf routed a decision to the
// chain under every threshold tune tried.
func TestSpanAttributesChecked(t *testing.T) {
	t.Parallel()
	const tid, sid = "0af7651916cd43dd8448eb211c80319c", "b7ad6b7169203331"
	decision := func(attrs string) string {
		return `{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"` + tid + `","spanId":"` + sid + `","name":"hopwise.decide",` +
			`"attributes":[{"key":"hopwise.query.key","value":{"stringValue":"u"}},{"key":"hopwise.route.mode","value":{"stringValue":"direct"}}` + attrs + `]}]}]}]}`
	}
	for _, c := range []struct{ line, want string }{
		{decision(`,{"key":"hopwise.route.gain","value":{"doubleValue":0.1}},{"key":"hopwise.route.gain","value":{"doubleValue":-5}}`),
			"t.jsonl:1: span " + sid + ": attribute hopwise.route.gain: given twice"},
		{decision(`,{"key":"hopwise.route.mode","value":{"stringValue":"chain"}}`), "attribute hopwise.route.mode: given twice"},
		{outcomeSpanLine(tid, sid, `,{"key":"hopwise.outcome.score","value":{"doubleValue":0}}`), "attribute hopwise.outcome.score: given twice"},
		{decision(`,{"key":"hopwise.route.gain","value":{"doubleValue":"Infinity"}}`), "attribute hopwise.route.gain: +Inf is not finite"},
		{decision(`,{"key":"hopwise.route.score","value":{"doubleValue":"-Infinity"}}`), "attribute hopwise.route.score: -Inf is not finite"},
		{decision(`,{"key":"hopwise.direct.err","value":{"doubleValue":"NaN"}}`), "attribute hopwise.direct.err: NaN is not finite"},
		{decision(`,{"key":"hopwise.chain.hops","value":{"intValue":"1"}},{"key":"hopwise.chain.err","value":{"doubleValue":"Infinity"}}`), "attribute hopwise.chain.err: +Inf is not finite"},
	} {
		_, err := ReadTraces(strings.NewReader(c.line), "t.jsonl", nil, nil)
		if !errors.Is(err, ErrBadRecord) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s:\n err = %v, want %q", c.line, err, c.want)
		}
	}
	if _, err := ReadTraces(strings.NewReader(decision(`,{"key":"hopwise.route.gain","value":{"doubleValue":-0.25}}`)), "t.jsonl", nil, nil); err != nil {
		t.Errorf("a finite gain: %v", err)
	}
}
