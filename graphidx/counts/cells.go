package counts

import (
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"hash/fnv"
	"strconv"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
)

// Count cells: the wire unit of distributed counting.
//
// A Partial holds two kinds of sums: marginals (entity A observed with value
// U in N contexts) and pair-table cells (A=U together with B=V in N
// contexts, A < B by name). A CountCell is one of them, named by strings, so
// that a pipeline can key it, sum it across workers and route it to a count
// shard. See COUNTS.md for the count-shard file format.

// CountCell is one summed count of a Partial: a marginal when B is empty,
// otherwise one cell of the unordered pair (A, B)'s table with A < B.
type CountCell struct {
	A, U string // entity and its value
	B, V string // second entity and its value; both empty for a marginal
	N    uint64 // number of contexts
}

// IsMarginal reports whether c is a marginal count.
func (c CountCell) IsMarginal() bool { return c.B == "" }

// Key-kind bytes of AppendKey.
const (
	countKeyMarginal = 'M'
	countKeyPair     = 'P'
)

// AppendKey appends the key of c (everything but N) to dst: a kind byte
// ('M' or 'P') followed by each name as a uvarint length and its bytes.
// Equal keys name the same cell, so summing the values of equal keys merges
// counts. O(len of the names).
func (c CountCell) AppendKey(dst []byte) []byte {
	if c.IsMarginal() {
		dst = append(dst, countKeyMarginal)
		return appendStrings(dst, c.A, c.U)
	}
	dst = append(dst, countKeyPair)
	return appendStrings(dst, c.A, c.B, c.U, c.V)
}

func appendStrings(dst []byte, ss ...string) []byte {
	for _, s := range ss {
		dst = binary.AppendUvarint(dst, uint64(len(s)))
		dst = append(dst, s...)
	}
	return dst
}

// ParseCountKey decodes a key written by AppendKey into a cell with N = n.
// It checks the names as the corpus readers do (non-empty, at most
// MaxNameBytes) and A < B for pair cells; a bad key is an error wrapping
// ErrBadCounts.
func ParseCountKey(key []byte, n uint64) (CountCell, error) {
	if len(key) == 0 {
		return CountCell{}, fmt.Errorf("%w: empty cell key", ErrBadCounts)
	}
	want := 2
	if key[0] == countKeyPair {
		want = 4
	} else if key[0] != countKeyMarginal {
		return CountCell{}, fmt.Errorf("%w: cell key kind %q", ErrBadCounts, key[0])
	}
	d := countDecoder{b: key, i: 1}
	var s [4]string
	for i := range want {
		s[i] = d.name()
	}
	if d.err == nil && d.i != len(d.b) {
		d.fail("trailing bytes in cell key")
	}
	if d.err != nil {
		return CountCell{}, d.err
	}
	c := CountCell{A: s[0], U: s[1], N: n}
	if want == 4 {
		c = CountCell{A: s[0], B: s[1], U: s[2], V: s[3], N: n}
		if c.A >= c.B {
			return CountCell{}, fmt.Errorf("%w: pair cell key not ordered: %s >= %s", ErrBadCounts, strconv.Quote(c.A), strconv.Quote(c.B))
		}
	}
	return c, nil
}

// Shard returns the count shard, in [0, n), that holds c: FNV-1a (64 bit)
// of the length-prefixed entity name (marginals) or of both names (pairs),
// modulo n. Every cell of one entity or one pair goes to the same shard,
// and the function is fixed by COUNTS.md so that any writer agrees. n < 1
// is treated as 1.
func (c CountCell) Shard(n int) int {
	if n <= 1 {
		return 0
	}
	var buf [2*binary.MaxVarintLen64 + 64]byte
	var k []byte
	if c.IsMarginal() {
		k = appendStrings(buf[:0], c.A)
	} else {
		k = appendStrings(buf[:0], c.A, c.B)
	}
	h := fnv.New64a()
	h.Write(k)
	return int(h.Sum64() % uint64(n))
}

// AddContexts adds n to the number of contexts of p.
func (p *Partial) AddContexts(n uint64) { p.contexts += n }

// AddCell adds one count cell to p. It rejects empty names, names longer
// than MaxNameBytes, a pair with A >= B, a half-empty pair (V without B or
// the reverse) and N = 0, with an error wrapping ErrBadCounts. Value-count
// limits and the consistency of pair cells with marginals are checked when
// the counts are compiled. O(1) expected.
func (p *Partial) AddCell(c CountCell) error {
	if err := checkCell(c); err != nil {
		return err
	}
	if c.IsMarginal() {
		m := p.marg[c.A]
		if m == nil {
			m = map[string]uint64{}
			p.marg[c.A] = m
		}
		m[c.U] += c.N
		return nil
	}
	p.cells[partialCell{c.A, c.B, c.U, c.V}] += c.N
	return nil
}

func checkCell(c CountCell) error {
	bad := func(why string) error {
		return fmt.Errorf("%w: cell %s: %s", ErrBadCounts, c.describe(), why)
	}
	for _, s := range []string{c.A, c.U} {
		if s == "" {
			return bad("empty name or value")
		}
		if len(s) > graphidx.MaxNameBytes {
			return bad("name longer than MaxNameBytes")
		}
	}
	if (c.B == "") != (c.V == "") {
		return bad("pair cell with one entity or value missing")
	}
	if !c.IsMarginal() {
		if len(c.B) > graphidx.MaxNameBytes || len(c.V) > graphidx.MaxNameBytes {
			return bad("name longer than MaxNameBytes")
		}
		if c.A >= c.B {
			return bad("pair not ordered A < B")
		}
	}
	if c.N == 0 {
		return bad("zero count")
	}
	return nil
}

