package reliability

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
)

// badLine is a corpus line that must be rejected with reason.
type badLine struct {
	reason string
	line   func(i int) string
}

// jsonlBad has one generator per JSONL reason code (graphidx Reason*
// documentation gives the rule each breaks).
var jsonlBad = []badLine{
	{graphidx.ReasonBadJSON, func(i int) string { return fmt.Sprintf(`{"id":"bad%d","obs":{`, i) }},
	{graphidx.ReasonMissingID, func(i int) string { return `{"obs":{"zone-0001":"open"}}` }},
	{graphidx.ReasonEmptyContext, func(i int) string { return fmt.Sprintf(`{"id":"bad%d","obs":{}}`, i) }},
	{graphidx.ReasonBadField, func(i int) string { return fmt.Sprintf(`{"id":%d,"obs":{"zone-0001":"open"}}`, i) }},
	{graphidx.ReasonMixedForms, func(i int) string {
		return fmt.Sprintf(`{"id":"bad%d","obs":{"zone-0001":"open"},"ents":["zone-0002"]}`, i)
	}},
	{graphidx.ReasonDuplicateEntity, func(i int) string {
		return fmt.Sprintf(`{"id":"bad%d","obs":{"zone-0001":"open","zone-0001":"closed"}}`, i)
	}},
	{graphidx.ReasonEmptyName, func(i int) string { return fmt.Sprintf(`{"id":"bad%d","obs":{"":"open"}}`, i) }},
	{graphidx.ReasonNameTooLong, func(i int) string {
		return fmt.Sprintf(`{"id":"bad%d","ents":["%s"]}`, i, strings.Repeat("z", graphidx.MaxNameBytes+1))
	}},
	{graphidx.ReasonBadUTF8, func(i int) string { return fmt.Sprintf(`{"id":"bad%d","ents":["zone-`+"\xff"+`"]}`, i) }},
	{graphidx.ReasonLineTooLong, func(i int) string {
		return fmt.Sprintf(`{"id":"bad%d","ents":["%s"]}`, i, strings.Repeat("y", corpus.DefaultMaxLineBytes))
	}},
	{graphidx.ReasonControlChar, func(i int) string { return fmt.Sprintf(`{"id":"bad%d","ents":["zone-\u001b[2J"]}`, i) }},
	{graphidx.ReasonTooManyEntities, func(i int) string {
		return wideLine(fmt.Sprintf("bad%d", i), graphidx.DefaultMaxContextEntities+1)
	}},
}

// csvBad has one generator per CSV row reason code.
var csvBad = []badLine{
	{graphidx.ReasonTooManyColumns, func(i int) string { return fmt.Sprintf("bad%d,zone-0001,open,extra", i) }},
	{graphidx.ReasonTooFewColumns, func(i int) string { return fmt.Sprintf("bad%d,zone-0001", i) }},
	{graphidx.ReasonBadQuote, func(i int) string { return fmt.Sprintf(`bad%d,zo"ne,open`, i) }},
	{graphidx.ReasonMissingID, func(i int) string { return ",zone-0001,open" }},
	{graphidx.ReasonEmptyName, func(i int) string { return fmt.Sprintf("bad%d,,open", i) }},
	{graphidx.ReasonNameTooLong, func(i int) string {
		return fmt.Sprintf("bad%d,%s,open", i, strings.Repeat("z", graphidx.MaxNameBytes+1))
	}},
	{graphidx.ReasonBadUTF8, func(i int) string { return fmt.Sprintf("bad%d,zone-\xff,open", i) }},
	{graphidx.ReasonControlChar, func(i int) string { return fmt.Sprintf("bad%d,zone-\x1b[2J,open", i) }},
}

// mixedCorpus interleaves valid lines with the bad ones: reason j is
// injected j+1 times (so a miscount between reasons shows), spread evenly
// through the valid lines. It returns the mixed and the clean corpus (the
// valid lines alone, same order) and the injected counts by reason.
func mixedCorpus(header string, valid []string, bad []badLine) (mixed, clean []byte, injected map[string]int) {
	injected = map[string]int{}
	var bads []string
	for j, b := range bad {
		for k := range j + 1 {
			bads = append(bads, b.line(100*j+k))
			injected[b.reason]++
		}
	}
	var m, c bytes.Buffer
	m.WriteString(header)
	c.WriteString(header)
	step := max(len(valid)/(len(bads)+1), 1)
	bi := 0
	for i, v := range valid {
		if i%step == 0 && bi < len(bads) {
			m.WriteString(bads[bi] + "\n")
			bi++
		}
		m.WriteString(v + "\n")
		c.WriteString(v + "\n")
	}
	for ; bi < len(bads); bi++ {
		m.WriteString(bads[bi] + "\n")
	}
	return m.Bytes(), c.Bytes(), injected
}

var recordsRE = regexp.MustCompile(`records\s+(\d+) read, (\d+) ok, (\d+) skipped`)

