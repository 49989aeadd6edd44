package corpus

import (
	"bytes"
	"fmt"
	"io"
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/internal/testcorpus"
)

// textBenchInput returns a lexicon of 4,000 greenhouse entities ("bed N
// kind", every tenth also with a valued form "kind of bed N reads high")
// and paragraphs of operator notes naming a few of them. Seeded.
func textBenchInput(paragraphs int) (lexTSV string, text []byte) {
	kinds := []string{"moisture probe", "vent motor", "drip valve", "light sensor", "heater",
		"co2 sensor", "pump", "shade screen", "mist nozzle", "flow meter"}
	var lex strings.Builder
	for e := range 4000 {
		kind, bed := kinds[e%len(kinds)], e/len(kinds)
		id := fmt.Sprintf("bed-%d/%s", bed, strings.ReplaceAll(kind, " ", "-"))
		fmt.Fprintf(&lex, "bed %d %s\t%s\n", bed, kind, id)
		if e%10 == 0 {
			fmt.Fprintf(&lex, "%s of bed %d reads high\t%s\thigh\n", kind, bed, id)
		}
	}
	rng := rand.New(rand.NewPCG(5, 6))
	var b bytes.Buffer
	for range paragraphs {
		for range 3 {
			e := rng.IntN(4000)
			kind, bed := kinds[e%len(kinds)], e/len(kinds)
			if e%10 == 0 && rng.IntN(2) == 0 {
				fmt.Fprintf(&b, "This morning the %s of bed %d reads high, the crew noted.\n", kind, bed)
			} else {
				fmt.Fprintf(&b, "The crew serviced bed %d %s before the second watering round.\n", bed, kind)
			}
		}
		b.WriteString("\n")
	}
	return lex.String(), b.Bytes()
}

// BenchmarkTextReader reads a text corpus of 2,000 paragraphs through
// TextReader and, in the same loop and in alternating order, links the same
// paragraphs with a graphidx.Matcher alone (the baseline: the matching every
// text reader does). It reports the process CPU per MB of each and their
// ratio: what the reader adds to the matching (paragraph assembly, the value
// rules, the accounting).
func BenchmarkTextReader(b *testing.B) {
	tsv, text := textBenchInput(2000)
	lex, err := graphidx.ParseLexicon(strings.NewReader(tsv), "lex.tsv")
	if err != nil {
		b.Fatal(err)
	}
	paras := bytes.Split(bytes.TrimSuffix(text, []byte("\n\n")), []byte("\n\n"))
	read := func() time.Duration {
		t0 := testcorpus.CPUTime()
		r := NewTextReader(bytes.NewReader(text), "notes.txt", lex)
		n := 0
		for {
			_, err := r.Next()
			if err == io.EOF {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
			n++
		}
		st := r.Stats()
		if st.Records != int64(len(paras)) || n == 0 || st.Records != st.OK+st.Empty+st.SkippedTotal() {
			b.Fatalf("%d contexts, stats %+v, %d paragraphs", n, st, len(paras))
		}
		return testcorpus.CPUTime() - t0
	}
	m := lex.NewMatcher()
	match := func() time.Duration {
		t0 := testcorpus.CPUTime()
		found := 0
		for _, p := range paras {
			found += len(m.Find(p))
		}
		if found < len(paras) {
			b.Fatalf("%d mentions in %d paragraphs", found, len(paras))
		}
		return testcorpus.CPUTime() - t0
	}
	b.SetBytes(int64(len(text)))
	reader, base, i := testcorpus.Alternate(b, read, match)
	if reader <= 0 || base <= 0 {
		return // no CPU clock on this platform
	}
	mb := float64(len(text)) / 1e6 * float64(i)
	b.ReportMetric(mb/reader.Seconds(), "reader-MB/cpu-s")
	b.ReportMetric(mb/base.Seconds(), "match-MB/cpu-s")
	b.ReportMetric(reader.Seconds()/base.Seconds(), "reader/match")
}
