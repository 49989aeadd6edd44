package cli

import (
	"bufio"
	"encoding/json"
	"io"

	"github.com/hopwise/hopwise/graphidx"
)

// listNames prints the names of x's entities that start with prefix (every
// name for ""), in the index's byte order: one per line, or with asJSON one
// object {"prefix":…,"count":n,"names":[…]}. The range comes from two
// binary searches (graphidx.Index.PrefixRange), so listing a prefix costs
// O(log n) plus the names printed. In the text form control characters
// are escaped (graphidx.EscapeControl), so a name from a foreign index can
// neither drive the terminal nor break the one-name-a-line layout.
func listNames(w io.Writer, x *graphidx.Index, prefix string, asJSON bool) error {
	lo, hi := x.PrefixRange(prefix)
	if asJSON {
		names := make([]string, 0, hi-lo)
		for id := lo; id < hi; id++ {
			names = append(names, x.Name(id))
		}
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(struct {
			Prefix string   `json:"prefix"`
			Count  int      `json:"count"`
			Names  []string `json:"names"`
		}{prefix, len(names), names})
	}
	bw := bufio.NewWriter(w)
	var line []byte
	for id := lo; id < hi; id++ {
		line = x.AppendName(line[:0], id)
		if !printableASCII(line) {
			line = append(line[:0], graphidx.EscapeControl(string(line))...)
		}
		line = append(line, '\n')
		if _, err := bw.Write(line); err != nil {
			return err
		}
	}
	return bw.Flush()
}

// printableASCII reports that b has only the bytes 0x20–0x7e, which need no
// escaping: the common case, checked without converting b to a string.
func printableASCII(b []byte) bool {
	for _, c := range b {
		if c < 0x20 || c > 0x7e {
			return false
		}
	}
	return true
}
