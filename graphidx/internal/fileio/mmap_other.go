//go:build !unix

package fileio

import "os"

// MmapSupported reports whether MapFile maps rather than reads.
const MmapSupported = false

// MapFile reads the file into 8-aligned memory on platforms without mmap
// support in this package. Release is a no-op; the garbage collector frees
// the memory once the index is closed and unreferenced.
func MapFile(f *os.File, size int) ([]byte, func() error, error) {
	b, err := ReadAligned(f, size)
	if err != nil {
		return nil, nil, err
	}
	return b, func() error { return nil }, nil
}

// ReadAnon reads the file into 8-aligned memory (ReadAligned) on platforms
// without mmap support in this package. Release is a no-op.
func ReadAnon(f *os.File, size int) ([]byte, func() error, error) {
	return MapFile(f, size)
}

// CopyAnon returns parts themselves on platforms without mmap support in
// this package (the file was read into memory already). Release is a
// no-op.
func CopyAnon(parts [][]byte) ([][]byte, func() error, error) {
	return parts, func() error { return nil }, nil
}
