package graphidx

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"math"
	"os"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"unsafe"

	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// OpenOption configures Open.
type OpenOption interface{ applyOpen(*openConfig) }

type openConfig struct {
	lazy      bool
	noMmap    bool
	noHotCopy bool
	hotMin    uint64 // smallest index copied; 0: hotCopyMinEntities
}

type openOptionFunc func(*openConfig)

func (f openOptionFunc) applyOpen(c *openConfig) { f(c) }

// WithLazyVerify makes Open check only the magic, version, header checksum
// and section table, in O(1) plus the small label tables, instead of every
// section checksum and structural invariant in O(file size). Use it to open
// large indexes fast and call (*Index).Verify when convenient. Readers of a
// lazily opened index still never read out of bounds or panic, even on a
// damaged file: a damaged region gives empty or wrong answers until Verify
// reports it.
func WithLazyVerify() OpenOption { return openOptionFunc(func(c *openConfig) { c.lazy = true }) }

// WithoutMmap reads the whole file into memory instead of mapping it. The
// read API is the same. Platforms without mmap support always read.
//
// On Unix the copy is a private read-only anonymous mapping, released by
// Close, and on Linux it is advised to use transparent huge pages
// (madvise MADV_HUGEPAGE; granted when THP is in "madvise" or "always"
// mode). The open then costs O(file size) time and the file's size in
// memory that other processes do not share, but random reads take far
// fewer TLB misses than through the page cache's 4 KiB pages: on the
// router's 1M-entity benchmark index (642 MB) uncached decisions took
// about 15% less thread CPU (docs/PERFORMANCE.md). Choose it for a large
// index on a host with memory to spare.
func WithoutMmap() OpenOption { return openOptionFunc(func(c *openConfig) { c.noMmap = true }) }

// WithoutHotCopy keeps every section in the shared file mapping. By
// default Open (checked, memory-mapped, on Linux and other Unix systems)
// copies the per-entity sections that every query reads at random — the
// name, neighbour, ranked-list, marginal and pair-base offsets, the value
// set numbers and the marginals — into private memory advised to use
// transparent huge pages (about 60 bytes per entity: 60 MB of the 831 MB
// 1M-entity benchmark index), when the index has at least
// hotCopyMinEntities entities; their random reads then take far fewer TLB
// misses than through the page cache's 4 KiB pages (docs/SEARCH.md,
// twelfth round). An index opened WithLazyVerify or WithoutMmap is never
// copied this way (the first keeps its O(1) open, the second is all private
// memory already). Use this option to share all of the index's memory
// between processes.
func WithoutHotCopy() OpenOption {
	return openOptionFunc(func(c *openConfig) { c.noHotCopy = true })
}

// hotCopyMinEntities is the smallest index whose hot sections Open copies
// (WithoutHotCopy): below it they fit the TLB's reach anyway.
const hotCopyMinEntities = 1 << 16

// withHotCopyMin sets the smallest index Open copies the hot sections of
// (tests copy small indexes with it).
func withHotCopyMin(n uint64) OpenOption {
	return openOptionFunc(func(c *openConfig) { c.hotMin = n })
}

// hotSections are the sections Open copies into private memory
// (WithoutHotCopy): O(entities) each, read at random by every query.
var hotSections = [...]int{secNameOffs, secEntVSet, secMargOffs, secMarginals, secNbrOffs, secPairBase, secRankOffs}

// copyHot copies the hot sections of a checked, mapped view into private
// memory (fileio.CopyAnon) and points the view's slices at the copies. It
// returns the copy's release function, or nil when it copied nothing (an
// allocation that fails leaves the view on the mapping: the copy only
// speeds reads up). O(size of the hot sections).
func (v *view) copyHot(min uint64) func() error {
	if min == 0 {
		min = hotCopyMinEntities
	}
	if !hostLittleEndian || !v.checked || v.n < min {
		return nil
	}
	var parts [len(hotSections)][]byte
	for i, id := range hotSections {
		parts[i] = v.section(id)
	}
	cp, release, err := fileio.CopyAnon(parts[:])
	if err != nil {
		return nil
	}
	v.decodeFrom(func(id int) []byte {
		if i := slices.Index(hotSections[:], id); i >= 0 {
			return cp[i]
		}
		return v.section(id)
	})
	return release
}

// Index is an opened locality index. All read methods are safe for
// concurrent use, allocate nothing (except Name and the Verify pass), and
// never panic on any input id: out-of-range ids give zero values.
//
// Slices and PairStats returned by an Index alias its memory map: they are
// valid until Close and must not be modified. Strings (Name, Values) are
// copies and stay valid forever.
//
// Close contract: the caller closes an Index only after every reader has
// finished with it (the router swaps in a new index first and closes the old
// one once its in-flight queries are done). Close is idempotent. Methods
// called after Close return zero values (NumEntities()==0, Pair ok=false,
// Verify returns ErrClosed) and do not crash; but slices obtained before
// Close must not be read after it.
type Index struct {
	path    string
	size    int64
	fi      os.FileInfo // the file as opened, to tell an in-place change (Guard)
	mapped  []byte      // the memory map, nil when the file was read
	v       atomic.Pointer[view]
	mu      sync.Mutex
	closed  bool
	release func() error
}

// view is the decoded, immutable content of one open file.
type view struct {
	closed     bool
	data       []byte
	h          header
	uniform    bool
	k          int // uniform K
	n          uint64
	nameOffs   []uint64
	nameBytes  []byte
	labels     []string   // copied
	sets       [][]string // value labels per value set, sub-slices of setFlat
	vsetOffs   []uint32
	vsetLabels []uint32
	entVSet    []uint32
	margOffs   []uint64
	marg       []uint64
	nbrOffs    []uint64
	nbrs       []uint32
	pairBase   []uint64
	pairOffs   []uint64
	counts     []uint32
	rankOffs   []uint64
	rank       []uint32
	rankPos    []uint32 // parallel to rank: the pair's position in lo's upper list
	rankTab    []uint64 // parallel to rank: the pair's table (rankTabRef)
	maxK       int      // the largest K of any value set
	// checked: every section and invariant was checked at open (parse
	// with full), among them that every pair's table has K_lo·K_hi
	// entries, which tables relies on.
	checked bool

	// names is Lookup's in-memory sample of the sorted names, built on
	// the first Lookup (nameSample).
	names struct {
		once   sync.Once
		keys   []uint64
		prefix string // the prefix every name shares
	}
}

var closedView = &view{closed: true}

