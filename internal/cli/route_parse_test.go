package cli

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"runtime"
	"strings"
	"testing"
)

// longLines are batch lines with a string literal too long for any field,
// in every place the decoder can meet it, and with errors before it.
func longLines() []string {
	huge := strings.Repeat("a", 6*maxQueryField+3)
	esc := strings.Repeat(`\"\\\u00e9x`, 6*maxQueryField/10) // escapes, still too long raw
	return []string{
		`{"id":"q","from":"` + huge + `","value":"v","to":"t"}`,
		`{"id":"` + huge + `","from":"f","value":"v","to":"t"}`,
		`{"id":"q","from":"f","value":"v","to":"` + esc + `"}`,
		`{"id":"q","key":"` + esc + `","from":"f","value":"v","to":"t"}`,
		`{"id":"q","` + huge + `":"x"}`,                  // a long key: unknown field, first 64 bytes
		`{"id":"q","` + esc + `":"x"}`,                   // a long key with escapes
		`{"id":"q","Frm":1,"from":"` + huge + `"}`,       // an error before it
		`{"id":"q","id":"r","from":"` + huge + `"}`,      // a repeated key before it
		`{"id":"q","from":` + "\x01" + `"` + huge + `"}`, // a syntax error before it
		`{"id":"q","from":"` + huge + `":"x"}`,           // a value followed by a colon
		`{"id":"q","from":["` + huge + `"]}`,             // inside an array: not a string value
		`{"id":"q","from":"f","value":"v","to":"t"} "` + huge + `"`,
		`["` + huge + `"]`,
		`{"id":"q","from":"` + huge, // unterminated
		`{"id":"q","from":"f` + strings.Repeat(" ", 7*maxQueryField) + `","value":"v","to":"t"}`,
		`{"id":"q",` + strings.Repeat(" ", 7*maxQueryField) + `"from":"f","value":"v","to":"t"}`, // long, no long literal
		`{"id":"q","from":"` + huge[:maxQueryField] + `","value":"v","to":"t"}`,                  // at the limit: accepted
		`{"id":"q","from":"` + huge[:maxQueryField+1] + `","value":"v","to":"t"}`,
	}
}

// TestParseQueryLongLiteral: a line with a literal too long for any field
// gets exactly the answer (query, id, error message) of a full decode, on
// hand-made lines and on seeded random splices of them.
func TestParseQueryLongLiteral(t *testing.T) {
	t.Parallel()
	lines := longLines()
	rng := rand.New(rand.NewPCG(7, 11))
	pieces := []string{`{`, `}`, `"id"`, `"from"`, `"value"`, `"to"`, `"key"`, `"From"`, `:`, `,`, ` `, `"v"`, `\`, `"`, `1`, `[`, `]`,
		`"` + strings.Repeat("b", 6*maxQueryField+1) + `"`, `"` + strings.Repeat(`\\`, 3*maxQueryField+1) + `"`, `"` + strings.Repeat(`\"`, 3*maxQueryField+1) + `"`}
	for range 300 {
		var b strings.Builder
		b.WriteString(`{"id":"r",`)
		for range rng.IntN(9) {
			b.WriteString(pieces[rng.IntN(len(pieces))])
		}
		lines = append(lines, b.String())
	}
	long := 0
	for i, l := range lines {
		if _, _, ok := firstLongString([]byte(l), 6*maxQueryField+2); ok {
			long++
		}
		q, id, err := parseQueryLine([]byte(l), 3)
		wq, wid, werr := decodeQueryLine(bytes.NewReader([]byte(l)), -1, 3)
		if q != wq || id != wid || fmt.Sprint(err) != fmt.Sprint(werr) {
			t.Errorf("line %d (%.80q…): got (%.40q, %v, %.200v), a full decode gives (%.40q, %v, %.200v)", i, l, q, id, err, wq, wid, werr)
		}
	}
	if long < 50 {
		t.Fatalf("only %d of %d lines have a long literal: the fast path is hardly tested", long, len(lines))
	}
}

// TestParseQueryLongFieldNotTokenized: a 1 MiB field is rejected without
// the JSON decoder buffering it (it would copy the value at least twice).
// Not parallel: it reads the process's allocation counter.
func TestParseQueryLongFieldNotTokenized(t *testing.T) {
	line := []byte(`{"id":"q","from":"` + strings.Repeat("a", 1<<20) + `","value":"v","to":"t"}`)
	least := uint64(1 << 62)
	for range 5 {
		var a, b runtime.MemStats
		runtime.ReadMemStats(&a)
		_, _, err := parseRouteLine(line, 1)
		runtime.ReadMemStats(&b)
		if err == nil || !strings.Contains(err.Error(), `field "from": longer than 4096 bytes`) {
			t.Fatalf("err = %v", err)
		}
		least = min(least, b.TotalAlloc-a.TotalAlloc)
	}
	if least > 64<<10 {
		t.Fatalf("rejecting a 1 MiB field allocated %d bytes; want < 64 KiB (the line is not decoded)", least)
	}
}
