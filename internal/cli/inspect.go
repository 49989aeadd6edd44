package cli

import (
	"cmp"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/spf13/cobra"
)

func init() { register(newInspectCmd) }

// inspectOptions are the flags of `hopwise inspect`.
type inspectOptions struct {
	index  string
	entity string
	json   bool
	verify bool
	top    int
	list   bool
	prefix string
}

func newInspectCmd() *cobra.Command {
	var o inspectOptions
	cmd := &cobra.Command{
		Use:   "inspect --index PATH [--entity NAME | --list [--prefix P]] [--json] [--verify] [--top N]",
		Short: "Show the counts and size of a locality index, or one entity's statistics",
		Long: `inspect opens a locality index and prints its format version, generation,
size, and the numbers of entities, contexts and pairs. bytes_per_edge is the
file size without the entity-name sections divided by the number of directed
edges (adjacency entries, twice the pairs).

With --entity it prints that entity's values with their marginal counts, the
number of contexts observing it (support), and its top neighbours by pair
support with each pair's count table (rows: the entity's values, columns: the
neighbour's values). An unknown name is answered with the nearest names.

With --list it prints the entity names, one per line in byte order (with
--json one object with the names); --prefix P keeps the names that start
with P and implies --list.

In the text output control characters of names and values are escaped
(\x1b, \u009b), as route does; --json gives them exactly.

The index is opened with a header-only check, which is fast on any size;
--verify also checks every section checksum and structural invariant.
Exit status: 0 on success, 2 if the index is damaged or not an index (as
for "hopwise route"), 1 for other errors (missing file, unknown entity, bad
flags).`,
		Example: `  hopwise inspect --index greenhouse.hwx
  hopwise inspect --index greenhouse.hwx --entity pump.a --top 5
  hopwise inspect --index greenhouse.hwx --json --verify
  hopwise inspect --index greenhouse.hwx --list --prefix pump`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			return runInspect(cmd.Context(), cmd.OutOrStdout(), o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.index, "index", "", "path of the locality index file (required)")
	f.StringVar(&o.entity, "entity", "", "show this entity's values, marginals and top neighbours")
	f.BoolVar(&o.json, "json", false, "print JSON instead of a table")
	f.BoolVar(&o.verify, "verify", false, "verify every section checksum and invariant, not only the header")
	f.IntVar(&o.top, "top", 10, "number of neighbours to show with --entity")
	f.BoolVar(&o.list, "list", false, "print the entity names, one per line")
	f.StringVar(&o.prefix, "prefix", "", "with --list: only the names that start with this (implies --list)")
	_ = cmd.MarkFlagRequired("index")
	return cmd
}

// inspectReport is the JSON form of the inspect output.
type inspectReport struct {
	Path          string          `json:"path"`
	FormatVersion int             `json:"format_version"`
	Generation    string          `json:"generation"`
	Bytes         int64           `json:"bytes"`
	Entities      int             `json:"entities"`
	Contexts      uint64          `json:"contexts"`
	Pairs         uint64          `json:"pairs"`
	DirectedEdges uint64          `json:"directed_edges"`
	BytesPerEdge  float64         `json:"bytes_per_edge"`
	RankPrefix    int             `json:"rank_prefix"`
	Verified      bool            `json:"verified"`
	VerifySeconds float64         `json:"verify_seconds,omitempty"`
	Sections      []sectionReport `json:"sections"`
	Entity        *entityReport   `json:"entity,omitempty"`
}

type sectionReport struct {
	Name   string `json:"name"`
	Offset uint64 `json:"offset"`
	Length uint64 `json:"length"`
	CRC    string `json:"crc32c"`
}

type entityReport struct {
	Name      string           `json:"name"`
	ID        uint32           `json:"id"`
	Support   uint64           `json:"support"`
	Degree    int              `json:"degree"`
	Values    []valueReport    `json:"values"`
	Neighbors []neighborReport `json:"neighbors"`
}

type valueReport struct {
	Label    string `json:"label"`
	Marginal uint64 `json:"marginal"`
}

type neighborReport struct {
	Name    string   `json:"name"`
	ID      uint32   `json:"id"`
	Support uint64   `json:"support"`
	Values  []string `json:"values"`
	// Table[u][v] counts contexts with entity=value u and neighbour=value v.
	Table [][]uint32 `json:"table"`
}

func runInspect(ctx context.Context, w io.Writer, o inspectOptions) error {
	if o.index == "" {
		return fmt.Errorf("inspect: --index is required")
	}
	if o.top < 0 {
		return fmt.Errorf("inspect: --top must be ≥ 0, got %d", o.top)
	}
	o.list = o.list || o.prefix != ""
	if o.list && o.entity != "" {
		return fmt.Errorf("inspect: give --entity or --list/--prefix, not both")
	}
	x, err := graphidx.Open(o.index, graphidx.WithLazyVerify())
	if err != nil {
		return indexError(err)
	}
	defer x.Close()
	rep := inspectReport{
		Path:          o.index,
		FormatVersion: x.FormatVersion(),
		Generation:    fmt.Sprintf("%016x", x.Generation()),
		Bytes:         x.Bytes(),
		Entities:      x.NumEntities(),
		Contexts:      x.NumContexts(),
		Pairs:         x.NumPairs(),
		DirectedEdges: 2 * x.NumPairs(),
		RankPrefix:    x.RankPrefix(),
	}
	var names uint64
	for _, s := range x.Sections() {
		rep.Sections = append(rep.Sections, sectionReport{Name: s.Name, Offset: s.Offset, Length: s.Length, CRC: fmt.Sprintf("%08x", s.CRC)})
		if s.Name == "name-offsets" || s.Name == "name-bytes" {
			names += s.Length
		}
	}
	if rep.DirectedEdges > 0 {
		rep.BytesPerEdge = float64(uint64(rep.Bytes)-names) / float64(rep.DirectedEdges)
	}
	if o.verify {
		start := time.Now()
		if err := x.VerifyContext(ctx); err != nil {
			return indexError(err)
		}
		rep.Verified = true
		rep.VerifySeconds = time.Since(start).Seconds()
	}
	if o.list {
		return listNames(w, x, o.prefix, o.json)
	}
	if o.entity != "" {
		er, err := entityStats(x, o.entity, o.top)
		if err != nil {
			return err
		}
		rep.Entity = er
	}
	if o.json {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(rep)
	}
	return printInspect(w, &rep)
}

// indexError maps corruption to exit status 2.
func indexError(err error) error {
	if graphidx.IsCorruption(err) {
		return &ExitError{Code: 2, Err: err}
	}
	return err
}

// entityStats gathers one entity's values, marginals and top-n neighbours
// by support (ties by ascending id, as in the index's ranked prefix).
func entityStats(x *graphidx.Index, name string, n int) (*entityReport, error) {
	id, ok := x.Lookup(name)
	if !ok {
		return nil, fmt.Errorf("inspect: entity %q not found in %s (%d entities)%s", name, graphidx.EscapeControl(x.Path()), x.NumEntities(), unknownEntityHint(x, name))
	}
	er := &entityReport{Name: name, ID: id, Support: x.EntitySupport(id), Degree: x.Degree(id), Neighbors: []neighborReport{}}
	marg := x.Marginal(id)
	for u, l := range x.Values(id) {
		var m uint64
		if u < len(marg) {
			m = marg[u]
		}
		er.Values = append(er.Values, valueReport{Label: l, Marginal: m})
	}
	var top []graphidx.EntityID
	ranked := x.RankedNeighbors(id)
	if n <= len(ranked) || len(ranked) == x.Degree(id) {
		top = ranked[:min(n, len(ranked))]
	} else {
		// Beyond the stored prefix: rank the whole list.
		type nb struct {
			id  graphidx.EntityID
			sup uint64
		}
		all := make([]nb, 0, x.Degree(id))
		for _, b := range x.Neighbors(id) {
			ps, _ := x.Pair(id, b)
			all = append(all, nb{b, ps.Support()})
		}
		slices.SortFunc(all, func(a, b nb) int { return cmp.Or(cmp.Compare(b.sup, a.sup), cmp.Compare(a.id, b.id)) })
		for _, a := range all[:min(n, len(all))] {
			top = append(top, a.id)
		}
	}
	for _, b := range top {
		ps, ok := x.Pair(id, b)
		if !ok {
			return nil, fmt.Errorf("inspect: %s: pair (%s, %s) listed as neighbours but not stored; run with --verify",
				graphidx.EscapeControl(x.Path()), graphidx.EscapeControl(name), graphidx.EscapeControl(x.Name(b)))
		}
		nr := neighborReport{Name: x.Name(b), ID: b, Support: ps.Support(), Values: x.Values(b)}
		for u := 0; u < ps.KA; u++ {
			row := make([]uint32, ps.KB)
			for v := range row {
				row[v] = ps.Count(u, v)
			}
			nr.Table = append(nr.Table, row)
		}
		er.Neighbors = append(er.Neighbors, nr)
	}
	return er, nil
}

// printInspect writes the human-readable, aligned form.
func printInspect(w io.Writer, r *inspectReport) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	verified := "header only (use --verify for every section)"
	if r.Verified {
		verified = fmt.Sprintf("all checksums and invariants (%.3fs)", r.VerifySeconds)
	}
	// Names, values and the path may come from a foreign index or the
	// command line: escape control characters so that printing them cannot
	// drive the terminal (the --json form is escaped by JSON).
	esc := graphidx.EscapeControl
	fmt.Fprintf(tw, "index\t%s\n", esc(r.Path))
	fmt.Fprintf(tw, "format version\t%d\n", r.FormatVersion)
	fmt.Fprintf(tw, "generation\t%s\n", r.Generation)
	fmt.Fprintf(tw, "bytes\t%d\n", r.Bytes)
	fmt.Fprintf(tw, "entities\t%d\n", r.Entities)
	fmt.Fprintf(tw, "contexts\t%d\n", r.Contexts)
	fmt.Fprintf(tw, "pairs\t%d (%d directed edges)\n", r.Pairs, r.DirectedEdges)
	fmt.Fprintf(tw, "bytes per edge\t%.2f (excluding names)\n", r.BytesPerEdge)
	fmt.Fprintf(tw, "rank prefix\t%d\n", r.RankPrefix)
	fmt.Fprintf(tw, "verified\t%s\n", verified)
	if err := tw.Flush(); err != nil {
		return err
	}
	e := r.Entity
	if e == nil {
		return nil
	}
	fmt.Fprintf(w, "\nentity %s (id %d): observed in %d contexts, %d neighbours\n\n", esc(e.Name), e.ID, e.Support, e.Degree)
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "value\tmarginal\n")
	for _, v := range e.Values {
		fmt.Fprintf(tw, "%s\t%d\n", esc(v.Label), v.Marginal)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if len(e.Neighbors) == 0 {
		fmt.Fprintln(w, "\nno neighbours shown")
		return nil
	}
	fmt.Fprintf(w, "\ntop %d neighbours by support (table rows: %s values; columns: neighbour values)\n\n", len(e.Neighbors), esc(e.Name))
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "neighbour\tsupport\tcounts\n")
	for _, nb := range e.Neighbors {
		var sb strings.Builder
		for u, row := range nb.Table {
			if u > 0 {
				sb.WriteString("  ")
			}
			if u < len(e.Values) {
				sb.WriteString(esc(e.Values[u].Label))
			}
			sb.WriteString(": ")
			for v, c := range row {
				if v > 0 {
					sb.WriteByte(' ')
				}
				if v < len(nb.Values) {
					sb.WriteString(esc(nb.Values[v]))
				}
				sb.WriteByte('=')
				sb.WriteString(strconv.FormatUint(uint64(c), 10))
			}
		}
		fmt.Fprintf(tw, "%s\t%d\t%s\n", esc(nb.Name), nb.Support, sb.String())
	}
	return tw.Flush()
}
