package graphidx

import (
	"os"
	"path/filepath"

	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// removeStaleTemps deletes the leftovers of crashed writes of path: regular
// files in path's directory named TempPrefix(path)+"<pid>-<suffix>" whose
// pid is not this process and not a live process (fileio.ProcessAlive). A write
// killed between creating its temporary file and the rename leaves such a
// file; WriteFile calls this before writing, so the next successful write
// of the same path cleans up. Files of live writers, of this process and
// with names of any other form are left alone; errors are ignored (it is
// best effort and never fails the write). It returns the removed paths.
// O(entries in the directory).
func removeStaleTemps(path string) []string {
	return fileio.RemoveDeadOwners(filepath.Dir(path), TempPrefix(path), func(e os.DirEntry) bool { return e.Type().IsRegular() }, os.Remove)
}
