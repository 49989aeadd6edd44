//go:build !amd64 && !arm64

package graphidx

// prefetchAll does nothing where the package has no prefetch instruction.
func prefetchAll(p *uintptr, n int) {}

const canPrefetch = false
