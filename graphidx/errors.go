package graphidx

import (
	"errors"
	"fmt"
)

// Sentinel errors of Open and Verify. Open checks, in this order: the magic
// (ErrBadMagic), the format version (ErrVersion), the header checksum
// (ErrChecksum), the section table (ErrSectionTable), each section's checksum
// (ErrChecksum), and finally the structural invariants (ErrCorrupt). Every
// error of these kinds is returned wrapped in a *CorruptionError, so
// errors.Is(err, ErrVersion) and IsCorruption(err) both work.
var (
	// ErrBadMagic means the file does not start with Magic: it is not a
	// locality index (or its first bytes are damaged).
	ErrBadMagic = errors.New("graphidx: bad magic (not a locality index)")
	// ErrVersion means the file declares a format version this package does
	// not read.
	ErrVersion = errors.New("graphidx: unsupported format version")
	// ErrChecksum means a CRC-32C does not match: the header's, or one
	// section's (the detail names it).
	ErrChecksum = errors.New("graphidx: checksum mismatch")
	// ErrSectionTable means the section table is inconsistent with the
	// header counts or the file: an offset or length out of bounds, unaligned,
	// overlapping, or of the wrong size.
	ErrSectionTable = errors.New("graphidx: invalid section table")
	// ErrCorrupt means the file is truncated, has trailing bytes, or its
	// checksummed content violates a structural invariant (offsets not
	// monotone, neighbour ids out of range or unsorted, K above MaxValues...).
	ErrCorrupt = errors.New("graphidx: corrupt index")
	// ErrNotFile means the path names no regular file: a directory, a
	// named pipe, a device or a socket, which cannot be mapped (and a named
	// pipe would block Open until some process writes to it).
	ErrNotFile = errors.New("graphidx: not a regular file")
	// ErrClosed is returned by Verify after Close.
	ErrClosed = errors.New("graphidx: index is closed")
	// ErrInvalidSource is returned by WriteFile when the Source breaks its
	// contract (unsorted names, bad K, unsorted or duplicate pairs...).
	ErrInvalidSource = errors.New("graphidx: invalid index source")
)

// CorruptionError reports a file that cannot be used as a locality index.
// Err is one of ErrBadMagic, ErrVersion, ErrChecksum, ErrSectionTable,
// ErrCorrupt and ErrNotFile.
type CorruptionError struct {
	Path   string // file path ("" when not known)
	Err    error  // the sentinel
	Detail string // what exactly is wrong, e.g. which section
}

func (e *CorruptionError) Error() string {
	msg := e.Err.Error()
	if e.Detail != "" {
		msg += ": " + e.Detail
	}
	if e.Path != "" {
		return e.Path + ": " + msg
	}
	return msg
}

// Unwrap returns the sentinel.
func (e *CorruptionError) Unwrap() error { return e.Err }

// IsCorruption reports whether err (or an error it wraps) says that an index
// file is damaged or not an index: any of ErrBadMagic, ErrVersion,
// ErrChecksum, ErrSectionTable, ErrCorrupt or ErrNotFile.
func IsCorruption(err error) bool {
	var ce *CorruptionError
	if errors.As(err, &ce) {
		return true
	}
	for _, s := range []error{ErrBadMagic, ErrVersion, ErrChecksum, ErrSectionTable, ErrCorrupt, ErrNotFile} {
		if errors.Is(err, s) {
			return true
		}
	}
	return false
}

// corruptf builds a *CorruptionError; the path is filled in by Open.
func corruptf(sentinel error, format string, args ...any) error {
	return &CorruptionError{Err: sentinel, Detail: fmt.Sprintf(format, args...)}
}

// sourceErrorf reports a Source contract violation.
func sourceErrorf(format string, args ...any) error {
	return fmt.Errorf("%w: %s", ErrInvalidSource, fmt.Sprintf(format, args...))
}
