//go:build unix

package fileio

import (
	"fmt"
	"io"
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

// ReadAnon reads size bytes of f into a private anonymous mapping, asks the
// kernel to back it with transparent huge pages where it can (adviseHuge),
// and makes it read-only. An index read this way costs its size in memory
// that no other process shares, and the read takes O(size) at open, but
// its random reads take fewer TLB misses than through the page cache's 4 KiB
// pages: on a 642 MB index, uncached router decisions took about 15% less
// CPU. The returned release function unmaps the memory.
func ReadAnon(f *os.File, size int) ([]byte, func() error, error) {
	if size <= 0 {
		b, err := ReadAligned(f, size)
		return b, func() error { return nil }, err
	}
	b, err := unix.Mmap(-1, 0, size, unix.PROT_READ|unix.PROT_WRITE, unix.MAP_PRIVATE|unix.MAP_ANON)
	if err != nil {
		return nil, nil, fmt.Errorf("graphidx: allocate %d bytes for %s: %w", size, f.Name(), err)
	}
	release := func() error { return unix.Munmap(b) }
	adviseHuge(b)
	if _, err := io.ReadFull(io.NewSectionReader(f, 0, int64(size)), b); err != nil {
		release()
		return nil, nil, fmt.Errorf("graphidx: read %s: %w", f.Name(), err)
	}
	if err := unix.Mprotect(b, unix.PROT_READ); err != nil {
		release()
		return nil, nil, fmt.Errorf("graphidx: protect the copy of %s: %w", f.Name(), err)
	}
	return b, release, nil
}

// CopyAnon copies parts into one private anonymous mapping, asks the kernel
// to back it with transparent huge pages where it can (adviseHuge), makes it
// read-only and returns the copies (each 64-byte aligned, in the order of
// parts) with the function that unmaps them. It is for the small, randomly
// read parts of a mapped file: their reads then take few TLB misses, while
// the rest stays shared in the page cache. O(total length).
func CopyAnon(parts [][]byte) ([][]byte, func() error, error) {
	total := 0
	for _, p := range parts {
		total += (len(p) + 63) &^ 63
	}
	if total == 0 {
		return parts, func() error { return nil }, nil
	}
	// A length that is a multiple of 2 MiB: the kernel then aligns the
	// mapping to a huge page, so that all of it, not all but its ends,
	// can be backed by huge pages.
	const hugePage = 2 << 20
	size := (total + hugePage - 1) &^ (hugePage - 1)
	b, err := unix.Mmap(-1, 0, size, unix.PROT_READ|unix.PROT_WRITE, unix.MAP_PRIVATE|unix.MAP_ANON)
	if err != nil {
		return nil, nil, fmt.Errorf("graphidx: allocate %d bytes: %w", size, err)
	}
	release := func() error { return unix.Munmap(b) }
	adviseHuge(b)
	out := make([][]byte, len(parts))
	pos := 0
	for i, p := range parts {
		out[i] = b[pos : pos+len(p) : pos+len(p)]
		copy(out[i], p)
		pos += (len(p) + 63) &^ 63
	}
	if err := unix.Mprotect(b, unix.PROT_READ); err != nil {
		release()
		return nil, nil, fmt.Errorf("graphidx: protect the copy: %w", err)
	}
	return out, release, nil
}
