package otelx

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/hopwise/hopwise/internal/jsonkeys"
)

// plainOutcomeFields are the fields of a plain outcomes line, in the order
// of plainOutcome's fields.
var plainOutcomeFields = [...]string{"unit", "score", "input_tokens", "output_tokens", "latency_ms"}

// plainOutcome is one decoded plain outcomes line; a nil field was absent
// (or null).
type plainOutcome struct {
	Key          *string
	Score        *float64
	InputTokens  *int64
	OutputTokens *int64
	LatencyMs    *float64
}

// fieldError is a problem of a plain outcomes line; field is "" when the
// problem is the line as a whole.
type fieldError struct{ field, msg string }

func (e *fieldError) Error() string { return e.msg }

// parsePlainOutcome decodes one plain outcomes line strictly: a JSON object
// whose keys are plainOutcomeFields spelt exactly, each at most once (a key
// differing from one only in case, a repeated key or an unknown key is an
// error: encoding/json would match "Score" to score and keep the last of
// two), a string key, numbers elsewhere, token counts written as whole
// numbers, and nothing after the object. It does not check ranges.
// O(len(b)).
func parsePlainOutcome(b []byte) (plainOutcome, *fieldError) {
	var p plainOutcome
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.UseNumber()
	bad := func(field, format string, args ...any) (plainOutcome, *fieldError) {
		return p, &fieldError{field, fmt.Sprintf(format, args...)}
	}
	syntax := func(err error) (plainOutcome, *fieldError) { return bad("", "%v", jsonkeys.Syntax(err)) }
	if tok, err := dec.Token(); err != nil {
		return syntax(err)
	} else if tok != json.Delim('{') {
		return bad("", "want a JSON object, got %s", jsonkeys.Kind(tok))
	}
	var seen [len(plainOutcomeFields)]bool
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return syntax(err)
		}
		key, _ := tok.(string)
		i, caseOf := jsonkeys.Match(key, plainOutcomeFields[:])
		switch {
		case caseOf != "":
			return bad(strconv.Quote(key), "differs from %q only in case", caseOf)
		case i < 0:
			return bad(strconv.Quote(key), "unknown (want %s)", strings.Join(plainOutcomeFields[:], ", "))
		}
		if seen[i] {
			return bad(key, "appears twice")
		}
		seen[i] = true
		v, err := dec.Token()
		if err != nil {
			return syntax(err)
		}
		if v == nil { // null: absent
			continue
		}
		if i == 0 {
			s, ok := v.(string)
			if !ok {
				return bad(key, "want a string, got %s", jsonkeys.Kind(v))
			}
			p.Key = &s
			continue
		}
		n, ok := v.(json.Number)
		if !ok {
			return bad(key, "want a number, got %s", jsonkeys.Kind(v))
		}
		switch key {
		case "input_tokens", "output_tokens":
			t, err := strconv.ParseInt(string(n), 10, 64)
			switch {
			case errors.Is(err, strconv.ErrRange) && !strings.HasPrefix(string(n), "-"):
				return bad(key, "%s above the limit of %d tokens", n, MaxTokens)
			case err != nil:
				return bad(key, "want a whole number of tokens, got %s", n)
			}
			*[...]**int64{&p.InputTokens, &p.OutputTokens}[i-2] = &t
		default:
			f, err := strconv.ParseFloat(string(n), 64)
			if err != nil { // out of float64's range
				f = math.Inf(1)
				if strings.HasPrefix(string(n), "-") {
					f = math.Inf(-1)
				}
			}
			if key == "score" {
				p.Score = &f
			} else {
				p.LatencyMs = &f
			}
		}
	}
	if _, err := dec.Token(); err != nil { // the closing brace
		return syntax(err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return bad("", "trailing data after the object")
	}
	return p, nil
}
