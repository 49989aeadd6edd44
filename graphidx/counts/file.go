package counts

import (
	"context"
	"encoding/binary"
	"fmt"
	"io"
	"maps"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// On-disk constants of a count shard; COUNTS.md is the byte-level spec.
const (
	// CountsMagic is the 8-byte signature at offset 0 of a count shard.
	CountsMagic = "HWCOUNT\x00"
	// CountsVersion is the only count-shard format version this package
	// reads and writes.
	CountsVersion = 1
	// countsHeaderSize is the fixed header length in bytes.
	countsHeaderSize = 80
	// MaxCountShards is the largest accepted number of shards in a set.
	MaxCountShards = 1 << 16
)

// CountShardName returns the file name of shard i of n:
// "counts-IIIII-of-NNNNN.hwc" with five-digit zero-padded numbers.
func CountShardName(i, n int) string { return fmt.Sprintf("counts-%05d-of-%05d.hwc", i, n) }

var countShardRE = regexp.MustCompile(`^counts-(\d{5})-of-(\d{5})\.hwc$`)

// WriteCountShard writes p as count shard number shard of nshards to w, with
// p.Contexts() in its header. Every cell of p must belong to that shard
// (CountCell.Shard); a cell that does not is an ErrBadCounts error, since it
// would be lost or counted twice by a reader. The output is deterministic:
// equal counts give byte-identical shards. Memory O(size of the shard);
// time O(C log C) for C cells.
func WriteCountShard(w io.Writer, p *Partial, shard, nshards int) (int64, error) {
	return writeCountShard(w, p, shard, nshards, p.contexts, true)
}

// WriteCounts writes all of p as a set of nshards count shards in dir
// (created if needed), named by CountShardName. Cells go to their
// CountCell.Shard; the context total goes to shard 0's header and 0 to the
// others'. Each file is written to a temporary name, synced and renamed.
// It returns the total bytes written. Existing shard files of another set
// in dir are not removed: write to an empty directory.
func WriteCounts(dir string, p *Partial, nshards int) (int64, error) {
	if nshards < 1 || nshards > MaxCountShards {
		return 0, fmt.Errorf("graphidx: WriteCounts: %d shards, want 1..%d", nshards, MaxCountShards)
	}
	all := make([]int, nshards)
	for i := range all {
		all[i] = i
	}
	return WriteCountShards(dir, p, nshards, all)
}

// WriteCountShards is WriteCounts restricted to the listed shards of the
// set: each is written from p's cells of that shard, exactly as WriteCounts
// would write it, and cells of other shards are ignored. A set counted in
// groups (Partial.AddShards with the group's shards, then WriteCountShards
// with the same list) is byte-identical to one written by WriteCounts from a
// Partial of the whole corpus, with memory bounded by one group's cells.
func WriteCountShards(dir string, p *Partial, nshards int, shards []int) (int64, error) {
	if nshards < 1 || nshards > MaxCountShards {
		return 0, fmt.Errorf("graphidx: WriteCountShards: %d shards, want 1..%d", nshards, MaxCountShards)
	}
	for _, s := range shards {
		if s < 0 || s >= nshards {
			return 0, fmt.Errorf("graphidx: WriteCountShards: shard %d of %d out of range", s, nshards)
		}
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return 0, err
	}
	var total int64
	for _, s := range shards {
		path := filepath.Join(dir, CountShardName(s, nshards))
		f, err := os.CreateTemp(dir, "."+CountShardName(s, nshards)+".tmp-")
		if err != nil {
			return total, err
		}
		ctxs := uint64(0)
		if s == 0 {
			ctxs = p.contexts
		}
		n, err := writeCountShard(f, p, s, nshards, ctxs, false)
		if err == nil {
			err = f.Sync()
		}
		if cerr := f.Close(); err == nil {
			err = cerr
		}
		if err == nil {
			err = os.Rename(f.Name(), path)
		}
		if err != nil {
			os.Remove(f.Name())
			return total, fmt.Errorf("graphidx: write %s: %w", path, err)
		}
		total += n
	}
	return total, fileio.SyncDir(dir)
}

type pairAcc struct {
	a, b  string
	cells map[[2]string]uint64
}

func writeCountShard(w io.Writer, p *Partial, shard, nshards int, contexts uint64, strict bool) (int64, error) {
	if nshards < 1 || nshards > MaxCountShards || shard < 0 || shard >= nshards {
		return 0, fmt.Errorf("graphidx: count shard %d of %d out of range (1..%d shards)", shard, nshards, MaxCountShards)
	}
	foreign := func(c CountCell) error {
		return fmt.Errorf("%w: cell %s belongs to shard %d, not %d of %d", ErrBadCounts, c.describe(), c.Shard(nshards), shard, nshards)
	}
	// Entity section.
	var names []string
	for e := range p.marg {
		c := CountCell{A: e}
		if c.Shard(nshards) != shard {
			if strict {
				return 0, foreign(CountCell{A: e, U: "…"})
			}
			continue
		}
		names = append(names, e)
	}
	slices.Sort(names)
	var ent []byte
	for _, e := range names {
		m := p.marg[e]
		vals := slices.Sorted(maps.Keys(m))
		if len(vals) > graphidx.MaxValues {
			return 0, fmt.Errorf("%w: entity %s has %d values", graphidx.ErrTooManyValues, strconv.Quote(e), len(vals))
		}
		ent = appendStrings(ent, e)
		ent = binary.AppendUvarint(ent, uint64(len(vals)))
		for _, v := range vals {
			ent = appendStrings(ent, v)
			ent = binary.AppendUvarint(ent, m[v])
		}
	}
	// Pair section: group cells by pair.
	pairs := map[[2]string]*pairAcc{}
	for k, n := range p.cells {
		if n == 0 {
			continue
		}
		c := CountCell{A: k.A, B: k.B, U: k.U, V: k.V, N: n}
		if c.Shard(nshards) != shard {
			if strict {
				return 0, foreign(c)
			}
			continue
		}
		key := [2]string{k.A, k.B}
		acc := pairs[key]
		if acc == nil {
			acc = &pairAcc{a: k.A, b: k.B, cells: map[[2]string]uint64{}}
			pairs[key] = acc
		}
		acc.cells[[2]string{k.U, k.V}] += n
	}
	order := slices.SortedFunc(maps.Values(pairs), func(x, y *pairAcc) int { return cmpPair(x.a, x.b, y.a, y.b) })
	var pr []byte
	for _, acc := range order {
		us, vs := map[string]bool{}, map[string]bool{}
		for uv := range acc.cells {
			us[uv[0]], vs[uv[1]] = true, true
		}
		ul, vl := slices.Sorted(maps.Keys(us)), slices.Sorted(maps.Keys(vs))
		if len(ul) > graphidx.MaxValues || len(vl) > graphidx.MaxValues {
			return 0, fmt.Errorf("%w: pair %s, %s has more than %d values on one side", graphidx.ErrTooManyValues, strconv.Quote(acc.a), strconv.Quote(acc.b), graphidx.MaxValues)
		}
		pr = appendStrings(pr, acc.a, acc.b)
		pr = binary.AppendUvarint(pr, uint64(len(ul)))
		pr = appendStrings(pr, ul...)
		pr = binary.AppendUvarint(pr, uint64(len(vl)))
		pr = appendStrings(pr, vl...)
		for _, u := range ul {
			for _, v := range vl {
				pr = binary.AppendUvarint(pr, acc.cells[[2]string{u, v}])
			}
		}
	}
	var h [countsHeaderSize]byte
	le := binary.LittleEndian
	copy(h[0:8], CountsMagic)
	le.PutUint32(h[8:], CountsVersion)
	le.PutUint32(h[12:], 0) // flags
	le.PutUint32(h[16:], uint32(shard))
	le.PutUint32(h[20:], uint32(nshards))
	le.PutUint64(h[24:], contexts)
	le.PutUint64(h[32:], uint64(len(names)))
	le.PutUint64(h[40:], uint64(len(order)))
	le.PutUint64(h[48:], uint64(len(ent)))
	le.PutUint64(h[56:], uint64(len(pr)))
	le.PutUint32(h[64:], crcOf(ent))
	le.PutUint32(h[68:], crcOf(pr))
	le.PutUint32(h[72:], 0) // reserved
	le.PutUint32(h[76:], crcOf(h[:76]))
	var total int64
	for _, b := range [][]byte{h[:], ent, pr} {
		n, err := w.Write(b)
		total += int64(n)
		if err != nil {
			return total, err
		}
	}
	return total, nil
}

// CountShardHeader is the decoded header of one count shard.
type CountShardHeader struct {
	Version           int
	Shard, Shards     int
	Contexts          uint64
	Entities, Pairs   uint64 // record counts
	EntBytes, PairLen uint64 // section lengths
}

// DecodeCountShard checks one count shard held in b (magic, version, header
// checksum, sizes, section checksums, record order and bounds) and adds its
// counts to into (which may be nil to only check). name is used in errors.
// Any damage gives an error wrapping ErrBadCounts and naming the file;
// into is then left partly updated, so decode into a fresh Partial when the
// error matters. O(len(b)).
func DecodeCountShard(b []byte, name string, into *Partial) (CountShardHeader, error) {
	var hd CountShardHeader
	bad := func(format string, args ...any) error {
		return fmt.Errorf("%w: %s: %s", ErrBadCounts, name, fmt.Sprintf(format, args...))
	}
	if len(b) < 8 || string(b[:8]) != CountsMagic {
		return hd, bad("not a count shard (bad magic)")
	}
	if len(b) < countsHeaderSize {
		return hd, bad("truncated header (%d bytes)", len(b))
	}
	le := binary.LittleEndian
	hd.Version = int(le.Uint32(b[8:]))
	if hd.Version != CountsVersion {
		return hd, bad("format version %d, this build reads %d", hd.Version, CountsVersion)
	}
	if got, want := crcOf(b[:76]), le.Uint32(b[76:]); got != want {
		return hd, bad("header checksum mismatch")
	}
	if f := le.Uint32(b[12:]); f != 0 {
		return hd, bad("unknown flags %#x", f)
	}
	if r := le.Uint32(b[72:]); r != 0 {
		return hd, bad("reserved field is %d, want 0", r)
	}
	hd.Shard, hd.Shards = int(le.Uint32(b[16:])), int(le.Uint32(b[20:]))
	if hd.Shards < 1 || hd.Shards > MaxCountShards || hd.Shard >= hd.Shards {
		return hd, bad("shard %d of %d out of range", hd.Shard, hd.Shards)
	}
	hd.Contexts = le.Uint64(b[24:])
	hd.Entities, hd.Pairs = le.Uint64(b[32:]), le.Uint64(b[40:])
	hd.EntBytes, hd.PairLen = le.Uint64(b[48:]), le.Uint64(b[56:])
	body := uint64(len(b) - countsHeaderSize)
	if hd.EntBytes > body || hd.PairLen != body-hd.EntBytes {
		return hd, bad("section lengths %d + %d do not match the %d bytes after the header", hd.EntBytes, hd.PairLen, body)
	}
	ent := b[countsHeaderSize : countsHeaderSize+hd.EntBytes]
	pr := b[countsHeaderSize+hd.EntBytes:]
	if crcOf(ent) != le.Uint32(b[64:]) {
		return hd, bad("entity section checksum mismatch")
	}
	if crcOf(pr) != le.Uint32(b[68:]) {
		return hd, bad("pair section checksum mismatch")
	}
	add := func(c CountCell) error {
		if into == nil {
			return nil
		}
		return into.AddCell(c)
	}
	// Entity records.
	d := countDecoder{b: ent}
	prev := ""
	var nEnt uint64
	for d.i < len(d.b) && d.err == nil {
		e := d.name()
		k := d.uvarint()
		if d.err == nil && (k == 0 || k > graphidx.MaxValues) {
			d.fail("value count " + strconv.FormatUint(k, 10) + " out of range 1.." + strconv.Itoa(graphidx.MaxValues))
		}
		if d.err != nil {
			break
		}
		if nEnt > 0 && e <= prev {
			return hd, bad("entity records not strictly ascending at %s", strconv.Quote(e))
		}
		if s := (CountCell{A: e}).Shard(hd.Shards); s != hd.Shard {
			return hd, bad("entity %s belongs to shard %d", strconv.Quote(e), s)
		}
		prev = e
		nEnt++
		pv := ""
		for j := range k {
			v := d.name()
			n := d.uvarint()
			if d.err != nil {
				break
			}
			if j > 0 && v <= pv {
				return hd, bad("entity %s: value labels not strictly ascending", strconv.Quote(e))
			}
			pv = v
			if n == 0 {
				return hd, bad("entity %s value %s has count 0", strconv.Quote(e), strconv.Quote(v))
			}
			if err := add(CountCell{A: e, U: v, N: n}); err != nil {
				return hd, bad("%v", err)
			}
		}
	}
	if d.err != nil {
		return hd, bad("entity section: %v", d.err)
	}
	if nEnt != hd.Entities {
		return hd, bad("entity section holds %d records, header says %d", nEnt, hd.Entities)
	}
	// Pair records.
	d = countDecoder{b: pr}
	var pa, pb string
	var nPair uint64
	for d.i < len(d.b) && d.err == nil {
		a, b2 := d.name(), d.name()
		ul := d.labels()
		vl := d.labels()
		if d.err != nil {
			break
		}
		if a >= b2 {
			return hd, bad("pair %s, %s not ordered A < B", strconv.Quote(a), strconv.Quote(b2))
		}
		if nPair > 0 && cmpPair(pa, pb, a, b2) >= 0 {
			return hd, bad("pair records not strictly ascending at %s, %s", strconv.Quote(a), strconv.Quote(b2))
		}
		if s := (CountCell{A: a, B: b2, U: "-", V: "-"}).Shard(hd.Shards); s != hd.Shard {
			return hd, bad("pair %s, %s belongs to shard %d", strconv.Quote(a), strconv.Quote(b2), s)
		}
		pa, pb = a, b2
		nPair++
		rowHit := make([]bool, len(ul))
		colHit := make([]bool, len(vl))
		for i, u := range ul {
			for j, v := range vl {
				n := d.uvarint()
				if d.err != nil {
					break
				}
				if n == 0 {
					continue
				}
				rowHit[i], colHit[j] = true, true
				if err := add(CountCell{A: a, B: b2, U: u, V: v, N: n}); err != nil {
					return hd, bad("%v", err)
				}
			}
		}
		if d.err == nil && (slices.Contains(rowHit, false) || slices.Contains(colHit, false)) {
			return hd, bad("pair %s, %s lists a value label with no count", strconv.Quote(a), strconv.Quote(b2))
		}
	}
	if d.err != nil {
		return hd, bad("pair section: %v", d.err)
	}
	if nPair != hd.Pairs {
		return hd, bad("pair section holds %d records, header says %d", nPair, hd.Pairs)
	}
	if into != nil {
		into.AddContexts(hd.Contexts)
	}
	return hd, nil
}

// CountsInfo describes a directory of count shards read by ReadCounts.
type CountsInfo struct {
	Dir      string
	Shards   int      // shards in the set
	Files    []string // shard paths in shard order
	Bytes    int64    // total size of the shard files
	Contexts uint64   // contexts in the set (sum of the headers)
	Entities uint64   // entity records (an entity lives in one shard)
	Pairs    uint64   // pair records
}

// ReadCounts reads the complete set of count shards in dir and adds their
// counts to into. The directory must hold exactly one set: files named
// CountShardName(i, n) for every i in [0, n) and one n; other files are
// ignored, but a "counts-*.hwc" name of another form, a second n or a
// missing shard is an ErrBadCounts error. Every shard is fully checked
// (DecodeCountShard) before its counts are added, so a damaged set leaves
// into unchanged up to the damaged shard. Memory: one shard's bytes at a
// time plus the counts; time O(total bytes).
func ReadCounts(ctx context.Context, dir string, into *Partial) (CountsInfo, error) {
	info := CountsInfo{Dir: dir}
	paths, err := listCountSet(dir)
	if err != nil {
		return info, err
	}
	n := len(paths)
	shards := paths
	info.Shards = n
	for i := range n {
		if err := ctx.Err(); err != nil {
			return info, err
		}
		path := shards[i]
		b, err := os.ReadFile(path)
		if err != nil {
			return info, fmt.Errorf("graphidx: read count shard: %w", err)
		}
		hd, err := DecodeCountShard(b, path, nil)
		if err == nil && (hd.Shard != i || hd.Shards != n) {
			err = fmt.Errorf("%w: %s: header says shard %d of %d", ErrBadCounts, path, hd.Shard, hd.Shards)
		}
		if err == nil {
			_, err = DecodeCountShard(b, path, into)
		}
		if err != nil {
			return info, err
		}
		info.Files = append(info.Files, path)
		info.Bytes += int64(len(b))
		info.Contexts += hd.Contexts
		info.Entities += hd.Entities
		info.Pairs += hd.Pairs
	}
	return info, nil
}

// listCountSet returns the shard paths of the complete count set in dir, in
// shard order; see ReadCounts for the rules.
func listCountSet(dir string) ([]string, error) {
	des, err := os.ReadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("graphidx: read count shards: %w", err)
	}
	shards := map[int]string{}
	n := -1
	for _, de := range des {
		nm := de.Name()
		m := countShardRE.FindStringSubmatch(nm)
		if m == nil {
			if filepath.Ext(nm) == ".hwc" && nm[0] != '.' {
				return nil, fmt.Errorf("%w: %s: unexpected shard file name %s", ErrBadCounts, dir, nm)
			}
			continue
		}
		i, _ := strconv.Atoi(m[1])
		k, _ := strconv.Atoi(m[2])
		if n >= 0 && k != n {
			return nil, fmt.Errorf("%w: %s holds shards of two sets (%d and %d shards)", ErrBadCounts, dir, n, k)
		}
		if k < 1 || k > MaxCountShards || i >= k {
			return nil, fmt.Errorf("%w: %s: shard name %s out of range", ErrBadCounts, dir, nm)
		}
		n = k
		shards[i] = filepath.Join(dir, nm)
	}
	if n < 0 {
		return nil, fmt.Errorf("%w: %s holds no count shards (counts-*-of-*.hwc)", ErrBadCounts, dir)
	}
	paths := make([]string, n)
	for i := range n {
		p, ok := shards[i]
		if !ok {
			return nil, fmt.Errorf("%w: %s: shard %s is missing", ErrBadCounts, dir, CountShardName(i, n))
		}
		paths[i] = p
	}
	return paths, nil
}

// CompileCounts reads the count shards in dir, checks them (checksums,
// record order and bounds, a complete set) and their consistency (every
// pair value has a marginal, no table row or column above its marginal, no
// entity in more contexts than counted), and compiles them, applying
// WithMinSupport and WithMaxNeighbors. The Source equals the one Compile
// gives on the corpus the shards were counted from, so WriteFile of it is
// byte-identical to Build.
//
// Pruning happens here, at compile time only: count shards always hold the
// full sums, which is what makes them mergeable (MergeCounts).
//
// It is MergeCounts with one directory; see there for memory and time.
func CompileCounts(ctx context.Context, dir string, opts ...graphidx.BuildOption) (graphidx.Source, graphidx.BuildSummary, error) {
	return MergeCounts(ctx, []string{dir}, opts...)
}
