package atomicfile

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"testing"
)

// TestWrite: the file holds what fill wrote; a failing fill leaves the old
// file and no temporary behind.
func TestWrite(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	p := filepath.Join(dir, "c.json")
	if err := Write(p, ".c-*", func(w io.Writer) error { _, err := io.WriteString(w, "old"); return err }); err != nil {
		t.Fatal(err)
	}
	boom := errors.New("boom")
	if err := Write(p, ".c-*", func(w io.Writer) error { io.WriteString(w, "half"); return boom }); !errors.Is(err, boom) {
		t.Fatalf("err %v, want boom", err)
	}
	b, err := os.ReadFile(p)
	if err != nil || string(b) != "old" {
		t.Fatalf("after a failed write: %q, %v; want the old content", b, err)
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Fatalf("%d files in the directory, want 1 (no temporary left)", len(ents))
	}
}