// Open opens the locality index at path, memory-mapped and zero-copy.
//
// Validation happens in this order, each failure with its own sentinel
// wrapped in a *CorruptionError naming the path: magic (ErrBadMagic),
// version (ErrVersion), header checksum (ErrChecksum), header fields, size
// and section table (ErrCorrupt, ErrSectionTable), then — unless
// WithLazyVerify — every section checksum (ErrChecksum) and the structural
// invariants (ErrCorrupt). A file with any single byte changed is rejected.
//
// Cost: O(1) + O(labels + value sets) with WithLazyVerify; O(file size +
// E·log(deg)) by default (E directed edges).
//
// The file must not be modified or truncated in place while it is open
// (WriteFile never does: it replaces files by rename, and an open Index
// keeps reading the old content). Truncating a mapped file makes reads
// fault (SIGBUS), which kills the process unless the read runs inside
// Guard; overwriting it in place changes the content under the reader.
func Open(path string, opts ...OpenOption) (*Index, error) {
	var cfg openConfig
	for _, o := range opts {
		if o != nil {
			o.applyOpen(&cfg)
		}
	}
	// A named pipe would block the open until a writer comes: look first.
	if st, err := os.Stat(path); err == nil && !st.Mode().IsRegular() {
		return nil, notFile(path, st.Mode())
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("graphidx: open: %w", err)
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("graphidx: stat %s: %w", path, err)
	}
	if !st.Mode().IsRegular() {
		return nil, notFile(path, st.Mode())
	}
	size := st.Size()
	if size > math.MaxInt || size < 0 {
		return nil, &CorruptionError{Path: path, Err: ErrCorrupt, Detail: fmt.Sprintf("file size %d not addressable", size)}
	}
	var (
		data    []byte
		release = func() error { return nil }
	)
	switch {
	case size < headerSize || !fileio.MmapSupported:
		data, err = fileio.ReadAligned(f, int(size))
	case cfg.noMmap:
		data, release, err = fileio.ReadAnon(f, int(size))
	default:
		data, release, err = fileio.MapFile(f, int(size))
	}
	if err != nil {
		return nil, err
	}
	v, err := parse(data, !cfg.lazy)
	if err != nil {
		_ = release()
		if ce, ok := err.(*CorruptionError); ok {
			ce.Path = path
		}
		return nil, err
	}
	mapped := size >= headerSize && !cfg.noMmap && fileio.MmapSupported
	if mapped && !cfg.noHotCopy {
		if rel := v.copyHot(cfg.hotMin); rel != nil {
			unmap := release
			release = func() error { return errors.Join(rel(), unmap()) }
		}
	}
	x := &Index{path: path, size: size, fi: st, release: release}
	if mapped {
		x.mapped = data
	}
	x.v.Store(v)
	return x, nil
}

// Close releases the memory map. It is safe to call more than once; see the
// Index documentation for the contract with concurrent readers.
func (x *Index) Close() error {
	x.mu.Lock()
	defer x.mu.Unlock()
	if x.closed {
		return nil
	}
	x.closed = true
	x.v.Store(closedView)
	return x.release()
}

// Verify checks every section checksum, the padding and every structural
// invariant, in O(file size + E·log(deg)). It returns nil, ErrClosed, or a
// *CorruptionError. It is safe to call concurrently with readers.
func (x *Index) Verify() error { return x.VerifyContext(context.Background()) }

// VerifyContext is Verify that stops early, returning ctx.Err(), when ctx is
// done (it polls between sections and every 65536 entities).
func (x *Index) VerifyContext(ctx context.Context) error {
	v := x.v.Load()
	if v.closed {
		return ErrClosed
	}
	if err := v.verifyFull(ctx); err != nil {
		if ce, ok := err.(*CorruptionError); ok {
			ce.Path = x.path
		}
		return err
	}
	return nil
}

// hostLittleEndian is true when zero-copy integer slices can be used.
var hostLittleEndian = binary.NativeEndian.Uint16([]byte{1, 0}) == 1

func asU64s(b []byte) []uint64 {
	if len(b) < 8 {
		return nil
	}
	if hostLittleEndian {
		return unsafe.Slice((*uint64)(unsafe.Pointer(unsafe.SliceData(b))), len(b)/8)
	}
	out := make([]uint64, len(b)/8)
	for i := range out {
		out[i] = le.Uint64(b[8*i:])
	}
	return out
}

func asU32s(b []byte) []uint32 {
	if len(b) < 4 {
		return nil
	}
	if hostLittleEndian {
		return unsafe.Slice((*uint32)(unsafe.Pointer(unsafe.SliceData(b))), len(b)/4)
	}
	out := make([]uint32, len(b)/4)
	for i := range out {
		out[i] = le.Uint32(b[4*i:])
	}
	return out
}

// parse validates data (header always; everything when full) and decodes the
// sections into a view.
func parse(data []byte, full bool) (*view, error) {
	if len(data) > 0 && uintptr(unsafe.Pointer(&data[0]))%8 != 0 {
		words := make([]uint64, (len(data)+7)/8)
		b := unsafe.Slice((*byte)(unsafe.Pointer(&words[0])), len(words)*8)[:len(data)]
		copy(b, data)
		data = b
	}
	// 1. Magic.
	if len(data) < len(Magic) {
		if strings.HasPrefix(Magic, string(data)) {
			return nil, corruptf(ErrCorrupt, "truncated: %d bytes, shorter than the magic", len(data))
		}
		return nil, corruptf(ErrBadMagic, "file starts with %q", data)
	}
	if string(data[:len(Magic)]) != Magic {
		return nil, corruptf(ErrBadMagic, "file starts with %q, want %q", data[:len(Magic)], Magic)
	}
	// 2. Version.
	if len(data) < offVersion+4 {
		return nil, corruptf(ErrCorrupt, "truncated: %d bytes, no version field", len(data))
	}
	if ver := le.Uint32(data[offVersion:]); ver != FormatVersion {
		if ver < FormatVersion {
			return nil, corruptf(ErrVersion, "file has format version %d, this build reads %d; rebuild the index (hopwise build) to add the ranked pair tables", ver, FormatVersion)
		}
		return nil, corruptf(ErrVersion, "file has format version %d, this build reads %d", ver, FormatVersion)
	}
	// 3. Header checksum.
	if len(data) < headerSize {
		return nil, corruptf(ErrCorrupt, "truncated: %d bytes, shorter than the %d-byte header", len(data), headerSize)
	}
	if got, want := crc32.Checksum(data[:headerCRCOffset], castagnoli), le.Uint32(data[headerCRCOffset:]); got != want {
		return nil, corruptf(ErrChecksum, "header CRC-32C is %08x, stored %08x", got, want)
	}
	// 4. Header fields and section table.
	h := decodeHeader(data)
	v := &view{data: data, h: h}
	if err := v.checkHeader(uint64(len(data))); err != nil {
		return nil, err
	}
	// 5. Section checksums and padding.
	if full {
		if err := v.checkSums(context.Background()); err != nil {
			return nil, err
		}
	}
	v.decode()
	// Small tables are always checked: they are O(labels + value sets).
	if err := v.checkLabels(); err != nil {
		return nil, err
	}
	// 6. Structural invariants.
	if full {
		if err := v.checkStructure(context.Background()); err != nil {
			return nil, err
		}
		v.checked = true
	}
	return v, nil
}

