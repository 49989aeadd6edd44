package reliability

import (
	"bufio"
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"strings"
)

// ErrNoProcMaps is returned by MappedRegions on systems without
// /proc/self/maps (anything but Linux and a few Unixes).
var ErrNoProcMaps = errors.New("reliability: /proc/self/maps not available")

// MappedRegions counts the memory mappings of the current process whose
// backing file is path (compared after filepath.Abs and EvalSymlinks of the
// directory), by reading /proc/self/maps. A file mapped and unmapped again
// no longer appears, so the count returning to its baseline after an index
// is closed shows the mmap was released. O(number of mappings).
func MappedRegions(path string) (int, error) {
	abs, err := filepath.Abs(path)
	if err != nil {
		return 0, err
	}
	if d, err := filepath.EvalSymlinks(filepath.Dir(abs)); err == nil {
		abs = filepath.Join(d, filepath.Base(abs))
	}
	b, err := os.ReadFile("/proc/self/maps")
	if err != nil {
		return 0, errors.Join(ErrNoProcMaps, err)
	}
	n := 0
	sc := bufio.NewScanner(bytes.NewReader(b))
	sc.Buffer(make([]byte, 0, 64<<10), 1<<20)
	for sc.Scan() {
		// address perms offset dev inode pathname; the path is the
		// sixth field and may contain spaces, and " (deleted)" is appended
		// when the file was unlinked or renamed over.
		f := strings.Fields(sc.Text())
		if len(f) < 6 {
			continue
		}
		name := strings.Join(f[5:], " ")
		name = strings.TrimSuffix(name, " (deleted)")
		if name == abs {
			n++
		}
	}
	return n, sc.Err()
}
