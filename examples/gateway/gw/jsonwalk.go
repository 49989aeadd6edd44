package gw

import (
	"bytes"
	"encoding/json"
	"fmt"
	"unicode/utf8"
)

// The walkers below read a document that json.Valid has accepted, in
// place: they find keys, values and array elements by byte offset without
// decoding them, which is what the request path needs (CheckKeys, then the
// few fields of a chat body) at a fraction of encoding/json's tokenizer
// cost. On input that is not valid JSON their results are meaningless;
// every caller checks validity first. Cost: O(n) in the bytes walked.

// skipWS returns the offset of the first non-white-space byte at or after
// i (JSON white space: space, tab, line feed, carriage return).
func skipWS(b []byte, i int) int {
	for i < len(b) && (b[i] == ' ' || b[i] == '\t' || b[i] == '\n' || b[i] == '\r') {
		i++
	}
	return i
}

// stringEnd returns the offset just past the string that starts at b[i]
// (a '"'), and whether it holds a backslash escape.
func stringEnd(b []byte, i int) (end int, esc bool) {
	for j := i + 1; j < len(b); j++ {
		switch b[j] {
		case '\\':
			esc = true
			j++
		case '"':
			return j + 1, esc
		}
	}
	return len(b), esc
}

// valueEnd returns the offset just past the value that starts at b[i].
func valueEnd(b []byte, i int) int {
	switch b[i] {
	case '"':
		e, _ := stringEnd(b, i)
		return e
	case '{', '[':
		depth := 0
		for ; i < len(b); i++ {
			switch b[i] {
			case '"':
				e, _ := stringEnd(b, i)
				i = e - 1
			case '{', '[':
				depth++
			case '}', ']':
				if depth--; depth == 0 {
					return i + 1
				}
			}
		}
		return len(b)
	}
	for i < len(b) && !isDelim(b[i]) { // number, true, false, null
		i++
	}
	return i
}

func isDelim(c byte) bool {
	return c == ',' || c == '}' || c == ']' || c == ' ' || c == '\t' || c == '\n' || c == '\r'
}

// keyText returns the text of the quoted key q: its bytes as written when
// it has no escape and is valid UTF-8 (no copy), else what encoding/json
// decodes it to (escapes resolved, invalid UTF-8 replaced by U+FFFD, as
// encoding/json's tokenizer reads keys).
func keyText(q []byte, esc bool) []byte {
	in := q[1 : len(q)-1]
	if !esc && utf8.Valid(in) {
		return in
	}
	var s string
	if json.Unmarshal(q, &s) != nil {
		return in // unreachable on valid JSON
	}
	return []byte(s)
}

// eachMember calls fn with each key of the object at b[i] (decoded, see
// keyText) and the byte span of its value, in order, until fn returns
// false.
func eachMember(b []byte, i int, fn func(key []byte, vs, ve int) bool) {
	i = skipWS(b, i+1)
	for i < len(b) && b[i] == '"' {
		ke, esc := stringEnd(b, i)
		key := keyText(b[i:ke], esc)
		vs := skipWS(b, skipWS(b, ke)+1) // past the ':'
		ve := valueEnd(b, vs)
		if !fn(key, vs, ve) {
			return
		}
		i = skipWS(b, ve)
		if i >= len(b) || b[i] != ',' {
			return
		}
		i = skipWS(b, i+1)
	}
}

// eachElement calls fn with the byte span of each element of the array at
// b[i], in order.
func eachElement(b []byte, i int, fn func(es, ee int)) {
	i = skipWS(b, i+1)
	for i < len(b) && b[i] != ']' {
		e := valueEnd(b, i)
		fn(i, e)
		i = skipWS(b, e)
		if i < len(b) && b[i] == ',' {
			i = skipWS(b, i+1)
		}
	}
}