// checkHeader validates the checksummed header fields and the section table
// against the file size.
func (v *view) checkHeader(size uint64) error {
	h := &v.h
	if got := le.Uint32(v.data[offHeaderSize:]); got != headerSize {
		return corruptf(ErrCorrupt, "header size field %d, want %d", got, headerSize)
	}
	if got := le.Uint32(v.data[offNumSect:]); got != numSections {
		return corruptf(ErrCorrupt, "section count %d, want %d", got, numSections)
	}
	if r := le.Uint32(v.data[offReserved:]); r != 0 {
		return corruptf(ErrCorrupt, "reserved header field is %d, want 0", r)
	}
	if h.Flags&^knownFlags != 0 {
		return corruptf(ErrCorrupt, "unknown header flags %#x", h.Flags&^knownFlags)
	}
	if h.FileSize != size {
		if size < h.FileSize {
			return corruptf(ErrCorrupt, "truncated: header says %d bytes, file has %d", h.FileSize, size)
		}
		return corruptf(ErrCorrupt, "%d trailing bytes after the %d the header declares", size-h.FileSize, h.FileSize)
	}
	if g := generationOf(h); g != h.Generation {
		return corruptf(ErrCorrupt, "generation %016x does not match the content fingerprint %016x", h.Generation, g)
	}
	if h.RankPrefix < 1 || h.RankPrefix > MaxRankPrefix {
		return corruptf(ErrCorrupt, "rank prefix %d out of range", h.RankPrefix)
	}
	// Bound every count by the file size before multiplying.
	switch {
	case h.Entities > math.MaxUint32 || h.Entities > size/8:
		return corruptf(ErrCorrupt, "entity count %d impossible for a %d-byte file", h.Entities, size)
	case h.Pairs > size/8 || h.Edges != 2*h.Pairs:
		return corruptf(ErrCorrupt, "pair count %d / edge count %d impossible for a %d-byte file", h.Pairs, h.Edges, size)
	case h.Values > size/8 || h.Values < h.Entities || h.Values > h.Entities*MaxValues:
		return corruptf(ErrCorrupt, "value count %d impossible for %d entities", h.Values, h.Entities)
	case h.Labels > size/8 || h.VSets > size/4 || h.VSets > h.Entities || (h.Entities > 0 && (h.Labels == 0 || h.VSets == 0)):
		return corruptf(ErrCorrupt, "label count %d / value-set count %d impossible for %d entities", h.Labels, h.VSets, h.Entities)
	case h.Contexts == 0 && h.Pairs > 0:
		return corruptf(ErrCorrupt, "%d pairs over zero contexts", h.Pairs)
	}
	v.n = h.Entities
	v.uniform = h.Flags&flagUniformK != 0
	if v.uniform {
		if h.UniformK < 1 || h.UniformK > MaxValues || h.Entities == 0 {
			return corruptf(ErrCorrupt, "uniform K %d invalid (entities %d)", h.UniformK, h.Entities)
		}
		if h.Values != h.Entities*uint64(h.UniformK) {
			return corruptf(ErrCorrupt, "value count %d, want %d×%d", h.Values, h.Entities, h.UniformK)
		}
		v.k = int(h.UniformK)
	} else if h.UniformK != 0 {
		return corruptf(ErrCorrupt, "uniform K %d set without the uniform flag", h.UniformK)
	}

	n, p := h.Entities, h.Pairs
	const anyLen = math.MaxUint64
	// rules[i] is the exact length of section i+1, or anyLen with a divisor.
	type rule struct{ exact, div uint64 }
	rules := [numSections]rule{
		{8 * (n + 1), 0}, // name offsets
		{anyLen, 1},      // name bytes
		{8 * (h.Labels + 1), 0},
		{anyLen, 1},
		{4 * (h.VSets + 1), 0},
		{anyLen, 4}, // value-set labels
		{4 * n, 0},
		{0, 0}, // marginal offsets, set below
		{8 * h.Values, 0},
		{8 * (n + 1), 0},
		{4 * h.Edges, 0},
		{8 * (n + 1), 0},
		{0, 0}, // pair offsets, set below
		{anyLen, 4},
		{8 * (n + 1), 0},
		{anyLen, 4},
		{anyLen, 4}, // ranked pair positions: as long as the ranked neighbours, checked below
		{anyLen, 8}, // ranked pair tables: twice as long, checked below
	}
	if v.uniform {
		kk := uint64(v.k * v.k)
		if p > size/(4*kk) {
			return corruptf(ErrSectionTable, "%d pairs of %d×%d tables cannot fit in %d bytes", p, v.k, v.k, size)
		}
		rules[secCounts-1] = rule{4 * kk * p, 0}
	} else {
		rules[secMargOffs-1] = rule{8 * (n + 1), 0}
		rules[secPairOffs-1] = rule{8 * (p + 1), 0}
	}
	pos := uint64(headerSize)
	for i, s := range h.Sections {
		id := i + 1
		name := sectionName(id)
		if s.ID != uint32(id) {
			return corruptf(ErrSectionTable, "entry %d has section id %d, want %d", i, s.ID, id)
		}
		if s.Offset != align8(pos) {
			return corruptf(ErrSectionTable, "section %s at offset %d, want %d", name, s.Offset, align8(pos))
		}
		if s.Offset > size || s.Length > size-s.Offset {
			return corruptf(ErrSectionTable, "section %s [%d, +%d) beyond the %d-byte file", name, s.Offset, s.Length, size)
		}
		r := rules[i]
		if r.exact != anyLen && s.Length != r.exact {
			return corruptf(ErrSectionTable, "section %s has %d bytes, want %d", name, s.Length, r.exact)
		}
		if r.exact == anyLen && s.Length%r.div != 0 {
			return corruptf(ErrSectionTable, "section %s has %d bytes, not a multiple of %d", name, s.Length, r.div)
		}
		pos = s.Offset + s.Length
	}
	if pos != size {
		return corruptf(ErrSectionTable, "sections end at %d, file has %d bytes", pos, size)
	}
	if r, rp := h.Sections[secRank-1].Length, h.Sections[secRankPos-1].Length; r != rp {
		return corruptf(ErrSectionTable, "section %s has %d bytes, want %d (one entry per ranked neighbour)", sectionName(secRankPos), rp, r)
	}
	if r, rt := h.Sections[secRank-1].Length, h.Sections[secRankTab-1].Length; r > math.MaxUint64/2 || rt != 2*r {
		return corruptf(ErrSectionTable, "section %s has %d bytes, want %d (8 bytes per ranked neighbour)", sectionName(secRankTab), rt, 2*r)
	}
	return nil
}

// section returns the bytes of section id.
func (v *view) section(id int) []byte {
	s := v.h.Sections[id-1]
	return v.data[s.Offset : s.Offset+s.Length]
}

