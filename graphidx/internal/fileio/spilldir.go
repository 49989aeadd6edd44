package fileio

import (
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
)

// Name prefixes of the private spill directories of graphidx.Build and of
// the CSV reader of graphidx/corpus; the creating process's pid follows the
// prefix (MakeSpillDir creates them and removes those of dead processes).
const (
	BuildDirPrefix = "hopwise-build-"
	CSVDirPrefix   = "hopwise-csv-"
)

// MakeSpillDir creates a private directory for spilled runs in dir (the
// system temp dir when empty), named prefix+"<pid>-<random>", after removing
// the directories of the same prefix left by processes that are no longer
// alive: a build killed with SIGKILL cannot remove its own runs, so the
// next one does. Directories of live processes, of this process and with
// names not of that form (such as those of older versions, without a pid)
// are left alone; removal errors are ignored. O(entries in dir) plus the
// removed files.
func MakeSpillDir(dir, prefix string) (string, error) {
	if dir == "" {
		dir = os.TempDir()
	}
	RemoveStaleSpillDirs(dir, prefix)
	return os.MkdirTemp(dir, fmt.Sprintf("%s%d-*", prefix, os.Getpid()))
}

// RemoveStaleSpillDirs removes dir's subdirectories named prefix+"<pid>-…"
// whose pid is dead and returns their paths.
func RemoveStaleSpillDirs(dir, prefix string) []string {
	return RemoveDeadOwners(dir, prefix, func(e os.DirEntry) bool { return e.IsDir() }, os.RemoveAll)
}

// RemoveDeadOwners removes, with remove, every entry of dir that keep
// accepts and whose name is prefix+"<pid>-…" for a pid other than this
// process's that is no longer alive, and returns the removed paths. Entries
// of other forms, of live processes and of this one are left alone; errors
// are ignored (best effort). O(entries in dir).
func RemoveDeadOwners(dir, prefix string, keep func(os.DirEntry) bool, remove func(string) error) []string {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil
	}
	self := os.Getpid()
	var removed []string
	for _, e := range ents {
		rest, ok := strings.CutPrefix(e.Name(), prefix)
		if !ok || !keep(e) {
			continue
		}
		pidStr, _, ok := strings.Cut(rest, "-")
		if !ok {
			continue
		}
		pid, err := strconv.Atoi(pidStr)
		if err != nil || pid <= 0 || pid == self || ProcessAlive(pid) {
			continue
		}
		p := filepath.Join(dir, e.Name())
		if remove(p) == nil {
			removed = append(removed, p)
		}
	}
	return removed
}
