//go:build unix

package fileio

import (
	"fmt"
	"os"

	"golang.org/x/sys/unix"
)

// MmapSupported reports whether MapFile maps rather than reads.
const MmapSupported = true

// MapFile maps size bytes of f read-only and shared. The returned release
// function unmaps them. The mapping is page-aligned, so every 8-aligned
// section is aligned for zero-copy integer slices.
func MapFile(f *os.File, size int) ([]byte, func() error, error) {
	b, err := unix.Mmap(int(f.Fd()), 0, size, unix.PROT_READ, unix.MAP_SHARED)
	if err != nil {
		return nil, nil, fmt.Errorf("graphidx: mmap %s: %w", f.Name(), err)
	}
	return b, func() error { return unix.Munmap(b) }, nil
}