// checkSums verifies every section's CRC-32C and that padding is zero.
func (v *view) checkSums(ctx context.Context) error {
	pos := uint64(headerSize)
	for i, s := range v.h.Sections {
		if err := ctx.Err(); err != nil {
			return err
		}
		for _, b := range v.data[pos:s.Offset] {
			if b != 0 {
				return corruptf(ErrCorrupt, "non-zero padding before section %s", sectionName(i+1))
			}
		}
		if got := crc32.Checksum(v.section(i+1), castagnoli); got != s.CRC {
			return corruptf(ErrChecksum, "section %s CRC-32C is %08x, stored %08x", sectionName(i+1), got, s.CRC)
		}
		pos = s.Offset + s.Length
	}
	return nil
}

// decode slices the sections (zero-copy on little-endian hosts).
func (v *view) decode() { v.decodeFrom(v.section) }

// decodeFrom points the view's typed slices at the sections sec returns
// (the file's, or copyHot's private copies of some).
func (v *view) decodeFrom(sec func(id int) []byte) {
	v.nameOffs = asU64s(sec(secNameOffs))
	v.nameBytes = sec(secNameBytes)
	v.vsetOffs = asU32s(sec(secVSetOffs))
	v.vsetLabels = asU32s(sec(secVSetLabels))
	v.entVSet = asU32s(sec(secEntVSet))
	v.margOffs = asU64s(sec(secMargOffs))
	v.marg = asU64s(sec(secMarginals))
	v.nbrOffs = asU64s(sec(secNbrOffs))
	v.nbrs = asU32s(sec(secNbrs))
	v.pairBase = asU64s(sec(secPairBase))
	v.pairOffs = asU64s(sec(secPairOffs))
	v.counts = asU32s(sec(secCounts))
	v.rankOffs = asU64s(sec(secRankOffs))
	v.rank = asU32s(sec(secRank))
	v.rankPos = asU32s(sec(secRankPos))
	v.rankTab = asU64s(sec(secRankTab))
}

// checkLabels validates the label dictionary and value sets and builds the
// per-set label slices (copies). O(labels + value-set entries).
func (v *view) checkLabels() error {
	offs := asU64s(v.section(secLabelOffs))
	lb := v.section(secLabelBytes)
	if len(offs) == 0 || offs[0] != 0 || offs[len(offs)-1] != uint64(len(lb)) {
		return corruptf(ErrCorrupt, "label offsets do not span the label bytes")
	}
	v.labels = make([]string, len(offs)-1)
	for i := range v.labels {
		s, e := offs[i], offs[i+1]
		if s > e || e > uint64(len(lb)) {
			return corruptf(ErrCorrupt, "label %d offsets [%d, %d) invalid", i, s, e)
		}
		v.labels[i] = string(lb[s:e])
		if i > 0 && v.labels[i] <= v.labels[i-1] {
			return corruptf(ErrCorrupt, "labels not strictly ascending at %d", i)
		}
	}
	so := v.vsetOffs
	if len(so) == 0 || so[0] != 0 || uint64(so[len(so)-1]) != uint64(len(v.vsetLabels)) {
		return corruptf(ErrCorrupt, "value-set offsets do not span the value-set labels")
	}
	flat := make([]string, len(v.vsetLabels))
	for i, id := range v.vsetLabels {
		if uint64(id) >= uint64(len(v.labels)) {
			return corruptf(ErrCorrupt, "value-set label id %d out of range (%d labels)", id, len(v.labels))
		}
		flat[i] = v.labels[id]
	}
	v.sets = make([][]string, len(so)-1)
	for i := range v.sets {
		s, e := so[i], so[i+1]
		if s >= e || e-s > MaxValues || uint64(e) > uint64(len(flat)) {
			return corruptf(ErrCorrupt, "value set %d has offsets [%d, %d) (1..%d values)", i, s, e, MaxValues)
		}
		for j := s + 1; j < e; j++ {
			if v.vsetLabels[j] <= v.vsetLabels[j-1] {
				return corruptf(ErrCorrupt, "value set %d labels not strictly ascending", i)
			}
		}
		if v.uniform && int(e-s) != v.k {
			return corruptf(ErrCorrupt, "value set %d has %d values in a uniform-K=%d index", i, e-s, v.k)
		}
		v.sets[i] = flat[s:e:e]
		v.maxK = max(v.maxK, len(v.sets[i]))
	}
	return nil
}

// span returns [offs[i], offs[i+1]) if it is a valid range within limit.
func span(offs []uint64, i uint64, limit int) (int, int, bool) {
	if i+1 >= uint64(len(offs)) {
		return 0, 0, false
	}
	s, e := offs[i], offs[i+1]
	if s > e || e > uint64(limit) {
		return 0, 0, false
	}
	return int(s), int(e), true
}

// numValues returns K of entity id, or 0 if id or its value set is invalid.
func (v *view) numValues(id EntityID) int {
	if uint64(id) >= v.n {
		return 0
	}
	if v.uniform {
		return v.k
	}
	if int(id) >= len(v.entVSet) {
		return 0
	}
	s := v.entVSet[id]
	if int(s) >= len(v.sets) {
		return 0
	}
	return len(v.sets[s])
}

func (v *view) nameAt(i uint64) string {
	s, e, ok := span(v.nameOffs, i, len(v.nameBytes))
	if !ok || s == e {
		return ""
	}
	return unsafe.String(&v.nameBytes[s], e-s)
}

func (v *view) neighbors(id EntityID) []EntityID {
	s, e, ok := span(v.nbrOffs, uint64(id), len(v.nbrs))
	if !ok || uint64(id) >= v.n {
		return nil
	}
	return v.nbrs[s:e:e]
}

// upperNeighbors returns the suffix of id's list with ids > id, and the
// index of the first stored pair (id, ·).
func (v *view) upperNeighbors(id EntityID) ([]EntityID, uint64) {
	nb := v.neighbors(id)
	if nb == nil || uint64(id)+1 >= uint64(len(v.pairBase)) {
		return nil, 0
	}
	b0, b1 := v.pairBase[id], v.pairBase[id+1]
	if b0 > b1 || b1-b0 > uint64(len(nb)) {
		return nil, 0
	}
	return nb[uint64(len(nb))-(b1-b0):], b0
}

// pairIndex returns the stored index of the pair (lo, hi), lo < hi.
func (v *view) pairIndex(lo, hi EntityID) (uint64, bool) {
	up, base := v.upperNeighbors(lo)
	j, found := slices.BinarySearch(up, hi)
	if !found {
		return 0, false
	}
	return base + uint64(j), true
}

// table returns the stored count table of pair index q, which must have
// exactly cells entries.
func (v *view) table(q uint64, cells int) ([]uint32, bool) {
	s, e := v.tableSpan(q)
	if e > uint64(len(v.counts)) || e < s || e-s != uint64(cells) {
		return nil, false
	}
	return v.counts[s:e:e], true
}

// tableSpan returns the entries [s, e) of pair index q's table in the
// counts section, or the empty span (0, 0) when q or its offsets are out
// of range. The caller checks e against the counts and the table's size.
// O(1).
func (v *view) tableSpan(q uint64) (s, e uint64) {
	if v.uniform {
		kk := uint64(v.k * v.k)
		if q >= v.h.Pairs {
			return 0, 0
		}
		return q * kk, (q + 1) * kk
	}
	a, b, ok := span(v.pairOffs, q, len(v.counts))
	if !ok {
		return 0, 0
	}
	return uint64(a), uint64(b)
}

