package graphidx

import (
	"errors"
	"fmt"
	"os"
	"runtime"
	"runtime/debug"
	"unsafe"
)

// ErrFileChanged means an open index file was truncated or overwritten in
// place while it was being read: a read of its memory map faulted, or a
// read went wrong after the file changed under the map. Index files must be
// replaced by rename (WriteFile and `hopwise build` do so), never written
// over; a renamed-over file keeps serving its old content until closed.
var ErrFileChanged = errors.New("graphidx: index file changed while open (truncated or overwritten in place; replace index files by rename)")

// FaultError reports a read that failed because the index file changed
// under its memory map. It wraps ErrFileChanged.
type FaultError struct {
	Path   string  // the index file
	Addr   uintptr // the faulting address, 0 when the failure was not a fault
	Detail string  // where the read failed and the file's size then and now
}

func (e *FaultError) Error() string {
	return fmt.Sprintf("%s: %v: %s", e.Path, ErrFileChanged, e.Detail)
}

// Unwrap returns ErrFileChanged.
func (e *FaultError) Unwrap() error { return ErrFileChanged }

// Guard runs fn, which reads x (directly or through a router deciding on
// x), on the calling goroutine with memory faults turned into panics
// (runtime/debug.SetPanicOnFault), and returns a *FaultError naming the
// file instead of letting the process die of SIGBUS when the file was
// truncated under its map. A runtime error raised after the file changed
// in place (a slice bound broken by content written over the map) is
// reported the same way; any other panic propagates unchanged. The fault
// setting of the goroutine is restored on return.
//
// Only reads on the calling goroutine are covered. After a FaultError the
// map no longer matches a valid index: close x and open the file again
// (once it has been replaced properly). Cost: two SetPanicOnFault calls and
// a deferred recover, a few nanoseconds per call (BenchmarkGuardOverhead in
// internal/reliability measures it against an unguarded decision).
func (x *Index) Guard(fn func() error) (err error) {
	old := debug.SetPanicOnFault(true)
	defer func() {
		debug.SetPanicOnFault(old)
		if p := recover(); p != nil {
			if fe := x.faultError(p); fe != nil {
				err = fe
				return
			}
			panic(p)
		}
	}()
	return fn()
}

// CheckFile returns a *FaultError (wrapping ErrFileChanged) when the file
// at x's path is the file opened but was modified in place since (its size
// or modification time differs), and nil otherwise, also when it was
// replaced by rename. Reads of a file overwritten in place may return the
// new bytes at the old offsets without faulting; a caller that serves
// results calls CheckFile after a batch of reads to withhold results that
// may be wrong. One stat(2) call.
func (x *Index) CheckFile() error {
	if x.changedInPlace() {
		return &FaultError{Path: x.path, Detail: fmt.Sprintf("modified in place; the file had %d bytes when opened, %s", x.size, x.sizeNow())}
	}
	return nil
}

// faultError classifies a recovered panic: a fault inside the map, or a
// runtime error after the file changed in place, gives a *FaultError;
// anything else nil.
func (x *Index) faultError(p any) *FaultError {
	re, ok := p.(runtime.Error)
	if !ok {
		return nil
	}
	if a, ok := p.(interface{ Addr() uintptr }); ok && x.inMap(a.Addr()) {
		off := a.Addr() - uintptr(unsafe.Pointer(unsafe.SliceData(x.mapped)))
		return &FaultError{Path: x.path, Addr: a.Addr(),
			Detail: fmt.Sprintf("read fault at byte %d of the map; the file had %d bytes when opened, %s", off, x.size, x.sizeNow())}
	}
	if x.changedInPlace() {
		return &FaultError{Path: x.path, Detail: fmt.Sprintf("%v after the file changed (%s)", re, x.sizeNow())}
	}
	return nil
}

// sizeNow describes the current size of the file at x's path.
func (x *Index) sizeNow() string {
	st, err := os.Stat(x.path)
	if err != nil {
		return "now " + err.Error()
	}
	return fmt.Sprintf("now %d", st.Size())
}

// inMap reports whether addr lies in x's memory map.
func (x *Index) inMap(addr uintptr) bool {
	if len(x.mapped) == 0 {
		return false
	}
	base := uintptr(unsafe.Pointer(unsafe.SliceData(x.mapped)))
	return addr >= base && addr-base < uintptr(len(x.mapped))
}

// changedInPlace reports whether the file at x's path is still the file
// opened but its size or modification time changed. A file replaced by
// rename is another file: its old map is intact, so it does not count.
func (x *Index) changedInPlace() bool {
	if x.fi == nil {
		return false
	}
	st, err := os.Stat(x.path)
	if err != nil || !os.SameFile(st, x.fi) {
		return false
	}
	return st.Size() != x.size || !st.ModTime().Equal(x.fi.ModTime())
}
