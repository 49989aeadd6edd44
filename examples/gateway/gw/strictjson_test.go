package gw_test

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/examples/gateway/gw"
)

func TestCheckKeys(t *testing.T) {
	t.Parallel()
	many := func(extra string) string {
		var b strings.Builder
		b.WriteString("{")
		for i := range 40 {
			fmt.Fprintf(&b, `"k%02d":%d,`, i, i)
		}
		b.WriteString(extra + "}")
		return b.String()
	}
	cases := []struct {
		body string
		ok   bool
		want string // part of the error
	}{
		{`{"a":1,"b":[{"a":1},{"a":2}],"c":{"a":{"a":null}}}`, true, ""},
		{`[1,"a",{"x":true}]`, true, ""},
		{`"just a string"`, true, ""},
		{`{"a":1,"a":2}`, false, `duplicate key "a"`},
		{`{"from":"zzz","From":"zone-1/air-temp"}`, false, `"from" and "From" differ only in letter case`},
		{`{"x":{"content":"a","CONTENT":"b"}}`, false, "differ only in letter case"},
		{`{"x":[{"a":1},{"b":1,"b":2}]}`, false, `duplicate key "b"`},
		{`{"ſ":1,"S":2}`, false, "differ only in letter case"}, // long s folds to S
		{many(`"k07":1`), false, `duplicate key "k07"`},        // the map path past 16 keys
		{many(`"K39":1`), false, "differ only in letter case"},
		{many(`"ſ":1,"s":2`), false, "differ only in letter case"},
		{many(`"z":1`), true, ""},
		{`{"a":1} {"b":2}`, false, "trailing data"},
		{`{"a":1}x`, false, ""},
		{`{"a":`, false, ""},
		{`{"a" 1}`, false, "malformed JSON"},
		{strings.Repeat("[", 65) + strings.Repeat("]", 65), false, "deeper than 64"},
		{strings.Repeat("[", 64) + strings.Repeat("]", 64), true, ""},
		{``, false, "no JSON value"}, // found by FuzzCheckKeys (testdata/fuzz)
		{" \n\t", false, "no JSON value"},
		{strings.Repeat("1", 400), true, ""}, // valid JSON beyond float64, found by FuzzCheckKeys
	}
	for _, c := range cases {
		err := gw.CheckKeys([]byte(c.body))
		if (err == nil) != c.ok || (err != nil && !strings.Contains(err.Error(), c.want)) {
			t.Errorf("CheckKeys(%.60s) = %v, want ok=%v containing %q", c.body, err, c.ok, c.want)
		}
	}
}

// FuzzCheckKeys: never panics, and what it accepts encoding/json parses as
// JSON (with UseNumber, as CheckKeys reads numbers: a number beyond float64
// is valid JSON; ranges are checked by the typed decoding that follows).
func FuzzCheckKeys(f *testing.F) {
	for _, s := range []string{`{"a":1}`, `{"a":1,"A":2}`, `[{"x":[1,2,{"y":null}]}]`, `{"ſ":1,"s":2}`} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		if gw.CheckKeys(b) == nil {
			var v any
			dec := json.NewDecoder(bytes.NewReader(b))
			dec.UseNumber()
			err := dec.Decode(&v)
			if err == nil && dec.More() {
				err = errors.New("trailing data")
			}
			if err != nil {
				t.Errorf("CheckKeys accepted %q, which does not parse: %v", b, err)
			}
		}
	})
}