func (v *view) pair(a, b EntityID) (PairStats, bool) {
	if a == b || uint64(a) >= v.n || uint64(b) >= v.n {
		return PairStats{}, false
	}
	lo, hi, swapped := a, b, false
	if a > b {
		lo, hi, swapped = b, a, true
	}
	q, ok := v.pairIndex(lo, hi)
	if !ok {
		return PairStats{}, false
	}
	s, e := v.tableSpan(q)
	if e > uint64(len(v.counts)) || e < s {
		return PairStats{}, false
	}
	var ka, kb int
	if v.checked && e-s == uint64(v.maxK*v.maxK) { // see tables
		ka, kb = v.maxK, v.maxK
	} else {
		ka, kb = v.numValues(a), v.numValues(b)
	}
	if ka == 0 || kb == 0 || e-s != uint64(ka*kb) {
		return PairStats{}, false
	}
	return newStoredPairStats(a, b, ka, kb, v.counts[s:e:e], swapped), true
}

func (v *view) marginal(id EntityID) []uint64 {
	k := v.numValues(id)
	if k == 0 {
		return nil
	}
	var s, e uint64
	if v.uniform {
		s, e = uint64(id)*uint64(k), uint64(id+1)*uint64(k)
	} else {
		a, b, ok := span(v.margOffs, uint64(id), len(v.marg))
		if !ok {
			return nil
		}
		s, e = uint64(a), uint64(b)
	}
	if e > uint64(len(v.marg)) || e-s != uint64(k) {
		return nil
	}
	return v.marg[s:e:e]
}

// --- read API ---

// Lookup returns the id of the entity called name. A binary search over
// an in-memory sample of the sorted names (nameSample) narrows the range to
// at most nameSampleStep names, then a binary search over the names
// themselves: O(log n + len(name)·log nameSampleStep), no allocation. The
// sample is built on the first Lookup (O(n / nameSampleStep) reads, 8 bytes
// per sampled name); without it the search took ~2·log₂ n dependent cache
// misses on a large index (names' offsets and bytes), two Lookups being
// about a tenth of an uncached decision at 1M entities.
func (x *Index) Lookup(name string) (EntityID, bool) {
	v := x.v.Load()
	lo, hi := v.nameRange(name)
	v.touchNames(lo, hi)
	return v.searchName(name, lo, hi)
}

// LookupTwo is Lookup of two names at once: (ida, oka) = Lookup(a) and
// (idb, okb) = Lookup(b). The cache lines of both names' ranges are read
// together, the offsets of both, then the bytes of both, so that the two
// look-ups' cache misses overlap: two rounds of misses instead of four on an
// index larger than the caches. Same answers, no allocation.
func (x *Index) LookupTwo(a, b string) (ida EntityID, oka bool, idb EntityID, okb bool) {
	v := x.v.Load()
	loA, hiA := v.nameRange(a)
	loB, hiB := v.nameRange(b)
	t := v.touchNameOffs(loA, hiA) + v.touchNameOffs(loB, hiB)
	t += v.touchNameBytes(loA, hiA) + v.touchNameBytes(loB, hiB)
	if t == touchMagic { // keeps the reads; practically never true
		touchSink.Add(1)
	}
	ida, oka = v.searchName(a, loA, hiA)
	idb, okb = v.searchName(b, loB, hiB)
	return ida, oka, idb, okb
}

// searchName is the binary search of name among the names [lo, hi)
// (nameRange). O(log(hi − lo)) name comparisons.
func (v *view) searchName(name string, lo, hi uint64) (EntityID, bool) {
	for lo < hi {
		mid := lo + (hi-lo)/2
		switch c := strings.Compare(v.nameAt(mid), name); {
		case c == 0:
			return EntityID(mid), true
		case c < 0:
			lo = mid + 1
		default:
			hi = mid
		}
	}
	return 0, false
}

// touchNames reads every cache line of the names [lo, hi) and of their
// offsets before Lookup's binary search probes them: the reads are
// independent, so their cache misses overlap (two rounds: the offsets, then
// the bytes they name), where the search's probes would meet them one after
// the other (about ten dependent misses for a range of nameSampleStep
// names on an index larger than the caches). A range wider than a sample
// step (names sharing a sampled key) is not touched. O(hi − lo).
func (v *view) touchNames(lo, hi uint64) {
	if t := v.touchNameOffs(lo, hi) + v.touchNameBytes(lo, hi); t == touchMagic { // keeps the reads; practically never true
		touchSink.Add(1)
	}
}

// touchNameOffs reads every cache line of the offsets of the names
// [lo, hi] (touchNames' first round) and returns a sum of what it read.
func (v *view) touchNameOffs(lo, hi uint64) uint64 {
	if hi <= lo || hi-lo > nameSampleStep || hi >= uint64(len(v.nameOffs)) {
		return 0
	}
	var t uint64
	for i := lo; i <= hi; i += 8 { // 8 offsets per 64-byte line
		t += v.nameOffs[i]
	}
	return t + v.nameOffs[hi]
}

// touchNameBytes reads every cache line of the bytes of the names
// [lo, hi) (touchNames' second round) and returns a sum of what it read.
func (v *view) touchNameBytes(lo, hi uint64) uint64 {
	if hi <= lo || hi-lo > nameSampleStep || hi >= uint64(len(v.nameOffs)) {
		return 0
	}
	var t uint64
	s, e := v.nameOffs[lo], v.nameOffs[hi]
	if s < e && e <= uint64(len(v.nameBytes)) {
		for p := s; p < e; p += 64 {
			t += uint64(v.nameBytes[p])
		}
	}
	return t
}

// touchMagic and touchSink keep touch loops' reads from being optimised
// away: the loop's sum is compared with a value it is practically never
// equal to.
const touchMagic = 0x9e3779b97f4a7c15

var touchSink atomic.Uint64

// nameSampleStep is the gap between sampled names: 32 keeps the sample at
// 0.25 bytes per entity (256 KiB at 1M entities, mostly cache-resident)
// and leaves five probes of the names themselves.
const nameSampleStep = 32

// nameKey is the first 8 bytes of s, big-endian, zero-padded. For
// byte-wise ordered strings a ≤ b, nameKey(a) ≤ nameKey(b) (truncation and
// padding keep the order), so a name's key bounds where it can be. The
// sample keys the names after the prefix they all share (names such as
// "sensor000123" would otherwise share most of their 8 bytes). O(1).
func nameKey(s string) uint64 {
	var k uint64
	for i := 0; i < 8; i++ {
		k <<= 8
		if i < len(s) {
			k |= uint64(s[i])
		}
	}
	return k
}

