package gw

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strings"
	"unicode/utf8"
)

// maxJSONDepth bounds the nesting of a request body: deeper input is
// rejected before anything decodes it.
const maxJSONDepth = 64

// CheckKeys walks one JSON document and rejects, at any depth, an object
// that has two equal keys or two keys equal under Unicode case folding
// (strings.EqualFold). Go's encoding/json matches struct fields without
// regard to case and lets the last duplicate win, while other parsers keep
// the first: {"from":"zzz","From":"zone-1/air-temp"} would mean one thing to
// this gateway and another to whatever reads the same body next. Rejecting
// such bodies removes the ambiguity. It also rejects nesting deeper than 64,
// invalid UTF-8 in keys, trailing data, and a body without a value (empty
// or only white space). Cost: O(n) in the body size,
// plus O(k²) key comparisons per object of k keys (k is small in requests;
// a map keyed by the folded key takes over past 16 keys). A body that is
// valid JSON (json.Valid) is walked in place, without decoding; any other
// body goes through encoding/json's tokenizer for an error that names the
// place.
func CheckKeys(body []byte) error {
	if json.Valid(body) {
		return checkValidKeys(body)
	}
	return checkKeysTokens(body)
}

// checkKeysTokens is CheckKeys through encoding/json's tokenizer: the
// reference walk, and the one that words the syntax errors.
func checkKeysTokens(body []byte) error {
	dec := json.NewDecoder(bytes.NewReader(body))
	dec.UseNumber()
	var stack []keyFrame
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			// A complete top-level value returns below, so EOF here means
			// an open object or array, or no value at all.
			if len(stack) != 0 {
				return errors.New("truncated JSON body")
			}
			return errors.New("no JSON value in the body")
		}
		if err != nil {
			return jsonSyntax(err, dec.InputOffset())
		}
		if len(stack) > 0 {
			top := &stack[len(stack)-1]
			if top.object && top.expect && tok != json.Delim('}') {
				k, ok := tok.(string)
				if !ok {
					return fmt.Errorf("malformed JSON at byte %d", dec.InputOffset())
				}
				if !utf8.ValidString(k) {
					return fmt.Errorf("a key at byte %d is not valid UTF-8", dec.InputOffset())
				}
				if prev, dup := top.seen(k); dup {
					if prev == k {
						return fmt.Errorf("duplicate key %q (the second ends at byte %d)", clip(k), dec.InputOffset())
					}
					return fmt.Errorf("keys %q and %q differ only in letter case (the second ends at byte %d); send one", clip(prev), clip(k), dec.InputOffset())
				}
				top.add(k)
				top.expect = false
				continue
			}
			if top.object {
				top.expect = true // the value of a key: the next token is a key again
			}
		}
		switch tok {
		case json.Delim('{'), json.Delim('['):
			if len(stack) >= maxJSONDepth {
				return fmt.Errorf("JSON nested deeper than %d levels", maxJSONDepth)
			}
			stack = append(stack, keyFrame{object: tok == json.Delim('{'), expect: tok == json.Delim('{')})
		case json.Delim('}'), json.Delim(']'):
			stack = stack[:len(stack)-1]
			if len(stack) == 0 {
				if _, err := dec.Token(); err != io.EOF {
					return errors.New("trailing data after the JSON value")
				}
				return nil
			}
		default:
			if len(stack) == 0 {
				if _, err := dec.Token(); err != io.EOF {
					return errors.New("trailing data after the JSON value")
				}
				return nil
			}
		}
	}
}

// keyFrame is one open object or array of CheckKeys.
type keyFrame struct {
	object bool
	keys   []string
	folded map[string]string // folded key → key, past 16 keys
	expect bool              // object: the next string token is a key
	// nonASCII: some key is not ASCII, so the folded map is not enough.
	nonASCII bool
}

// seen reports whether k, or a key equal to it under case folding, is
// already in the object, and returns that key.
func (f *keyFrame) seen(k string) (string, bool) {
	if f.folded != nil {
		p, ok := f.folded[strings.ToLower(k)]
		if ok {
			return p, true
		}
		// ToLower does not fold every pair EqualFold does (ſ and s, K and
		// k): scan when either side is not ASCII.
		if !f.nonASCII && isASCII(k) {
			return "", false
		}
	}
	for _, p := range f.keys {
		if p == k || strings.EqualFold(p, k) {
			return p, true
		}
	}
	return "", false
}

func (f *keyFrame) add(k string) {
	f.keys = append(f.keys, k)
	f.nonASCII = f.nonASCII || !isASCII(k)
	if f.folded == nil && len(f.keys) > 16 {
		f.folded = make(map[string]string, 2*len(f.keys))
		for _, p := range f.keys {
			f.folded[strings.ToLower(p)] = p
		}
		return
	}
	if f.folded != nil {
		f.folded[strings.ToLower(k)] = k
	}
}

func isASCII(s string) bool {
	for i := 0; i < len(s); i++ {
		if s[i] >= utf8.RuneSelf {
			return false
		}
	}
	return true
}

// clip shortens a key for an error message.
func clip(s string) string {
	if len(s) <= 64 {
		return s
	}
	i := 64
	for i > 0 && !utf8.RuneStart(s[i]) {
		i--
	}
	return s[:i] + "…"
}

// jsonSyntax turns a decoder error into a message that names the byte
// offset and no Go type.
func jsonSyntax(err error, off int64) error {
	var se *json.SyntaxError
	if errors.As(err, &se) {
		return fmt.Errorf("malformed JSON at byte %d", se.Offset)
	}
	if errors.Is(err, io.ErrUnexpectedEOF) {
		return errors.New("truncated JSON body")
	}
	return fmt.Errorf("malformed JSON at byte %d", off)
}

// jsonTypeName names a JSON kind for an error message, in JSON's words
// rather than Go's.
func jsonTypeName(goKind string) string {
	switch {
	case strings.HasPrefix(goKind, "int"), strings.HasPrefix(goKind, "uint"), strings.HasPrefix(goKind, "float"),
		goKind == "json.Number":
		return "number"
	case goKind == "string":
		return "string"
	case goKind == "bool":
		return "boolean"
	case strings.HasPrefix(goKind, "[]"):
		return "array"
	case goKind == "array", goKind == "object", goKind == "number":
		return goKind
	}
	return "object"
}