func (c CountCell) describe() string {
	if c.IsMarginal() {
		return strconv.Quote(c.A) + "=" + strconv.Quote(c.U)
	}
	return strconv.Quote(c.A) + "=" + strconv.Quote(c.U) + " & " + strconv.Quote(c.B) + "=" + strconv.Quote(c.V)
}

// Cells calls fn with every count of p, marginals and pair cells, in no
// particular order. It stops at and returns fn's first error. O(cells).
func (p *Partial) Cells(fn func(CountCell) error) error {
	for e, m := range p.marg {
		for v, n := range m {
			if err := fn(CountCell{A: e, U: v, N: n}); err != nil {
				return err
			}
		}
	}
	for k, n := range p.cells {
		if err := fn(CountCell{A: k.A, B: k.B, U: k.U, V: k.V, N: n}); err != nil {
			return err
		}
	}
	return nil
}

// Len returns the number of distinct count cells in p (marginals plus pair
// cells): a measure of its memory, about 100 bytes per cell.
func (p *Partial) Len() int {
	n := len(p.cells)
	for _, m := range p.marg {
		n += len(m)
	}
	return n
}

// Reset empties p, keeping nothing.
func (p *Partial) Reset() {
	p.contexts = 0
	clear(p.marg)
	clear(p.cells)
}

// Check verifies that every pair cell names entities and values that have
// marginals, that no row or column of a pair table exceeds the marginal of
// its value, and that no entity is observed in more contexts than counted:
// the invariants a sum of real contexts always has. Counts loaded from
// outside (count shards, AddCell) must pass it before Compile, which would
// otherwise misplace cells. Errors wrap ErrBadCounts. O(cells).
func (p *Partial) Check() error {
	type ev struct{ e, v string }
	rows := map[[2]string]map[ev]uint64{} // per pair and endpoint value: count
	for k, n := range p.cells {
		for _, side := range [2]ev{{k.A, k.U}, {k.B, k.V}} {
			if _, ok := p.marg[side.e][side.v]; !ok {
				return fmt.Errorf("%w: pair %s, %s has value %s of %s, which has no marginal count",
					ErrBadCounts, strconv.Quote(k.A), strconv.Quote(k.B), strconv.Quote(side.v), strconv.Quote(side.e))
			}
		}
		key := [2]string{k.A, k.B}
		m := rows[key]
		if m == nil {
			m = map[ev]uint64{}
			rows[key] = m
		}
		m[ev{k.A, k.U}] += n
		m[ev{k.B, k.V}] += n
	}
	for pair, m := range rows {
		for side, n := range m {
			if mg := p.marg[side.e][side.v]; n > mg {
				return fmt.Errorf("%w: pair %s, %s counts %d contexts with %s=%s, above its marginal %d",
					ErrBadCounts, strconv.Quote(pair[0]), strconv.Quote(pair[1]), n, side.e, side.v, mg)
			}
		}
	}
	for e, m := range p.marg {
		var sum uint64
		for _, n := range m {
			sum += n
		}
		if sum > p.contexts {
			return fmt.Errorf("%w: entity %s observed in %d contexts, more than the %d counted", ErrBadCounts, strconv.Quote(e), sum, p.contexts)
		}
	}
	return nil
}

// ErrBadCounts means count cells or a count shard are malformed or
// inconsistent: a bad key, a checksum mismatch, a missing shard, unsorted
// records, or a pair count above a marginal. The error text names the file
// and what is wrong.
var ErrBadCounts = errors.New("graphidx: bad count shards")

// countDecoder reads uvarint-length-prefixed fields with bounds checks; the
// first failure sticks.
type countDecoder struct {
	b   []byte
	i   int
	err error
}

func (d *countDecoder) fail(why string) {
	if d.err == nil {
		d.err = fmt.Errorf("%w: %s at byte %d", ErrBadCounts, why, d.i)
	}
}

func (d *countDecoder) uvarint() uint64 {
	if d.err != nil {
		return 0
	}
	v, n := binary.Uvarint(d.b[d.i:])
	if n <= 0 {
		d.fail("bad varint")
		return 0
	}
	d.i += n
	return v
}

// name reads a length-prefixed, non-empty name of at most MaxNameBytes.
func (d *countDecoder) name() string {
	n := d.uvarint()
	if d.err != nil {
		return ""
	}
	if n == 0 || n > graphidx.MaxNameBytes {
		d.fail("name length " + strconv.FormatUint(n, 10) + " out of range 1.." + strconv.Itoa(graphidx.MaxNameBytes))
		return ""
	}
	if uint64(len(d.b)-d.i) < n {
		d.fail("name runs past the end")
		return ""
	}
	s := string(d.b[d.i : d.i+int(n)])
	d.i += int(n)
	return s
}

// labels reads a count K in 1..MaxValues and K strictly ascending names.
func (d *countDecoder) labels() []string {
	k := d.uvarint()
	if d.err != nil {
		return nil
	}
	if k == 0 || k > graphidx.MaxValues {
		d.fail("value count " + strconv.FormatUint(k, 10) + " out of range 1.." + strconv.Itoa(graphidx.MaxValues))
		return nil
	}
	out := make([]string, k)
	for i := range out {
		out[i] = d.name()
		if d.err != nil {
			return nil
		}
		if i > 0 && out[i-1] >= out[i] {
			d.fail("value labels not strictly ascending")
			return nil
		}
	}
	return out
}

var countsCRC = crc32.MakeTable(crc32.Castagnoli)

// crcOf is CRC-32C of b.
func crcOf(b []byte) uint32 { return crc32.Checksum(b, countsCRC) }

func cmpPair(a1, b1, a2, b2 string) int {
	if c := strings.Compare(a1, a2); c != 0 {
		return c
	}
	return strings.Compare(b1, b2)
}