// nameRange returns [lo, hi) holding every entity whose name has the key
// of name, from the sample: names before the last sampled key below it,
// and from the first sampled key above it on, cannot match. O(log n).
func (v *view) nameRange(name string) (uint64, uint64) {
	v.names.once.Do(func() {
		if v.n == 0 {
			return
		}
		// Names are sorted, so the first and the last share the prefix
		// that every name shares.
		first, last := v.nameAt(0), v.nameAt(v.n-1)
		p := 0
		for p < len(first) && p < len(last) && first[p] == last[p] {
			p++
		}
		v.names.prefix = strings.Clone(first[:p])
		keys := make([]uint64, 0, (v.n+nameSampleStep-1)/nameSampleStep)
		for i := uint64(0); i < v.n; i += nameSampleStep {
			nm := v.nameAt(i)
			if len(nm) < p {
				nm = "" // a corrupt offset (WithLazyVerify); no panic
			} else {
				nm = nm[p:]
			}
			keys = append(keys, nameKey(nm))
		}
		v.names.keys = keys
	})
	if !strings.HasPrefix(name, v.names.prefix) {
		return 0, 0 // no name lacks the shared prefix
	}
	keys := v.names.keys
	k := nameKey(name[len(v.names.prefix):])
	// j1: first sample with key ≥ k; sample j1−1 (key < k) and every name
	// before it precede name. j2: first sample with key > k; it and every
	// name after it follow name.
	j1, _ := slices.BinarySearch(keys, k)
	j2 := len(keys)
	if k < math.MaxUint64 {
		j2, _ = slices.BinarySearch(keys[j1:], k+1)
		j2 += j1
	}
	lo, hi := uint64(0), v.n
	if j1 > 0 {
		lo = uint64(j1-1)*nameSampleStep + 1
	}
	if j2 < len(keys) {
		hi = min(hi, uint64(j2)*nameSampleStep)
	}
	return lo, hi
}

// Name returns the name of entity id ("" if out of range). The string is a
// copy and outlives the Index. It allocates.
func (x *Index) Name(id EntityID) string {
	v := x.v.Load()
	if uint64(id) >= v.n {
		return ""
	}
	return strings.Clone(v.nameAt(uint64(id)))
}

// AppendName appends the bytes of entity id's name to dst and returns the
// extended slice (dst unchanged if id is out of range). Unlike Name it
// allocates only when dst must grow, which lets a caller copy names into
// memory it owns (router.NameAppender). O(len(name)).
func (x *Index) AppendName(dst []byte, id EntityID) []byte {
	v := x.v.Load()
	if uint64(id) >= v.n {
		return dst
	}
	return append(dst, v.nameAt(uint64(id))...)
}

// NumValues returns K, the number of values of entity id (0 if out of range).
func (x *Index) NumValues(id EntityID) int { return x.v.Load().numValues(id) }

// Values returns the value labels of entity id in ascending byte order. The
// slice is shared and must not be modified.
func (x *Index) Values(id EntityID) []string {
	v := x.v.Load()
	if uint64(id) >= v.n || int(id) >= len(v.entVSet) {
		return nil
	}
	s := v.entVSet[id]
	if int(s) >= len(v.sets) {
		return nil
	}
	return v.sets[s]
}

// ValueIndex returns the position of label among the values of entity id.
// O(log K), no allocation.
func (x *Index) ValueIndex(id EntityID, label string) (int, bool) {
	return slices.BinarySearch(x.Values(id), label)
}

// Neighbors returns the ids of every entity observed together with id, in
// ascending order. The slice aliases the index memory.
func (x *Index) Neighbors(id EntityID) []EntityID { return x.v.Load().neighbors(id) }

// Degree returns the number of neighbours of id.
func (x *Index) Degree(id EntityID) int { return len(x.Neighbors(id)) }

// RankedNeighbors returns up to RankPrefix() neighbours of id ordered by
// descending pair support, ties by ascending id. Entities with at most
// RankPrefix neighbours get all of them.
func (x *Index) RankedNeighbors(id EntityID) []EntityID {
	v := x.v.Load()
	if uint64(id) >= v.n {
		return nil
	}
	s, e, ok := span(v.rankOffs, uint64(id), len(v.rank))
	if !ok {
		return nil
	}
	return v.rank[s:e:e]
}

// Pair returns the statistics of the ordered pair (a, b); ok is false when
// the pair is not stored (never observed together, pruned, a == b, or an id
// out of range). Two binary searches' worth of work: O(log deg(min(a,b))),
// no allocation. The PairStats view is valid until Close.
func (x *Index) Pair(a, b EntityID) (PairStats, bool) { return x.v.Load().pair(a, b) }

// Marginal returns the marginal counts of entity id: Marginal(id)[u] is the
// number of contexts observing id=u. The slice aliases the index memory.
func (x *Index) Marginal(id EntityID) []uint64 { return x.v.Load().marginal(id) }

// EntitySupport returns the number of contexts that observe entity id (the
// sum of its marginals). O(K).
func (x *Index) EntitySupport(id EntityID) uint64 {
	var s uint64
	for _, c := range x.Marginal(id) {
		s += c
	}
	return s
}

// NumEntities returns the number of entities.
func (x *Index) NumEntities() int { return int(x.v.Load().n) }

// NumContexts returns the number of contexts the index was built from.
func (x *Index) NumContexts() uint64 { return x.v.Load().h.Contexts }

// NumPairs returns the number of stored unordered pairs; the number of
// directed edges (adjacency entries) is twice that.
func (x *Index) NumPairs() uint64 { return x.v.Load().h.Pairs }

// Generation returns the content fingerprint stored in the header (see
// FORMAT.md). Equal files have equal generations.
func (x *Index) Generation() uint64 { return x.v.Load().h.Generation }

// Bytes returns the size of the index file in bytes (0 after Close).
func (x *Index) Bytes() int64 {
	if x.v.Load().closed {
		return 0
	}
	return x.size
}

// FormatVersion returns the file's format version.
func (x *Index) FormatVersion() int { return int(x.v.Load().h.Version) }

// RankPrefix returns the length of the stored support-ranked prefix.
func (x *Index) RankPrefix() int { return int(x.v.Load().h.RankPrefix) }

// Path returns the path the index was opened from.
func (x *Index) Path() string { return x.path }

// SectionInfo describes one section of the file.
type SectionInfo struct {
	Name   string
	Offset uint64
	Length uint64
	CRC    uint32
}

// Sections returns the section table (nil after Close).
func (x *Index) Sections() []SectionInfo {
	v := x.v.Load()
	if v.closed {
		return nil
	}
	out := make([]SectionInfo, numSections)
	for i, s := range v.h.Sections {
		out[i] = SectionInfo{Name: sectionName(i + 1), Offset: s.Offset, Length: s.Length, CRC: s.CRC}
	}
	return out
}

// Transpose returns the statistics of the reversed pair (B, A): its
// Count(v, u) equals p.Count(u, v). For a pair of an Index it is exactly
// the view Pair(B, A) returns, without a second look-up. O(1), no
// allocation.
func (p PairStats) Transpose() PairStats {
	return PairStats{A: p.B, B: p.A, KA: p.KB, KB: p.KA, counts: p.counts, swapped: !p.swapped}
}

