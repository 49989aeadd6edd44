package jsonkeys

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"slices"
	"strings"
)

// Match returns the index of key in known, or -1 and the known name key
// equals up to case ("" when none: an unknown key). O(len(known)).
func Match(key string, known []string) (i int, caseOf string) {
	if i := slices.Index(known, key); i >= 0 {
		return i, ""
	}
	for _, k := range known {
		if strings.EqualFold(key, k) {
			return -1, k
		}
	}
	return -1, ""
}

// Kind names the JSON kind of a token of json.Decoder.Token ("a string",
// "a number", "an object", ...), for errors.
func Kind(tok json.Token) string {
	switch v := tok.(type) {
	case string:
		return "a string"
	case json.Number, float64:
		return "a number"
	case bool:
		return "a boolean"
	case nil:
		return "null"
	case json.Delim:
		if v == '[' || v == ']' {
			return "an array"
		}
		return "an object"
	}
	return "something else"
}

// Syntax words an error of json.Decoder.Token: a truncated object, or
// invalid JSON with the decoder's reason.
func Syntax(err error) error {
	if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
		return errors.New("truncated JSON object")
	}
	return fmt.Errorf("not valid JSON: %s", strings.TrimPrefix(err.Error(), "json: "))
}
