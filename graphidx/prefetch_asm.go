//go:build amd64 || arm64

package graphidx

// prefetchAll asks the CPU to start loading the cache line of each of the
// n addresses at p (prefetch_amd64.s, prefetch_arm64.s). It reads nothing
// the caller can see and never faults.
//
//go:noescape
func prefetchAll(p *uintptr, n int)

const canPrefetch = true