// pairBatchWidth is the number of binary searches PairBatch runs in
// lockstep: more than the cache misses a core keeps in flight (about 10–20
// on current x86 and arm64 cores; common practice), so the hardware, not
// the batch, sets the overlap. On the router's 1M-entity benchmark, widths
// 8, 16, 32 and 64 measured 38.7, 37.7, 38.0 and 35.0 µs median decision
// CPU time (4 interleaved runs each; within this machine's noise).
const pairBatchWidth = 64

// PairBatch looks up several pairs at once: for every i < len(a), out[i]
// and ok[i] are what Pair(a[i], b[i]) returns (the same view, bit for bit).
// b, out and ok must be at least as long as a (it panics otherwise, like a
// slice index).
//
// Pair costs a chain of dependent cache misses — the entity's offsets, a
// binary search in a (often hub-sized) adjacency list, the count table —
// and on an index larger than the CPU caches nearly all of its time is
// that wait. PairBatch runs the look-ups of up to pairBatchWidth pairs side
// by side: each phase (offsets, one halving step of every search, tables)
// issues independent loads for all of them, so their misses overlap
// (memory-level parallelism). The searches are the branch-free "lower
// bound by halving" of Khuong & Morin 2017 (Array layouts for
// comparison-based searching, ACM JEA 22), which the compiler turns into
// conditional moves. Same O(log deg(min(a,b))) work per pair as Pair, no
// allocation.
func (x *Index) PairBatch(a, b []EntityID, out []PairStats, ok []bool) {
	x.v.Load().pairBatch(a, b, nil, out, ok)
}

// NoPairHint is the hint of a pair whose position is not known
// (PairBatchHinted).
const NoPairHint = math.MaxUint32

// RankedPairHints returns, for every entry j of RankedNeighbors(id), the
// stored position of the pair {id, RankedNeighbors(id)[j]} (section
// ranked-pair-positions of the format), to pass as the pair's hint to
// PairBatchHinted. The slice aliases the index memory and has the length
// of RankedNeighbors(id) (nil when that is nil). O(1).
func (x *Index) RankedPairHints(id EntityID) []uint32 {
	v := x.v.Load()
	if uint64(id) >= v.n || len(v.rankPos) != len(v.rank) {
		return nil
	}
	s, e, ok := span(v.rankOffs, uint64(id), len(v.rankPos))
	if !ok {
		return nil
	}
	return v.rankPos[s:e:e]
}

// PairBatchHinted is PairBatch where hint[i] (hint at least as long as a)
// is the pair's stored position, from RankedPairHints, or NoPairHint. A
// hinted look-up reads the one list entry the position names instead of
// binary-searching the lower entity's upper list: O(1) instead of
// O(log deg(min(a, b))) dependent reads. The entry is checked (it must be
// the other entity of the pair); a hint that fails the check, from a
// damaged file opened WithLazyVerify or a caller's mistake, falls back to
// the search, so the answer is always what Pair(a[i], b[i]) returns.
func (x *Index) PairBatchHinted(a, b []EntityID, hint []uint32, out []PairStats, ok []bool) {
	x.v.Load().pairBatch(a, b, hint[:len(a)], out, ok)
}

func (v *view) pairBatch(a, b []EntityID, hint []uint32, out []PairStats, ok []bool) {
	n := len(a)
	b, out, ok = b[:n], out[:n], ok[:n]
	nbrs := v.nbrs
	for s0 := 0; s0 < n; s0 += pairBatchWidth {
		w := min(pairBatchWidth, n-s0)
		var (
			base, size, start [pairBatchWidth]int    // search window and list start in nbrs
			key               [pairBatchWidth]uint32 // hi
			pb                [pairBatchWidth]uint64 // pairBase of lo
			hinted            [pairBatchWidth]bool   // the window is the hinted entry
			hit               [pairBatchWidth]bool   // and it holds hi
		)
		// Offsets of every lo's upper list (as upperNeighbors).
		for j := 0; j < w; j++ {
			lo, hi := a[s0+j], b[s0+j]
			if lo > hi {
				lo, hi = hi, lo
			}
			if lo == hi || uint64(hi) >= v.n || uint64(lo)+1 >= uint64(len(v.pairBase)) {
				continue
			}
			s, e, okS := span(v.nbrOffs, uint64(lo), len(nbrs))
			if !okS {
				continue
			}
			b0, b1 := v.pairBase[lo], v.pairBase[lo+1]
			if b0 > b1 || b1-b0 > uint64(e-s) {
				continue
			}
			start[j] = e - int(b1-b0)
			base[j], size[j], key[j], pb[j] = start[j], int(b1-b0), hi, b0
			if hint != nil {
				if h := hint[s0+j]; uint64(h) < b1-b0 {
					base[j], size[j], hinted[j] = start[j]+int(h), 1, true
				}
			}
		}
		// Check the hinted entries in a loop of their own: their loads
		// are independent and the loop is short, so their cache misses
		// overlap (the table loop below is too long for the core to run
		// ahead to the next pair's load).
		if hint != nil {
			for j := 0; j < w; j++ {
				if hinted[j] {
					hit[j] = nbrs[base[j]] == key[j]
				}
			}
		}
		// Lockstep halving: afterwards size is 1 and nbrs[base] is the
		// last element ≤ key when the window was not empty.
		for {
			active := false
			for j := 0; j < w; j++ {
				m := size[j]
				if m <= 1 {
					continue
				}
				half := m >> 1
				lo := base[j]
				if mid := lo + half; nbrs[mid] <= key[j] {
					lo = mid
				}
				base[j], size[j] = lo, m-half
				active = true
			}
			if !active {
				break
			}
		}
		var (
			q     [pairBatchWidth]uint64
			found [pairBatchWidth]bool
		)
		for j := 0; j < w; j++ {
			found[j] = hit[j] || (!hinted[j] && size[j] == 1 && nbrs[base[j]] == key[j])
			q[j] = pb[j] + uint64(base[j]-start[j])
		}
		v.tables(a[s0:s0+w], b[s0:s0+w], q[:w], found[:w], out[s0:s0+w], ok[s0:s0+w])
		for j := 0; j < w; j++ {
			if i := s0 + j; hinted[j] && !hit[j] {
				out[i], ok[i] = v.pair(a[i], b[i]) // a wrong hint: search
			}
		}
	}
}

