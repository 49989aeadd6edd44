package fileio

import "golang.org/x/sys/unix"

// adviseHuge asks for transparent huge pages on b (madvise MADV_HUGEPAGE),
// which the kernel grants when THP is enabled in "madvise" or "always"
// mode; an error (THP compiled out, "never") leaves 4 KiB pages. O(1).
func adviseHuge(b []byte) { _ = unix.Madvise(b, unix.MADV_HUGEPAGE) }
