package graphidx

import "io"

// Test helpers exported to the external tests (package graphidx_test) that
// compare the builder with graphidx/counts, which imports graphidx and so
// cannot be imported by its internal tests.
var (
	GenCorpusForTest = genCorpus
	DumpSrcForTest   = dumpSrc
)

// SliceReaderForTest is a ContextReader over cs.
func SliceReaderForTest(cs []Context) ContextReader { return &sliceReader{cs: cs} }

// The internal tests build indexes from JSONL text through the real corpus
// readers (graphidx/corpus), which import graphidx and so cannot be imported
// by them: corpus_seam_test.go, an external test file, sets these to the
// corpus package's functions before any test runs.
var (
	NewJSONLReaderForTest func(r io.Reader, name string, opts ...ReadOption) ContextReader
	OpenCorpusForTest     func(path string) (ContextReader, io.Closer, error)
)

// jsonlReader is corpus.NewJSONLReader (see NewJSONLReaderForTest).
func jsonlReader(r io.Reader, name string, opts ...ReadOption) ContextReader {
	return NewJSONLReaderForTest(r, name, opts...)
}
