package collectortest

import (
	"bufio"
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"go.opentelemetry.io/collector/pdata/ptrace"

	"github.com/hopwise/hopwise/otelx/otlpfile"
)

// tracedLines writes n decisions with outcomes through hopwise's otlpfile
// exporter and returns the file's lines and their span count.
func tracedLines(t testing.TB, n int) (lines [][]byte, spans int) {
	t.Helper()
	g := world0(t)
	path := filepath.Join(t.TempDir(), "codec.jsonl")
	exp, err := otlpfile.NewExporter(context.Background(), path)
	if err != nil {
		t.Fatal(err)
	}
	g.decide(t, n, 7, exp)
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(bytes.NewReader(b))
	sc.Buffer(nil, otlpfile.DefaultMaxLine)
	for sc.Scan() {
		lines = append(lines, bytes.Clone(sc.Bytes()))
	}
	return lines, 2 * n // a decision span and an outcome span each
}

// decodeOtlpfile decodes a line with hopwise's decoder and counts its spans.
func decodeOtlpfile(line []byte) (int, error) {
	td, err := otlpfile.Decode(line)
	if err != nil {
		return 0, err
	}
	n := 0
	for _, rs := range td.ResourceSpans {
		for _, ss := range rs.ScopeSpans {
			n += len(ss.Spans)
		}
	}
	return n, nil
}

// decodePdata decodes a line with the Collector's codec and counts its spans.
func decodePdata(u *ptrace.JSONUnmarshaler, line []byte) (int, error) {
	td, err := u.UnmarshalTraces(line)
	if err != nil {
		return 0, err
	}
	return td.SpanCount(), nil
}

// TestPdataCodecOnHopwiseFiles checks the facts docs/OTLP-CODEC.md rests
// on: the Collector's codec (pdata) reads every line hopwise writes, with
// the same span count, and writes it back byte for byte; it accepts
// trailing data after the object, which the OTLP JSON Lines format and
// hopwise's decoder reject.
func TestPdataCodecOnHopwiseFiles(t *testing.T) {
	t.Parallel()
	lines, spans := tracedLines(t, 1500)
	u, m := &ptrace.JSONUnmarshaler{}, &ptrace.JSONMarshaler{}
	got := 0
	for i, l := range lines {
		td, err := u.UnmarshalTraces(l)
		if err != nil {
			t.Fatalf("line %d: %v", i+1, err)
		}
		got += td.SpanCount()
		back, err := m.MarshalTraces(td)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(back, l) {
			t.Errorf("line %d: pdata writes it back differently (%d vs %d bytes)", i+1, len(back), len(l))
		}
	}
	if got != spans {
		t.Errorf("pdata read %d spans, want %d", got, spans)
	}
	trailing := []byte(`{"resourceSpans":[]} {"resourceSpans":[]}`)
	if _, err := u.UnmarshalTraces(trailing); err != nil {
		t.Logf("pdata now rejects trailing data (%v): update docs/OTLP-CODEC.md", err)
	}
	if _, err := otlpfile.Decode(trailing); err == nil || !strings.Contains(err.Error(), "trailing data") {
		t.Errorf("otlpfile accepts trailing data: %v", err)
	}
}

// BenchmarkDecodeLines decodes the same hopwise trace file line by line
// with hopwise's decoder (the baseline) and with the Collector's pdata
// JSON codec. Compare ns/op (one op = the whole file) within one run.
func BenchmarkDecodeLines(b *testing.B) {
	lines, spans := tracedLines(b, 3000)
	size := 0
	for _, l := range lines {
		size += len(l)
	}
	u := &ptrace.JSONUnmarshaler{}
	for _, c := range []struct {
		name   string
		decode func([]byte) (int, error)
	}{
		{"otlpfile", decodeOtlpfile},
		{"pdata", func(l []byte) (int, error) { return decodePdata(u, l) }},
	} {
		b.Run(c.name, func(b *testing.B) {
			b.SetBytes(int64(size))
			b.ReportAllocs()
			for b.Loop() {
				n := 0
				for _, l := range lines {
					k, err := c.decode(l)
					if err != nil {
						b.Fatal(err)
					}
					n += k
				}
				if n != spans {
					b.Fatalf("%d spans, want %d", n, spans)
				}
			}
		})
	}
}
