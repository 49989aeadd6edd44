//go:build unix

package graphidx

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestOpenRefusesSpecialFiles: an index path naming a directory, a named
// pipe or a character device is an error naming the path and the kind of
// file, at once. Opening a named pipe used to block until a writer came
// (hopwise inspect --index fifo hung and ignored SIGTERM), and a directory
// gave "mmap DIR: no such device".
func TestOpenRefusesSpecialFiles(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	fifo := filepath.Join(dir, "index.fifo")
	if err := syscall.Mkfifo(fifo, 0o600); err != nil {
		t.Skipf("mkfifo: %v", err)
	}
	for _, tc := range []struct{ path, kind string }{
		{dir, "a directory"},
		{fifo, "a named pipe"},
		{os.DevNull, "a device"},
	} {
		done := make(chan error, 1)
		go func() {
			x, err := Open(tc.path)
			if err == nil {
				x.Close()
			}
			done <- err
		}()
		var err error
		select {
		case err = <-done:
		case <-time.After(5 * time.Second):
			// Unblock the open with a writer, then report.
			if w, werr := os.OpenFile(tc.path, os.O_WRONLY, 0); werr == nil {
				w.Close()
			}
			<-done
			t.Errorf("Open(%s) blocked for 5 s", tc.kind)
			continue
		}
		if err == nil || !IsCorruption(err) || !errors.Is(err, ErrNotFile) ||
			!strings.Contains(err.Error(), tc.path) || !strings.Contains(err.Error(), tc.kind) {
			t.Errorf("Open(%s): %v, want ErrNotFile naming the path and %q", tc.path, err, tc.kind)
		}
	}
}