// TestBadInputPolicy: through `hopwise build`, for JSONL and CSV corpora
// with every bad-line reason injected:
//   - lenient: the summary's per-reason skipped counts equal the injected
//     counts, the line totals reconcile (read = ok + skipped, ok = the valid
//     lines), and the index is byte-identical to the index of the valid
//     lines alone — nothing valid was dropped;
//   - strict: a non-zero exit naming the file, the line and the reason of the
//     first bad line, and no index written.
func TestBadInputPolicy(t *testing.T) {
	t.Parallel()
	var jsonl, csv []string
	for i := range 300 {
		a, b, c := i%40, (i*7+1)%40, (i*13+2)%40
		if b == a {
			b = (b + 1) % 40
		}
		for c == a || c == b {
			c = (c + 1) % 40
		}
		v := twoValues[i%2]
		jsonl = append(jsonl, fmt.Sprintf(`{"id":"c%d","obs":{"%s":"%s","%s":"%s","%s":"open"}}`, i, GridName(a), v, GridName(b), twoValues[(i/2)%2], GridName(c)))
		csv = append(csv, fmt.Sprintf("c%d,%s,%s", i, GridName(a), v), fmt.Sprintf("c%d,%s,%s", i, GridName(b), twoValues[(i/3)%2]))
	}
	for _, tc := range []struct {
		name, header, ext string
		valid             []string
		bad               []badLine
	}{
		{"jsonl", "", ".jsonl", jsonl, jsonlBad},
		{"csv", "context,entity,value\n", ".csv", csv, csvBad},
	} {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			dir := t.TempDir()
			mixed, clean, injected := mixedCorpus(tc.header, tc.valid, tc.bad)
			mp := filepath.Join(dir, "mixed"+tc.ext)
			cp := filepath.Join(dir, "clean"+tc.ext)
			if err := os.WriteFile(mp, mixed, 0o644); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(cp, clean, 0o644); err != nil {
				t.Fatal(err)
			}
			totalBad := 0
			for _, n := range injected {
				totalBad += n
			}

			// Lenient.
			mx, cx := filepath.Join(dir, "mixed.hwx"), filepath.Join(dir, "clean.hwx")
			code, out, errOut := runCLI(t, "build", "--corpus", mp, "--out", mx, "--quiet")
			if code != 0 {
				t.Fatalf("lenient build: exit %d\n%s%s", code, out, errOut)
			}
			m := recordsRE.FindStringSubmatch(out)
			if m == nil {
				t.Fatalf("no records line in the summary:\n%s", out)
			}
			read, _ := strconv.Atoi(m[1])
			ok, _ := strconv.Atoi(m[2])
			skipped, _ := strconv.Atoi(m[3])
			if read != ok+skipped || ok != len(tc.valid) || skipped != totalBad {
				t.Fatalf("records %d read, %d ok, %d skipped; want %d read = %d valid + %d injected\n%s",
					read, ok, skipped, len(tc.valid)+totalBad, len(tc.valid), totalBad, out)
			}
			for reason, n := range injected {
				re := regexp.MustCompile(`skipped ` + regexp.QuoteMeta(reason) + `\s+(\d+)`)
				g := re.FindStringSubmatch(out)
				if g == nil || g[1] != strconv.Itoa(n) {
					t.Errorf("reason %s: summary says %v, injected %d\n%s", reason, g, n, out)
				}
			}
			if code, out, errOut := runCLI(t, "build", "--corpus", cp, "--out", cx, "--quiet"); code != 0 {
				t.Fatalf("clean build: exit %d\n%s%s", code, out, errOut)
			}
			mb, _ := os.ReadFile(mx)
			cb, _ := os.ReadFile(cx)
			if len(mb) == 0 || !bytes.Equal(mb, cb) {
				t.Fatalf("index of the mixed corpus (%d bytes) differs from the index of its valid lines (%d bytes): valid data dropped or bad data kept", len(mb), len(cb))
			}

			// Strict: the first bad line stops the build.
			sx := filepath.Join(dir, "strict.hwx")
			code, out, errOut = runCLI(t, "build", "--corpus", mp, "--out", sx, "--quiet", "--strict")
			assertNoPanic(t, "strict build", out+errOut)
			firstLine := 1
			if tc.header != "" {
				firstLine = 2
			}
			want := fmt.Sprintf("%s:%d:", filepath.Base(mp), firstLine)
			if code == 0 || !strings.Contains(errOut, want) || !strings.Contains(errOut, tc.bad[0].reason) {
				t.Fatalf("strict build: exit %d, want non-zero naming %q and %s:\n%s", code, want, tc.bad[0].reason, errOut)
			}
			if _, err := os.Stat(sx); !os.IsNotExist(err) {
				t.Fatalf("strict build that failed left an index: %v", err)
			}
		})
	}
}
