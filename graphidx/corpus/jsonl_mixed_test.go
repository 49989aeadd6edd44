package corpus

import (
	"bytes"
	"context"
	"errors"
	"io"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/internal/testcorpus"
)

// TestJSONLMixedPresenceAndValues: an entity listed in "ents" on one line
// and given a real value in "obs" on another is a mixed-forms bad line
// (the later one), never a silent third value "present".
func TestJSONLMixedPresenceAndValues(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name    string
		lines   []string
		bad     []int  // lines skipped as mixed-forms
		detail  string // substring of the first bad line's error
		entity  string // entity whose values are checked after a build
		wantVal []string
	}{
		{name: "valued then present",
			lines:  []string{`{"id":"1","obs":{"vent":"open","pump":"on"}}`, `{"id":"2","ents":["vent","bed"]}`, `{"id":"3","obs":{"vent":"closed","bed":"dry"}}`},
			bad:    []int{2},
			detail: `ents: mixed-forms: "vent" is observed as present here but with values at line 1`,
			entity: "vent", wantVal: []string{"closed", "open"}},
		{name: "present then valued",
			lines:  []string{`{"id":"1","ents":["vent","pump"]}`, `{"id":"2","obs":{"bed":"dry","vent":"open"}}`},
			bad:    []int{2},
			detail: `obs.vent: mixed-forms: "vent" is observed with value "open" here but as present ("ents") at line 1`,
			entity: "vent", wantVal: []string{graphidx.PresentValue}},
		{name: "obs value present fits both",
			lines:  []string{`{"id":"1","obs":{"vent":"present"}}`, `{"id":"2","ents":["vent","pump"]}`, `{"id":"3","obs":{"pump":"present","bed":"dry"}}`},
			entity: "vent", wantVal: []string{graphidx.PresentValue}},
		{name: "valued entity with a label present",
			lines:  []string{`{"id":"1","obs":{"vent":"present","pump":"on"}}`, `{"id":"2","obs":{"vent":"absent","pump":"off"}}`},
			entity: "vent", wantVal: []string{"absent", graphidx.PresentValue}},
		{name: "different entities in different forms",
			lines:  []string{`{"id":"1","ents":["tag-a","tag-b"]}`, `{"id":"2","obs":{"vent":"open","pump":"on"}}`},
			entity: "vent", wantVal: []string{"open"}},
		{name: "a rejected line records nothing",
			lines:  []string{`{"id":"1","ents":["vent","pump"]}`, `{"id":"2","obs":{"vent":"open","bed":"dry"}}`, `{"id":"3","ents":["bed","pump"]}`},
			bad:    []int{2},
			detail: `"vent" is observed with value "open"`,
			entity: "bed", wantVal: []string{graphidx.PresentValue}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			data := strings.Join(tc.lines, "\n") + "\n"
			r := NewJSONLReader(strings.NewReader(data), "mixed.jsonl")
			n, err := countContexts(r)
			if err != nil {
				t.Fatal(err)
			}
			if n != len(tc.lines)-len(tc.bad) || r.Skipped()[graphidx.ReasonMixedForms] != len(tc.bad) {
				t.Fatalf("%d contexts, skipped %v; want %d mixed-forms", n, r.Skipped(), len(tc.bad))
			}
			// Strict: the first bad line is the error, with file:line.
			sr := NewJSONLReader(strings.NewReader(data), "mixed.jsonl", graphidx.WithPolicy(graphidx.Strict))
			err = nil
			for err == nil {
				_, err = sr.Next()
			}
			var le *graphidx.LineError
			if len(tc.bad) == 0 {
				if err != io.EOF {
					t.Fatalf("strict: %v", err)
				}
			} else if !errors.As(err, &le) || le.Line != tc.bad[0] || le.Reason != graphidx.ReasonMixedForms || !strings.Contains(err.Error(), tc.detail) {
				t.Fatalf("strict: %v, want line %d mixed-forms with %q", err, tc.bad[0], tc.detail)
			}
			// Built: no spurious value.
			out := filepath.Join(t.TempDir(), "ix.hwx")
			if _, err := graphidx.Build(context.Background(), NewJSONLReader(strings.NewReader(data), "mixed.jsonl"), out); err != nil {
				t.Fatal(err)
			}
			ix, err := graphidx.Open(out)
			if err != nil {
				t.Fatal(err)
			}
			defer ix.Close()
			id, ok := ix.Lookup(tc.entity)
			if !ok || !slices.Equal(ix.Values(id), tc.wantVal) {
				t.Fatalf("%s has values %v, want %v", tc.entity, ix.Values(id), tc.wantVal)
			}
		})
	}
}

// countContexts reads r to the end and returns the number of contexts.
func countContexts(r *JSONLReader) (int, error) {
	for n := 0; ; n++ {
		if _, err := r.Next(); err == io.EOF {
			return n, nil
		} else if err != nil {
			return n, err
		}
	}
}

// BenchmarkJSONLReaderFormCheck reads the build benchmark's corpus with the
// cross-line form check and, in the same loop and in alternating order,
// with the same reader without it (the baseline). It reports the process
// CPU time of each per read and their ratio (checked/baseline), which stays
// meaningful on a loaded machine.
func BenchmarkJSONLReaderFormCheck(b *testing.B) {
	data := testcorpus.JSONL(50_000, 20_000, 1)
	read := func(check bool) time.Duration {
		t0 := testcorpus.CPUTime()
		r := NewJSONLReader(bytes.NewReader(data), "bench.jsonl")
		r.SetTransient(true)
		r.forms.off = !check
		n, err := countContexts(r)
		if err != nil {
			b.Fatal(err)
		}
		if n != 50_000 || (check && len(r.forms.m) == 0) {
			b.Fatalf("%d contexts, %d entities recorded", n, len(r.forms.m))
		}
		return testcorpus.CPUTime() - t0
	}
	b.SetBytes(2 * int64(len(data)))
	checked, base, i := testcorpus.Alternate(b, func() time.Duration { return read(true) }, func() time.Duration { return read(false) })
	if base <= 0 || checked <= 0 {
		return // no CPU clock on this platform
	}
	mb := float64(len(data)) / 1e6 * float64(i)
	b.ReportMetric(mb/base.Seconds(), "baseline-MB/cpu-s")
	b.ReportMetric(mb/checked.Seconds(), "checked-MB/cpu-s")
	b.ReportMetric(float64(checked)/float64(base), "checked/baseline")
}
