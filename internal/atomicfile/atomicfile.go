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
