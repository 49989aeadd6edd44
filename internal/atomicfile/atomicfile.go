// Package atomicfile writes a small file so that a reader sees the old file
// or the new one, never a part: the content goes to a temporary file in the
// same directory, which is synced, closed and renamed over the target. It is
// for configuration files and plots; the index writer has its own, streaming
// version of the same steps. Safe for concurrent use on different paths.
package atomicfile

import (
	"io"
	"os"
	"path/filepath"
)

// Write creates path with what fill writes. The temporary file is named
// after pattern (os.CreateTemp) in path's directory; on any error it is
// removed and path is left as it was. Cost: one fsync and one rename.
func Write(path, pattern string, fill func(w io.Writer) error) error {
	f, err := os.CreateTemp(filepath.Dir(path), pattern)
	if err != nil {
		return err
	}
	tmp := f.Name()
	err = fill(f)
	if err == nil {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(tmp, path)
	}
	if err != nil {
		os.Remove(tmp)
	}
	return err
}
