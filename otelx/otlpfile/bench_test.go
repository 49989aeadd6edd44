package otlpfile

import (
	"context"
	"math/rand/v2"
	"path/filepath"
	"testing"

	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
)

func benchBatch() []*tracepb.ResourceSpans {
	r := rand.New(rand.NewPCG(4, 4))
	var rss []*tracepb.ResourceSpans
	for len(rss) < 20 {
		rss = append(rss, randomResourceSpans(r)...)
	}
	return rss
}

func BenchmarkAppendLine(b *testing.B) {
	rss := benchBatch()
	buf := AppendLine(nil, rss)
	b.SetBytes(int64(len(buf)))
	b.ReportAllocs()
	for b.Loop() {
		buf = AppendLine(buf[:0], rss)
	}
	if len(buf) == 0 || buf[len(buf)-1] != '\n' {
		b.Fatal("bad line")
	}
}

func BenchmarkDecode(b *testing.B) {
	line := AppendLine(nil, benchBatch())
	b.SetBytes(int64(len(line)))
	b.ReportAllocs()
	for b.Loop() {
		td, err := Decode(line)
		if err != nil || len(td.ResourceSpans) == 0 {
			b.Fatal(err)
		}
	}
}

func BenchmarkUploadTraces(b *testing.B) {
	ctx := context.Background()
	rss := benchBatch()
	c, err := NewClient(filepath.Join(b.TempDir(), "t.jsonl"), WithMaxBytes(64<<20))
	if err != nil {
		b.Fatal(err)
	}
	if err := c.Start(ctx); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if err := c.UploadTraces(ctx, rss); err != nil {
			b.Fatal(err)
		}
	}
	if err := c.Stop(ctx); err != nil {
		b.Fatal(err)
	}
}
