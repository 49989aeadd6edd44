package gw

import (
	"bytes"
	"encoding/json"
	"errors"
	"reflect"
	"strings"
	"testing"
)

// chatSeeds are chat bodies in the shapes clients send and hostile ones:
// white space everywhere, escaped and non-ASCII keys, array content,
// messages that are not objects, nulls, deep nesting and invalid JSON.
var chatSeeds = []string{
	`{"model":"m","messages":[{"role":"user","content":"zone-3/air-temp is hot. What is zone-3/vent-a?"}]}`,
	" {\n \"messages\" : [ {\"role\":\"system\",\"content\":\"be brief\"} ,\n\t{ \"content\" : \"a \\\"b\\\" \\u00e9\" , \"role\" : \"user\" } ] , \"stream\" : true } \n",
	`{"messages":[{"role":"user","content":[{"type":"text","text":"one"},{"type":"image_url","image_url":{"url":"x"}},{"type":"text","text":"two"}]}],"stream":null,"model":null}`,
	`{"messages":[1,"x",null,[],{"role":"user"},{"role":"user","content":null}]}`,
	`{"messages":[{"role":"us\u0065r","content":"esc\u0061ped"}],"\u006dodel":"m"}`,
	`{"messages":[{"role":"user","content":"a"},{"role":"assistant","content":"b"}],"tools":[{"x":{"y":[1,2,{"z":"}"}]}}]}`,
	`{"messages":{"role":"user"}}`, `{"messages":null}`, `{"model":1,"messages":[]}`, `{"stream":"yes","messages":[]}`,
	`{"messages":[{"role":"user","content":"\ud83c\udf45 \u2028 tomato"}]}`,
	"{\"messages\":[{\"role\":\"user\",\"content\":\"bad \xff utf8\"}],\"k\xfe\":1}",
	`{"messages":[],"Messages":[]}`, `{"messages":[],"messages":[]}`, `{"a":{"b":1,"B":2},"messages":[]}`,
	`[{"messages":[]}]`, `"s"`, `12`, `{}`, ``, ` `, `{"messages":[`, `{"messages":[]} x`, `{"a" 1}`,
	strings.Repeat("[", 65) + strings.Repeat("]", 65), `{"messages":[{"role":"user","content":"x"}],"z":1e400,"n":-0.5e-3,"t":true,"f":false}`,
}

// FuzzCheckKeysWalk: the in-place walk gives exactly the tokenizer walk's
// verdict and message, on any input.
func FuzzCheckKeysWalk(f *testing.F) {
	for _, s := range chatSeeds {
		f.Add([]byte(s))
	}
	f.Add([]byte(`{"ſ":1,"S":2}`))
	f.Fuzz(func(t *testing.T, b []byte) {
		got, want := CheckKeys(b), checkKeysTokens(b)
		if (got == nil) != (want == nil) || (got != nil && got.Error() != want.Error()) {
			t.Errorf("CheckKeys(%q) = %v, the tokenizer walk says %v", b, got, want)
		}
	})
}

