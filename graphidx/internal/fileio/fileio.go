package fileio

import (
	"errors"
	"fmt"
	"io"
	"os"
	"runtime"
	"syscall"
	"unsafe"
)

// ReadAligned reads size bytes of f into 8-aligned memory, so every
// 8-aligned section is aligned for zero-copy integer slices. O(size).
func ReadAligned(f *os.File, size int) ([]byte, error) {
	words := make([]uint64, (size+7)/8)
	var b []byte
	if len(words) > 0 {
		b = unsafe.Slice((*byte)(unsafe.Pointer(&words[0])), len(words)*8)[:size]
	}
	if _, err := io.ReadFull(io.NewSectionReader(f, 0, int64(size)), b); err != nil {
		return nil, fmt.Errorf("graphidx: read %s: %w", f.Name(), err)
	}
	return b, nil
}

// SyncDir fsyncs a directory so a rename in it is durable. File systems
// that do not support fsync on directories (EINVAL, unsupported) are
// tolerated; Windows cannot flush directory handles and is skipped.
func SyncDir(dir string) error {
	if runtime.GOOS == "windows" {
		return nil
	}
	d, err := os.Open(dir)
	if err != nil {
		return fmt.Errorf("graphidx: open dir for sync: %w", err)
	}
	defer d.Close()
	if err := d.Sync(); err != nil {
		if errors.Is(err, syscall.EINVAL) || errors.Is(err, errors.ErrUnsupported) {
			return nil
		}
		return fmt.Errorf("graphidx: sync dir: %w", err)
	}
	return nil
}
