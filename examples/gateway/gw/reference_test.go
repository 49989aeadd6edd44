package gw

import (
	"bytes"
	"encoding/json"
	"strings"
)

// The encoding/json versions of parseChat, lastUserText and withSystem
// that the in-place walkers replaced: the references of the differential
// tests (jsonwalk_test.go).

// chatRequest is the part of a chat-completions body the gateway reads.
// Everything else is forwarded as sent.
type chatRequestRef struct {
	body     []byte
	messages []json.RawMessage
	// msgStart and msgEnd are the byte span of the messages array in body.
	msgStart, msgEnd int
	model            string
	stream           bool
}

// parseChat checks and splits a chat-completions body. Top-level keys are
// matched exactly (CheckKeys has rejected case variants); the messages
// array is located by byte offset so that a plan can be spliced in without
// re-encoding the rest of the body.
func parseChatRef(body []byte) (chatRequestRef, error) {
	c := chatRequestRef{body: body, msgStart: -1}
	if err := checkKeysTokens(body); err != nil {
		return c, badRequest("invalid_json", "%v", err)
	}
	dec := json.NewDecoder(bytes.NewReader(body))
	if tok, err := dec.Token(); err != nil || tok != json.Delim('{') {
		return c, badRequest("invalid_json", "the body must be a JSON object")
	}
	for dec.More() {
		kt, err := dec.Token()
		if err != nil {
			return c, badRequest("invalid_json", "the body must be a JSON object")
		}
		key, _ := kt.(string)
		var raw json.RawMessage
		if err := dec.Decode(&raw); err != nil {
			return c, badRequest("invalid_json", "the body must be a JSON object")
		}
		switch key {
		case "messages":
			c.msgEnd = int(dec.InputOffset())
			c.msgStart = c.msgEnd - len(raw)
			if err := json.Unmarshal(raw, &c.messages); err != nil || raw[0] != '[' {
				return c, badRequest("invalid_field", "field %q must be an array of objects", "messages")
			}
		case "model":
			if err := json.Unmarshal(raw, &c.model); err != nil {
				return c, badRequest("invalid_field", "field %q must be a string", "model")
			}
		case "stream":
			if string(raw) != "null" {
				if err := json.Unmarshal(raw, &c.stream); err != nil {
					return c, badRequest("invalid_field", "field %q must be a boolean", "stream")
				}
			}
		}
	}
	if c.msgStart < 0 {
		return c, badRequest("missing_field", "field %q is required", "messages")
	}
	return c, nil
}

// lastUserText returns the text of the last user message and its index:
// a string content, or the text parts of an array content joined by
// newlines.
func (c *chatRequestRef) lastUserText() (string, int) {
	for i := len(c.messages) - 1; i >= 0; i-- {
		var m map[string]json.RawMessage // exact keys, as the upstream reads them
		if json.Unmarshal(c.messages[i], &m) != nil {
			continue
		}
		var role string
		if json.Unmarshal(m["role"], &role) != nil || role != "user" {
			continue
		}
		raw := m["content"]
		var s string
		if json.Unmarshal(raw, &s) == nil {
			return s, i
		}
		var parts []map[string]json.RawMessage
		if json.Unmarshal(raw, &parts) == nil {
			var b strings.Builder
			for _, p := range parts {
				var typ, text string
				if json.Unmarshal(p["type"], &typ) == nil && typ == "text" && json.Unmarshal(p["text"], &text) == nil {
					if b.Len() > 0 {
						b.WriteByte('\n')
					}
					b.WriteString(text)
				}
			}
			return b.String(), i
		}
		return "", i
	}
	return "", -1
}

// withSystem returns the body with a system message carrying text inserted
// before message at: the messages array is rebuilt from its elements as
// sent, the rest of the body is copied byte for byte.
func (c *chatRequestRef) withSystem(text string, at int) ([]byte, error) {
	content, err := json.Marshal(text)
	if err != nil {
		return nil, err
	}
	out := make([]byte, 0, len(c.body)+len(content)+32)
	out = append(out, c.body[:c.msgStart]...)
	out = append(out, '[')
	for i, m := range c.messages {
		if i == at {
			out = append(out, `{"role":"system","content":`...)
			out = append(out, content...)
			out = append(out, "},"...)
		}
		out = append(out, m...)
		if i+1 < len(c.messages) {
			out = append(out, ',')
		}
	}
	out = append(out, ']')
	return append(out, c.body[c.msgEnd:]...), nil
}
