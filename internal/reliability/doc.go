// Package reliability holds the end-to-end tests that prove hopwise's
// reliability and privacy promises (docs/GUARANTEES.md lists each promise
// and the test that checks it), and the small helpers those tests share:
// synthetic index sources for adversarial shapes (HubSource, ChainSource,
// GridSource) and a counter of a file's memory mappings (MappedRegions).
//
// The tests use only the public APIs of graphidx, router, otelx and the
// hopwise command line. Heavy cases (a million-leaf hub, 16×100k decisions)
// run only when HOPWISE_STRESS=1; the default run stays under a minute.
package reliability
