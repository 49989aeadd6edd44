package graphidx

import (
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// WriteOption configures WriteFile.
type WriteOption interface{ applyWrite(*writeConfig) }

type writeConfig struct {
	rankPrefix int
	memory     int64
}

type writeOptionFunc func(*writeConfig)

func (f writeOptionFunc) applyWrite(c *writeConfig) { f(c) }

// MaxRankPrefix is the largest accepted WithRankPrefix value.
const MaxRankPrefix = 1 << 20

// WithRankPrefix sets R, how many neighbours of each entity are stored in
// support-ranked order (default DefaultRankPrefix). Each stored entry costs
// 4 bytes; entities with fewer neighbours store all of them. The router
// reads its first search layers from this prefix and goes past it (reading
// the whole adjacency, and looking up supports to rank it) only when its
// beam or fan-out asks for more neighbours than R; so R ≥ the router's B
// and f keeps every search on the prefix (docs/SEARCH.md has the measured
// sizes and latencies). It is both a WriteOption and a BuildOption (Build
// passes it to WriteFile). WriteFile and Build reject n < 1 or
// n > MaxRankPrefix.
func WithRankPrefix(n int) RankPrefixOption { return RankPrefixOption(n) }

// RankPrefixOption is the option WithRankPrefix returns; it configures
// both WriteFile and Build.
type RankPrefixOption int

func (o RankPrefixOption) applyWrite(c *writeConfig) { c.rankPrefix = int(o) }

func (o RankPrefixOption) applyBuild(c *buildConfig) {
	c.writeOpts = append(c.writeOpts, o)
}

// checkRankPrefix validates a rank prefix length.
func checkRankPrefix(n int) error {
	if n < 1 || n > MaxRankPrefix {
		return fmt.Errorf("graphidx: rank prefix %d out of range [1, %d]", n, MaxRankPrefix)
	}
	return nil
}

// DefaultWriteMemory is the default of WithWriteMemory: 64 MiB.
const DefaultWriteMemory = 64 << 20

// WithWriteMemory bounds the memory WriteFile uses for the pair-sized part
// of its work (default DefaultWriteMemory). WriteFile keeps O(entities)
// arrays in memory and streams everything that grows with the number of
// pairs: the count tables go straight to the file, and the adjacency is
// assembled in buckets of consecutive entities whose edges take at most
// bytes (24 bytes per directed edge: a neighbour id, a support, the
// pair's position and its table's start), the buckets after the first
// spooled to a temporary file next to the output (28 bytes per edge). A single entity whose edges need more than bytes
// gets a bucket of its own, and a bucket may always hold E/4096 edges (E
// directed edges), which keeps the buckets under about 8200 and their spool
// buffers (4–256 KiB each, together about a quarter of bytes when that is
// larger) bounded. Build sets it to a quarter of WithMemBudget. WriteFile
// rejects bytes < 1.
func WithWriteMemory(bytes int64) WriteOption {
	return writeOptionFunc(func(c *writeConfig) { c.memory = bytes })
}

// TempPrefix returns the name prefix WriteFile uses for its temporary file
// next to path: ".<base>.tmp-". A file starting with it that is not being
// written by a live process (the pid follows the prefix) is a leftover of a
// crashed write and may be deleted.
func TempPrefix(path string) string { return "." + filepath.Base(path) + ".tmp-" }

// CheckOutput reports, before any work, a path WriteFile (or any writer
// that renames a temporary file over its output) could not write: path names a directory or another file that is not regular, its
// directory is missing or not a directory, or no file can be created there
// (permissions, a read-only file system). It creates and removes one empty
// file named like WriteFile's temporary file, so the stale-file cleanup of
// a later write removes it should this process die in between. Build calls
// it before reading the corpus. O(1) file-system calls.
func CheckOutput(path string) error {
	if st, err := os.Stat(path); err == nil && !st.Mode().IsRegular() {
		kind := "not a regular file"
		if st.IsDir() {
			kind = "a directory"
		}
		return fmt.Errorf("graphidx: output %s is %s; give a file's path", path, kind)
	}
	dir := filepath.Dir(path)
	st, err := os.Stat(dir)
	switch {
	case err != nil:
		return fmt.Errorf("graphidx: output directory: %w", err)
	case !st.IsDir():
		return fmt.Errorf("graphidx: output directory: %s: not a directory", dir)
	}
	f, err := os.CreateTemp(dir, TempPrefix(path)+strconv.Itoa(os.Getpid())+"-probe-*")
	if err != nil {
		return fmt.Errorf("graphidx: output directory: %w", err)
	}
	name := f.Name()
	f.Close()
	return os.Remove(name)
}

// WriteFile writes the content of src as a locality index file at path.
//
// The file is written to a temporary file in the same directory (named
// TempPrefix(path)+"<pid>-<random>"), synced, renamed over path and the
// directory is synced, so a crash or an error leaves either the old file or
// the new one at path, never a partial file. Temporary files of earlier
// writes of path whose process is dead (crashed builds) are removed first.
// The output is deterministic:
// the same Source content gives a byte-identical file, and the generation
// stored in the header is a fingerprint of that content.
//
// WriteFile validates src (ErrInvalidSource): names strictly ascending and
// non-empty, 1..MaxValues strictly ascending value labels with one marginal
// each, pairs strictly ascending by (A, B) with A < B, tables of KA×KB
// counts with a positive support, row and column sums not above the
// marginals. It calls src.Pairs twice: the first pass validates and counts
// degrees, the second streams the count tables to the file and the edges
// to the adjacency buckets, and must yield the same pairs and supports
// (ErrInvalidSource otherwise).
//
// Memory: O(entities) words (about 90 bytes per binary entity besides the
// Source's own records), the adjacency buckets bounded by WithWriteMemory
// (or one entity's degree, if larger), and about 1 MiB of write buffers
// plus 4–256 KiB per spooled bucket; nothing grows with the number of
// pairs. Disk: the output plus, when the adjacency needs more than one
// bucket, a spool of 28 bytes per directed edge outside the first bucket,
// removed before WriteFile returns (on Unix it is unlinked at once, so not
// even a crash leaves it; elsewhere its name starts with TempPrefix(path)
// and the pid, like the temporary output). Time: O(V + P + E·log(deg))
// for E = 2P directed edges (the support ranking sorts each adjacency
// list).
func WriteFile(path string, src Source, opts ...WriteOption) (err error) {
	cfg := writeConfig{rankPrefix: DefaultRankPrefix, memory: DefaultWriteMemory}
	for _, o := range opts {
		if o != nil {
			o.applyWrite(&cfg)
		}
	}
	if err := checkRankPrefix(cfg.rankPrefix); err != nil {
		return err
	}
	if cfg.memory < 1 {
		return fmt.Errorf("graphidx: write memory %d bytes, want at least 1", cfg.memory)
	}
	if src == nil {
		return sourceErrorf("nil source")
	}
	p, err := compile(src, cfg)
	if err != nil {
		return err
	}

	dir := filepath.Dir(path)
	removeStaleTemps(path)
	var rnd [6]byte
	if _, err := rand.Read(rnd[:]); err != nil {
		return fmt.Errorf("graphidx: temp name: %w", err)
	}
	tmp := filepath.Join(dir, fmt.Sprintf("%s%d-%s", TempPrefix(path), os.Getpid(), hex.EncodeToString(rnd[:])))
	f, err := os.OpenFile(tmp, os.O_RDWR|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return fmt.Errorf("graphidx: create temp file: %w", err)
	}
	defer func() {
		if err != nil {
			_ = f.Close()
			_ = os.Remove(tmp)
		}
	}()
	if err = p.write(f, tmp+".adj", src); err != nil {
		return err
	}
	if err = f.Sync(); err != nil {
		return fmt.Errorf("graphidx: sync %s: %w", tmp, err)
	}
	if err = f.Close(); err != nil {
		return fmt.Errorf("graphidx: close %s: %w", tmp, err)
	}
	if err = os.Rename(tmp, path); err != nil {
		return fmt.Errorf("graphidx: rename to %s: %w", path, err)
	}
	return fileio.SyncDir(dir)
}

// plan is the part of the file that takes O(entities) memory, computed by
// the first pass over the pairs: every section but the neighbours, the pair
// offsets, the counts and the ranked neighbours, which write streams from
// the second pass.
type plan struct {
	h          header
	uniform    bool
	k          []uint8 // K per entity
	nameOffs   []uint64
	names      []string
	labelOffs  []uint64
	labels     []string
	vsetOffs   []uint32
	vsetLabels []uint32
	entVSet    []uint32
	margOffs   []uint64 // nil if uniform
	marginals  []uint64
	nbrOffs    []uint64
	pairBase   []uint64
	rankOffs   []uint64
	cells      uint64 // Σ K_lo·K_hi over the pairs
	// fp is a fingerprint of the first pass's (A, B, support) sequence;
	// the second pass must reproduce it.
	fp     uint64
	memory int64 // WithWriteMemory
}

// pairPrint folds one pair into a fingerprint of the pair sequence. It is
// order-sensitive (each step multiplies and rotates), so a second pass that
// reorders, drops, adds or changes the support of a pair gets a different
// value except with probability about 2⁻⁶⁴ (the multipliers are the
// 64-bit golden-ratio and SplitMix64 constants; common practice).
func pairPrint(h uint64, a, b uint32, sup uint64) uint64 {
	h = (h ^ (uint64(a)<<32 | uint64(b))) * 0x9E3779B97F4A7C15
	h = (h<<29 | h>>35) ^ sup
	h *= 0xBF58476D1CE4E5B9
	return h<<31 | h>>33
}

// compile validates src and computes the O(entities) sections, the degrees
// and the fingerprint of the pairs: one pass over src.Pairs.
func compile(src Source, cfg writeConfig) (*plan, error) {
	ents := src.Entities()
	n := len(ents)
	if uint64(n) > math.MaxUint32 {
		return nil, sourceErrorf("%d entities exceed the uint32 id space", n)
	}
	p := &plan{k: make([]uint8, n), memory: cfg.memory}
	contexts := src.Contexts()

	// Names and values.
	labelSet := map[string]struct{}{}
	p.nameOffs = make([]uint64, n+1)
	p.names = make([]string, n)
	var values uint64
	for i, e := range ents {
		if e.Name == "" {
			return nil, sourceErrorf("entity %d has an empty name", i)
		}
		if i > 0 && e.Name <= ents[i-1].Name {
			return nil, sourceErrorf("entity %d %q is not after %q (names must be strictly ascending)", i, e.Name, ents[i-1].Name)
		}
		k := len(e.Values)
		if k < 1 || k > MaxValues {
			return nil, sourceErrorf("entity %q has %d values, want 1..%d", e.Name, k, MaxValues)
		}
		if len(e.Marginal) != k {
			return nil, sourceErrorf("entity %q has %d values but %d marginals", e.Name, k, len(e.Marginal))
		}
		var sum uint64
		for v, lab := range e.Values {
			if v > 0 && lab <= e.Values[v-1] {
				return nil, sourceErrorf("entity %q: value %q is not after %q (labels must be strictly ascending)", e.Name, lab, e.Values[v-1])
			}
			labelSet[lab] = struct{}{}
			if sum+e.Marginal[v] < sum {
				return nil, sourceErrorf("entity %q: marginal sum overflows uint64", e.Name)
			}
			sum += e.Marginal[v]
		}
		if sum > contexts {
			return nil, sourceErrorf("entity %q is observed in %d contexts, more than the %d in the corpus", e.Name, sum, contexts)
		}
		p.k[i] = uint8(k)
		p.names[i] = e.Name
		p.nameOffs[i+1] = p.nameOffs[i] + uint64(len(e.Name))
		values += uint64(k)
	}
	p.uniform = n > 0
	for i := 1; i < n; i++ {
		if p.k[i] != p.k[0] {
			p.uniform = false
			break
		}
	}

	// Label dictionary and value sets.
	p.labels = make([]string, 0, len(labelSet))
	for l := range labelSet {
		p.labels = append(p.labels, l)
	}
	slices.Sort(p.labels)
	labelID := make(map[string]uint32, len(p.labels))
	p.labelOffs = make([]uint64, len(p.labels)+1)
	for i, l := range p.labels {
		labelID[l] = uint32(i)
		p.labelOffs[i+1] = p.labelOffs[i] + uint64(len(l))
	}
	setID := map[string]uint32{}
	p.vsetOffs = []uint32{0}
	p.entVSet = make([]uint32, n)
	var key strings.Builder
	for i, e := range ents {
		key.Reset()
		for _, lab := range e.Values {
			key.WriteString(lab)
			key.WriteByte(0)
		}
		id, ok := setID[key.String()]
		if !ok {
			id = uint32(len(p.vsetOffs) - 1)
			setID[key.String()] = id
			for _, lab := range e.Values {
				p.vsetLabels = append(p.vsetLabels, labelID[lab])
			}
			p.vsetOffs = append(p.vsetOffs, uint32(len(p.vsetLabels)))
		}
		p.entVSet[i] = id
	}

	// Marginals.
	p.marginals = make([]uint64, 0, values)
	if !p.uniform {
		p.margOffs = make([]uint64, n+1)
	}
	for i, e := range ents {
		p.marginals = append(p.marginals, e.Marginal...)
		if !p.uniform {
			p.margOffs[i+1] = p.margOffs[i] + uint64(len(e.Marginal))
		}
	}
	margOf := func(id uint32) []uint64 {
		if p.uniform {
			k := uint64(p.k[0])
			return p.marginals[uint64(id)*k : uint64(id+1)*k]
		}
		return p.marginals[p.margOffs[id]:p.margOffs[id+1]]
	}

	// Pass 1 over the pairs: validate, count degrees, fingerprint.
	upper := make([]uint64, n)
	lower := make([]uint64, n)
	var prevA, prevB uint32
	var np uint64
	colSum := make([]uint64, MaxValues)
	err := src.Pairs(func(r PairRecord) error {
		if r.A >= r.B || uint64(r.B) >= uint64(n) {
			return sourceErrorf("pair (%d, %d): want A < B < %d", r.A, r.B, n)
		}
		if np > 0 && (r.A < prevA || (r.A == prevA && r.B <= prevB)) {
			return sourceErrorf("pair (%s, %s) is not after (%s, %s) (pairs must be strictly ascending)",
				ents[r.A].Name, ents[r.B].Name, ents[prevA].Name, ents[prevB].Name)
		}
		prevA, prevB = r.A, r.B
		ka, kb := int(p.k[r.A]), int(p.k[r.B])
		if len(r.Counts) != ka*kb {
			return sourceErrorf("pair (%s, %s): %d counts, want %d×%d", ents[r.A].Name, ents[r.B].Name, len(r.Counts), ka, kb)
		}
		ma, mb := margOf(r.A), margOf(r.B)
		clear(colSum[:kb])
		var sup uint64
		for u := 0; u < ka; u++ {
			var row uint64
			for v := 0; v < kb; v++ {
				c := uint64(r.Counts[u*kb+v])
				row += c
				colSum[v] += c
			}
			if row > ma[u] {
				return sourceErrorf("pair (%s, %s): %d contexts with %s=%s exceed its marginal %d",
					ents[r.A].Name, ents[r.B].Name, row, ents[r.A].Name, ents[r.A].Values[u], ma[u])
			}
			sup += row
		}
		for v := 0; v < kb; v++ {
			if colSum[v] > mb[v] {
				return sourceErrorf("pair (%s, %s): %d contexts with %s=%s exceed its marginal %d",
					ents[r.A].Name, ents[r.B].Name, colSum[v], ents[r.B].Name, ents[r.B].Values[v], mb[v])
			}
		}
		if sup == 0 {
			return sourceErrorf("pair (%s, %s) has zero support (omit unobserved pairs)", ents[r.A].Name, ents[r.B].Name)
		}
		upper[r.A]++
		lower[r.B]++
		np++
		p.fp = pairPrint(p.fp, r.A, r.B, sup)
		p.cells += uint64(ka * kb)
		return nil
	})
	if err != nil {
		if errors.Is(err, ErrInvalidSource) {
			return nil, err
		}
		return nil, fmt.Errorf("graphidx: reading pairs: %w", err)
	}

	// CSR offsets, pair base and ranked-prefix offsets: prefix sums of the
	// degrees.
	R := uint64(cfg.rankPrefix)
	p.nbrOffs = make([]uint64, n+1)
	p.pairBase = make([]uint64, n+1)
	p.rankOffs = make([]uint64, n+1)
	for i := 0; i < n; i++ {
		deg := upper[i] + lower[i]
		p.nbrOffs[i+1] = p.nbrOffs[i] + deg
		p.pairBase[i+1] = p.pairBase[i] + upper[i]
		p.rankOffs[i+1] = p.rankOffs[i] + min(deg, R)
	}

	var flags uint32
	var uk uint32
	if p.uniform {
		flags |= flagUniformK
		uk = uint32(p.k[0])
	}
	p.h = header{
		Version:    FormatVersion,
		Flags:      flags,
		Contexts:   contexts,
		Entities:   uint64(n),
		Pairs:      np,
		Edges:      2 * np,
		Values:     values,
		Labels:     uint64(len(p.labels)),
		VSets:      uint64(len(p.vsetOffs) - 1),
		UniformK:   uk,
		RankPrefix: uint32(R),
	}
	return p, nil
}

// lowerDeg is the number of neighbours of i with smaller ids.
func (p *plan) lowerDeg(i uint32) uint64 {
	return p.nbrOffs[i+1] - p.nbrOffs[i] - (p.pairBase[i+1] - p.pairBase[i])
}
