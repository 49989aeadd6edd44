package otelx

import "flag"

// Flags of the otelx tests, listed in DEVELOPERS.md.
var (
	// overheadEnforce makes TestOverhead (HOPWISE_STRESS=1) fail when a
	// variant misses its overhead target instead of only reporting it.
	overheadEnforce = flag.Bool("overhead-enforce", false, "TestOverhead: fail when a variant misses its overhead target")
	// globalChild marks the child process TestGlobalProviders starts, in
	// which installing the otel global providers cannot leak into other
	// tests.
	globalChild = flag.Bool("global-child", false, "internal: TestGlobalProviders runs its body in a child process with this flag")
)
