package graphidx

import (
	"errors"
	"os"
	"strings"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// TestGuardTruncatedMap: reads of an index whose file was truncated under
// its map fail inside Guard with a *FaultError naming the file (without
// Guard the process dies of SIGBUS); other panics pass through.
func TestGuardTruncatedMap(t *testing.T) {
	t.Parallel()
	if !fileio.MmapSupported {
		t.Skip("no memory map on this platform")
	}
	path := ixWriteTemp(t, ixRandomSource(3000, 8, 3, 7))
	x, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	if err := x.Guard(x.Verify); err != nil {
		t.Fatalf("intact file: %v", err)
	}
	if err := x.CheckFile(); err != nil {
		t.Fatalf("CheckFile of an intact file: %v", err)
	}
	if err := os.Truncate(path, 4096); err != nil {
		t.Fatal(err)
	}
	if err := x.CheckFile(); !errors.Is(err, ErrFileChanged) {
		t.Errorf("CheckFile after a truncation: %v", err)
	}
	err = x.Guard(x.Verify)
	var fe *FaultError
	if !errors.As(err, &fe) || !errors.Is(err, ErrFileChanged) || fe.Path != path || fe.Addr == 0 ||
		!strings.Contains(err.Error(), path) {
		t.Fatalf("read of a truncated map: %v, want a FaultError naming %s", err, path)
	}
	// The goroutine is back to crashing on faults outside Guard, and a
	// panic that is not a fault of the map propagates.
	defer func() {
		if p := recover(); p != "not a fault" {
			t.Errorf("recovered %v, want the original panic", p)
		}
	}()
	_ = x.Guard(func() error { panic("not a fault") })
}

// TestGuardRenamedFileKeepsServing: a file replaced by rename is not a
// change in place: the old map stays readable and Guard reports nothing.
func TestGuardRenamedFileKeepsServing(t *testing.T) {
	t.Parallel()
	path := ixWriteTemp(t, ixRandomSource(500, 4, 2, 1))
	x, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	other := ixWriteTemp(t, ixRandomSource(50, 2, 2, 2))
	if err := os.Rename(other, path); err != nil {
		t.Fatal(err)
	}
	if err := x.Guard(x.Verify); err != nil {
		t.Errorf("old map after a rename: %v", err)
	}
	if err := x.CheckFile(); err != nil {
		t.Errorf("a renamed-over file counted as changed in place: %v", err)
	}
}

// TestCheckFileSameSizeOverwrite: bytes written over an open file without
// changing its size (no read faults) are still detected by CheckFile.
func TestCheckFileSameSizeOverwrite(t *testing.T) {
	t.Parallel()
	path := ixWriteTemp(t, ixRandomSource(200, 3, 2, 4))
	x, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	f, err := os.OpenFile(path, os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	_, err = f.WriteAt([]byte{0xff}, 100)
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	// Make sure the modification time moves even on coarse clocks.
	later := x.fi.ModTime().Add(time.Second)
	if err := os.Chtimes(path, later, later); err != nil {
		t.Fatal(err)
	}
	if err := x.CheckFile(); !errors.Is(err, ErrFileChanged) || !strings.Contains(err.Error(), path) {
		t.Errorf("CheckFile after an in-place write: %v", err)
	}
}