// tables sets out[j], ok[j] for one chunk of a batch (at most
// pairBatchWidth pairs): the statistics of the pair (a[j], b[j]) stored at
// pair index q[j] when found[j], else none. The table offsets are read in a
// loop of their own, so that their cache misses overlap, then each table is
// checked against the entities' value counts K_a·K_b. On an index checked
// at open, every table has K_a·K_b entries and both are at most maxK, so a
// table of maxK² entries means K_a = K_b = maxK: most pairs of an index
// whose entities mostly share one K, which spares the two entity-valueset
// reads (cache misses on a large index). O(len(a)).
func (v *view) tables(a, b []EntityID, q []uint64, found []bool, out []PairStats, ok []bool) {
	w := len(a)
	b, q, found, out, ok = b[:w], q[:w], found[:w], out[:w], ok[:w]
	var ts, te [pairBatchWidth]uint64
	if v.uniform {
		kk := uint64(v.k * v.k)
		for j := range w {
			if found[j] && q[j] < v.h.Pairs {
				ts[j], te[j] = q[j]*kk, (q[j]+1)*kk
			}
		}
	} else {
		po := v.pairOffs
		for j := range w {
			if found[j] && q[j] < uint64(len(po)) && q[j]+1 < uint64(len(po)) {
				ts[j], te[j] = po[q[j]], po[q[j]+1]
			}
		}
	}
	counts := v.counts
	maxK := v.maxK
	mk := uint64(maxK * maxK)
	for j := range w {
		out[j], ok[j] = PairStats{}, false
		s, e := ts[j], te[j]
		if !found[j] || e == 0 || e > uint64(len(counts)) || e < s {
			continue
		}
		var ka, kb int
		if c := e - s; v.checked && c == mk {
			ka, kb = maxK, maxK
		} else {
			ka, kb = v.numValues(a[j]), v.numValues(b[j])
		}
		if ka == 0 || kb == 0 || e-s != uint64(ka*kb) {
			continue
		}
		out[j], ok[j] = newStoredPairStats(a[j], b[j], ka, kb, counts[s:e:e], a[j] > b[j]), true
	}
}

// PairBatchRanked is PairBatch where entry[i] (entry at least as long as
// a) names the pair by its place in a ranked list: b[i] is
// RankedNeighbors(a[i])[entry[i]], or entry[i] is NoPairHint. The answer
// is always what Pair(a[i], b[i]) returns: an entry that does not hold
// b[i] is ignored (the pair is searched), so a caller cannot get another
// pair's table by naming a wrong entry. On an index opened with the full
// check (Open without WithLazyVerify), which checked every stored table
// reference, a named entry's look-up reads only the pair's table reference
// (section ranked-pair-tables, beside the ranked entry the caller has just
// read) and the table: no adjacency offsets, list entry, pair base or
// table offsets. Opened WithLazyVerify, the table references are not used:
// the stored position (RankedPairHints) is checked as PairBatchHinted
// checks it. No allocation.
func (x *Index) PairBatchRanked(a, b []EntityID, entry []uint32, out []PairStats, ok []bool) {
	x.v.Load().pairBatchRanked(a, b, entry[:len(a)], out, ok)
}

func (v *view) pairBatchRanked(a, b []EntityID, entry []uint32, out []PairStats, ok []bool) {
	n := len(a)
	b, out, ok = b[:n], out[:n], ok[:n]
	// The table references are trusted only when Open checked them all.
	trusted := v.checked && len(v.rankTab) == len(v.rank)
	if !trusted {
		v.pairBatchPositions(a, b, entry, out, ok)
		return
	}
	counts := v.counts
	for s0 := 0; s0 < n; s0 += pairBatchWidth {
		w := min(pairBatchWidth, n-s0)
		var (
			ref  [pairBatchWidth]uint64 // table reference of a named entry
			at   [pairBatchWidth]int    // pairs left to pairBatch
			rest int
		)
		// Named entries to table references, from the ranked lists (in
		// cache): the only read of the index the look-up waits for
		// besides the table itself.
		for j := 0; j < w; j++ {
			i := s0 + j
			ref[j] = math.MaxUint64
			e := entry[i]
			if e == NoPairHint || uint64(a[i]) >= v.n {
				continue
			}
			s, t, okS := span(v.rankOffs, uint64(a[i]), len(v.rank))
			if okS && uint64(e) < uint64(t-s) && v.rank[s+int(e)] == b[i] {
				ref[j] = v.rankTab[s+int(e)]
			}
		}
		for j := 0; j < w; j++ {
			i := s0 + j
			out[i], ok[i] = PairStats{}, false
			if ref[j] == math.MaxUint64 {
				at[rest] = i
				rest++
				continue
			}
			st, kLo, kHi := rankTabSplit(ref[j])
			en := st + uint64(kLo*kHi)
			if en > uint64(len(counts)) {
				continue // cannot happen on a checked index; bounds kept
			}
			ka, kb, swapped := kLo, kHi, a[i] > b[i]
			if swapped {
				ka, kb = kHi, kLo
			}
			out[i], ok[i] = newStoredPairStats(a[i], b[i], ka, kb, counts[st:en:en], swapped), true
		}
		// The others (no entry named, or a wrong one) are searched, in
		// one batch.
		if rest > 0 {
			var (
				ra, rb [pairBatchWidth]EntityID
				ro     [pairBatchWidth]PairStats
				rok    [pairBatchWidth]bool
			)
			for k := 0; k < rest; k++ {
				ra[k], rb[k] = a[at[k]], b[at[k]]
			}
			v.pairBatch(ra[:rest], rb[:rest], nil, ro[:rest], rok[:rest])
			for k := 0; k < rest; k++ {
				out[at[k]], ok[at[k]] = ro[k], rok[k]
			}
		}
	}
}

// pairBatchPositions is pairBatchRanked through the stored pair positions
// (section ranked-pair-positions), each checked against the lower entity's
// upper list (PairBatchHinted): the path of an index opened WithLazyVerify,
// whose table references were not checked.
func (v *view) pairBatchPositions(a, b []EntityID, entry []uint32, out []PairStats, ok []bool) {
	n := len(a)
	for s0 := 0; s0 < n; s0 += pairBatchWidth {
		w := min(pairBatchWidth, n-s0)
		var hint [pairBatchWidth]uint32 // stored position, NoPairHint
		for j := 0; j < w; j++ {
			i := s0 + j
			hint[j] = NoPairHint
			e := entry[i]
			if e == NoPairHint || uint64(a[i]) >= v.n || len(v.rankPos) != len(v.rank) {
				continue
			}
			s, t, okS := span(v.rankOffs, uint64(a[i]), len(v.rank))
			if okS && uint64(e) < uint64(t-s) && v.rank[s+int(e)] == b[i] {
				hint[j] = v.rankPos[s+int(e)]
			}
		}
		v.pairBatch(a[s0:s0+w], b[s0:s0+w], hint[:w], out[s0:s0+w], ok[s0:s0+w])
	}
}

// notFile is the ErrNotFile error for path of the given mode.
func notFile(path string, m os.FileMode) error {
	kind := "not a regular file"
	switch {
	case m.IsDir():
		kind = "a directory"
	case m&os.ModeNamedPipe != 0:
		kind = "a named pipe"
	case m&os.ModeDevice != 0:
		kind = "a device"
	case m&os.ModeSocket != 0:
		kind = "a socket"
	}
	return &CorruptionError{Path: path, Err: ErrNotFile, Detail: kind + "; an index is a regular file written by hopwise build"}
}
