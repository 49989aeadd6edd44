//go:build !unix

package graphidx

import "os"

// mmapSupported reports whether mapFile maps rather than reads.
const mmapSupported = false

// mapFile reads the file into 8-aligned memory on platforms without mmap
// support in this package. Release is a no-op; the garbage collector frees
// the memory once the index is closed and unreferenced.
func mapFile(f *os.File, size int) ([]byte, func() error, error) {
	b, err := readAligned(f, size)
	if err != nil {
		return nil, nil, err
	}
	return b, func() error { return nil }, nil
}
