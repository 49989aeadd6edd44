package graphidx_test

import (
	"io"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
)

// The internal tests of graphidx read their JSONL corpora with the real
// reader of graphidx/corpus; see NewJSONLReaderForTest in export_test.go.
func init() {
	graphidx.NewJSONLReaderForTest = func(r io.Reader, name string, opts ...graphidx.ReadOption) graphidx.ContextReader {
		return corpus.NewJSONLReader(r, name, opts...)
	}
	graphidx.OpenCorpusForTest = func(path string) (graphidx.ContextReader, io.Closer, error) {
		return corpus.Open(path, "", "")
	}
}