// FuzzParseChat: parseChat and lastUserText agree with their encoding/json
// references on any input (verdict, message, fields, messages as sent, the
// last user text), and withSystem's splice decodes to exactly what the
// re-marshalling reference builds, for any instruction text.
func FuzzParseChat(f *testing.F) {
	for i, s := range chatSeeds {
		f.Add([]byte(s), []string{"Work this out in steps.\nStep 1: \"x\" <a&b>", "", "\x00\x1f\u2029\xff end"}[i%3])
	}
	f.Fuzz(func(t *testing.T, b []byte, instr string) {
		got, gerr := parseChat(b)
		want, werr := parseChatRef(b)
		if (gerr == nil) != (werr == nil) {
			t.Fatalf("parseChat(%q): error %v, reference %v", b, gerr, werr)
		}
		if gerr != nil {
			var g, w *RequestError
			if !errors.As(gerr, &g) || !errors.As(werr, &w) || *g != *w {
				t.Fatalf("parseChat(%q): error %#v, reference %#v", b, gerr, werr)
			}
			return
		}
		if got.model != want.model || got.stream != want.stream || got.msgStart != want.msgStart || got.msgEnd != want.msgEnd ||
			len(got.messages) != len(want.messages) {
			t.Fatalf("parseChat(%q) = %q %v [%d,%d) %d messages; reference %q %v [%d,%d) %d", b, got.model, got.stream, got.msgStart, got.msgEnd,
				len(got.messages), want.model, want.stream, want.msgStart, want.msgEnd, len(want.messages))
		}
		for i := range got.messages {
			if !bytes.Equal(got.messages[i], want.messages[i]) || !bytes.HasPrefix(b[got.msgAt[i]:], got.messages[i]) {
				t.Fatalf("parseChat(%q): message %d is %q at %d, reference %q", b, i, got.messages[i], got.msgAt[i], want.messages[i])
			}
		}
		gt, gat := got.lastUserText()
		wt, wat := want.lastUserText()
		if gt != wt || gat != wat {
			t.Fatalf("lastUserText(%q) = %q, %d; reference %q, %d", b, gt, gat, wt, wat)
		}
		for _, at := range []int{gat, 0, len(got.messages) - 1} {
			if at < 0 || at >= len(got.messages) { // withSystem's callers pass a message's index
				continue
			}
			spliced := got.withSystem(instr, at)
			ref, err := want.withSystem(instr, at)
			if err != nil {
				t.Fatal(err)
			}
			if !json.Valid(spliced) {
				t.Fatalf("withSystem(%q, %q, %d) = %q: not JSON", b, instr, at, spliced)
			}
			if g, w := decodeAny(t, spliced), decodeAny(t, ref); !reflect.DeepEqual(g, w) {
				t.Fatalf("withSystem(%q, %q, %d):\n got %s\nwant %s", b, instr, at, spliced, ref)
			}
			if CheckKeys(spliced) != nil {
				t.Fatalf("withSystem(%q, %q, %d) = %q: CheckKeys rejects it", b, instr, at, spliced)
			}
		}
	})
}

func decodeAny(t *testing.T, b []byte) any {
	t.Helper()
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.UseNumber()
	var v any
	if err := dec.Decode(&v); err != nil {
		t.Fatalf("%q: %v", b, err)
	}
	return v
}

// BenchmarkParseChat compares the request parsing of the chat path (the
// checks of CheckKeys, the fields, the last user message, the splice of a
// system message) with the encoding/json versions it replaced, in the same
// run: x-ref is the reference's time over the walk's.
func BenchmarkParseChat(b *testing.B) {
	body := []byte(`{"model":"greenhouse-sim","temperature":0.2,"messages":[{"role":"system","content":"You answer questions about the greenhouse."},` +
		`{"role":"user","content":"In the greenhouse, bed-11/moisture-probe is reads-wet. What is the most likely state of bed-10/leaf-wilt?"}],"stream":false}`)
	instr := "Work this out in steps before answering.\nKnown: bed-11/moisture-probe: reads-wet.\nStep 1: work out the state of zone-4/humidity (the records lean to \"high\", 71%).\nFinally, from those steps, say what bed-10/leaf-wilt is likely to be. Put the answer after the steps.\n"
	var refNs float64
	for _, impl := range []string{"encoding-json", "in-place"} {
		b.Run(impl, func(b *testing.B) {
			b.ReportAllocs()
			var out []byte
			for b.Loop() {
				if impl == "in-place" {
					c, err := parseChat(body)
					if err != nil {
						b.Fatal(err)
					}
					_, at := c.lastUserText()
					out = c.withSystem(instr, at)
				} else {
					c, err := parseChatRef(body)
					if err != nil {
						b.Fatal(err)
					}
					_, at := c.lastUserText()
					if out, err = c.withSystem(instr, at); err != nil {
						b.Fatal(err)
					}
				}
			}
			if !bytes.Contains(out, []byte(`"role":"system","content":"Work this out`)) || !json.Valid(out) {
				b.Fatalf("spliced body %s", out)
			}
			ns := float64(b.Elapsed().Nanoseconds()) / float64(b.N)
			if impl == "encoding-json" {
				refNs = ns
			} else if refNs > 0 {
				b.ReportMetric(refNs/ns, "x-ref")
			}
		})
	}
}