// jsonString returns the string value raw (a JSON string or null, null
// reading as ""), as json.Unmarshal into a string would; ok is false for
// any other value or none.
func jsonString(raw []byte) (string, bool) {
	if len(raw) >= 2 && raw[0] == '"' {
		in := raw[1 : len(raw)-1]
		if bytes.IndexByte(in, '\\') < 0 && utf8.Valid(in) {
			return string(in), true
		}
		var s string
		err := json.Unmarshal(raw, &s)
		return s, err == nil
	}
	return "", string(raw) == "null"
}

// checkValidKeys is CheckKeys for a body json.Valid accepted: the same
// checks (keys equal or equal under case folding, nesting deeper than
// maxJSONDepth), in document order, with the same messages and byte
// offsets as the tokenizer walk, in one pass over the bytes. Keys are
// compared where they lie in the body (a key with an escape or invalid
// UTF-8 is decoded first), so an object of ASCII keys allocates nothing.
func checkValidKeys(b []byte) error {
	var frames [8]walkFrame
	stack := frames[:0]
	for i := skipWS(b, 0); i < len(b); i = skipWS(b, i) {
		c := b[i]
		if n := len(stack); n > 0 && stack[n-1].object && stack[n-1].expect && c == '"' {
			end, esc := stringEnd(b, i)
			k := keyText(b[i:end], esc)
			top := &stack[n-1]
			if prev, dup := top.seen(k); dup {
				if bytes.Equal(prev, k) {
					return fmt.Errorf("duplicate key %q (the second ends at byte %d)", clip(string(k)), end)
				}
				return fmt.Errorf("keys %q and %q differ only in letter case (the second ends at byte %d); send one", clip(string(prev)), clip(string(k)), end)
			}
			top.add(k)
			top.expect = false
			i = skipWS(b, end) + 1 // past the ':'
			continue
		}
		switch c {
		case ',':
			if n := len(stack); n > 0 && stack[n-1].object {
				stack[n-1].expect = true
			}
			i++
		case '{', '[':
			if len(stack) >= maxJSONDepth {
				return fmt.Errorf("JSON nested deeper than %d levels", maxJSONDepth)
			}
			// Reuse the key slice a closed sibling left at this depth.
			var keys [][]byte
			if len(stack) < cap(stack) {
				keys = stack[:len(stack)+1][len(stack)].keys[:0]
			}
			stack = append(stack, walkFrame{object: c == '{', expect: c == '{', keys: keys})
			i++
		case '}', ']':
			stack = stack[:len(stack)-1]
			if len(stack) == 0 {
				return nil // json.Valid: only white space follows
			}
			i++
		default: // a scalar value
			i = valueEnd(b, i)
			if len(stack) == 0 {
				return nil
			}
		}
	}
	return nil
}

// walkFrame is keyFrame over keys as bytes.
type walkFrame struct {
	object, expect bool
	keys           [][]byte
	folded         map[string][]byte // lower-cased key → key, past 16 keys
	nonASCII       bool
}

// seen reports whether k, or a key equal to it under case folding, is
// already in the object, and returns that key.
func (f *walkFrame) seen(k []byte) ([]byte, bool) {
	if f.folded != nil {
		if p, ok := f.folded[string(bytes.ToLower(k))]; ok {
			return p, true
		}
		// ToLower does not fold every pair EqualFold does (ſ and s, K and
		// k): scan when either side is not ASCII.
		if !f.nonASCII && isASCIIBytes(k) {
			return nil, false
		}
	}
	for _, p := range f.keys {
		if bytes.EqualFold(p, k) {
			return p, true
		}
	}
	return nil, false
}

func (f *walkFrame) add(k []byte) {
	f.keys = append(f.keys, k)
	f.nonASCII = f.nonASCII || !isASCIIBytes(k)
	if f.folded == nil && len(f.keys) > 16 {
		f.folded = make(map[string][]byte, 2*len(f.keys))
		for _, p := range f.keys {
			f.folded[string(bytes.ToLower(p))] = p
		}
		return
	}
	if f.folded != nil {
		f.folded[string(bytes.ToLower(k))] = k
	}
}

func isASCIIBytes(b []byte) bool {
	for _, c := range b {
		if c >= utf8.RuneSelf {
			return false
		}
	}
	return true
}
