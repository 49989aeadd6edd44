package graphidx

import (
	"os"
	"path/filepath"
	"strconv"
	"strings"
)

// removeStaleTemps deletes the leftovers of crashed writes of path: regular
// files in path's directory named TempPrefix(path)+"<pid>-<suffix>" whose
// pid is not this process and not a live process (processAlive). A write
// killed between creating its temporary file and the rename leaves such a
// file; WriteFile calls this before writing, so the next successful write
// of the same path cleans up. Files of live writers, of this process and
// with names of any other form are left alone; errors are ignored (it is
// best effort and never fails the write). It returns the removed paths.
// O(entries in the directory).
func removeStaleTemps(path string) []string {
	dir := filepath.Dir(path)
	prefix := TempPrefix(path)
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil
	}
	self := os.Getpid()
	var removed []string
	for _, e := range ents {
		name := e.Name()
		rest, ok := strings.CutPrefix(name, prefix)
		if !ok || !e.Type().IsRegular() {
			continue
		}
		pidStr, _, ok := strings.Cut(rest, "-")
		if !ok {
			continue
		}
		pid, err := strconv.Atoi(pidStr)
		if err != nil || pid <= 0 || pid == self || processAlive(pid) {
			continue
		}
		p := filepath.Join(dir, name)
		if os.Remove(p) == nil {
			removed = append(removed, p)
		}
	}
	return removed
}
