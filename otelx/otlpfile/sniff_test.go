package otlpfile

import (
	"bytes"
	"compress/gzip"
	"encoding/binary"
	"errors"
	"strings"
	"testing"

	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
	"google.golang.org/protobuf/proto"
)

// TestScannerNamesNonJSONFiles: a compressed or protobuf file is reported
// as what it is, at line 1, instead of as bad JSON.
func TestScannerNamesNonJSONFiles(t *testing.T) {
	t.Parallel()
	line := `{"resourceSpans":[]}` + "\n"
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write([]byte(line))
	zw.Close()
	// zstd frame magic followed by a frame header (the collector file
	// exporter's compression: zstd).
	zstd := append([]byte{0x28, 0xb5, 0x2f, 0xfd, 0x04, 0x00}, line...)
	// The collector file exporter's format: proto: a 4-byte big-endian
	// length, then the TracesData message.
	msg, err := proto.Marshal(&tracepb.TracesData{ResourceSpans: []*tracepb.ResourceSpans{{SchemaUrl: "greenhouse"}}})
	if err != nil {
		t.Fatal(err)
	}
	pb := binary.BigEndian.AppendUint32(nil, uint32(len(msg)))
	pb = append(pb, msg...)
	for _, c := range []struct {
		name  string
		input []byte
		want  string
	}{
		{"gzip", gz.Bytes(), "t.jsonl:1: otlpfile: not an OTLP JSON Lines file: the file is gzip-compressed"},
		{"zstd", zstd, "t.jsonl:1: otlpfile: not an OTLP JSON Lines file: the file is zstd-compressed"},
		{"protobuf", pb, "t.jsonl:1: otlpfile: not an OTLP JSON Lines file: the file is binary"},
		{"length-prefixed zstd", append(binary.BigEndian.AppendUint32(nil, uint32(len(zstd))), zstd...), "t.jsonl:1: otlpfile: not an OTLP JSON Lines file: the file holds length-prefixed zstd-compressed messages"},
	} {
		sc := NewScanner(bytes.NewReader(c.input), "t.jsonl", 0)
		for sc.Scan() {
		}
		if err := sc.Err(); !errors.Is(err, ErrNotJSONLines) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err = %v, want %q", c.name, err, c.want)
		}
	}
	// JSON, even after blank lines, and an empty file are not flagged.
	for _, ok := range []string{"\n\n" + line, "", "  \n"} {
		sc := NewScanner(strings.NewReader(ok), "t.jsonl", 0)
		for sc.Scan() {
		}
		if err := sc.Err(); err != nil {
			t.Errorf("%q: %v", ok, err)
		}
	}
}
