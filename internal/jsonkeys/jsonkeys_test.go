package jsonkeys

import (
	"encoding/json"
	"io"
	"strings"
	"testing"
)

func TestMatch(t *testing.T) {
	t.Parallel()
	known := []string{"key", "score"}
	for _, c := range []struct {
		key    string
		i      int
		caseOf string
	}{{"score", 1, ""}, {"Score", -1, "score"}, {"KEY", -1, "key"}, {"unit", -1, ""}, {"", -1, ""}} {
		if i, k := Match(c.key, known); i != c.i || k != c.caseOf {
			t.Errorf("Match(%q) = %d, %q; want %d, %q", c.key, i, k, c.i, c.caseOf)
		}
	}
}

func TestKindAndSyntax(t *testing.T) {
	t.Parallel()
	dec := json.NewDecoder(strings.NewReader(`["s", 1, true, null, {}]`))
	dec.UseNumber()
	var kinds []string
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		kinds = append(kinds, Kind(tok))
	}
	if got := strings.Join(kinds, ","); got != "an array,a string,a number,a boolean,null,an object,an object,an array" {
		t.Errorf("kinds %s", got)
	}
	if err := Syntax(io.ErrUnexpectedEOF); err.Error() != "truncated JSON object" {
		t.Errorf("%v", err)
	}
	var err error
	dec = json.NewDecoder(strings.NewReader(`{"a" 1}`))
	for err == nil {
		_, err = dec.Token()
	}
	if e := Syntax(err); !strings.HasPrefix(e.Error(), "not valid JSON: invalid character '1'") {
		t.Errorf("%v", e)
	}
}
