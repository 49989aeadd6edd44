package graphidx

// Test helpers exported to the external tests (package graphidx_test) that
// compare the builder with graphidx/counts, which imports graphidx and so
// cannot be imported by its internal tests.
var (
	GenCorpusForTest = genCorpus
	DumpSrcForTest   = dumpSrc
)

// SliceReaderForTest is a ContextReader over cs.
func SliceReaderForTest(cs []Context) ContextReader { return &sliceReader{cs: cs} }
