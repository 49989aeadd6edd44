package graphidx

import (
	"bytes"
	"context"
	"crypto/sha256"
	"errors"
	"fmt"
	"hash/crc32"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx/internal/testcorpus"
)

// TestStreamingWriterMatchesReference: WriteFile gives, byte for byte, the
// files of the in-memory writer it replaced, for every input of writerCases
// (uniform and mixed K, huge supports, a hub, a compiled corpus), rank
// prefixes 1, 3 and the default, and write memories from the default (one
// bucket) down to 1 byte (one bucket per entity, every edge past the first
// entity spooled). The reference files are pinned by their SHA-256 in
// testdata/writer-v1.sha256, computed with that writer before it was
// retired; it wrote format version 1, so the check compares the version-1
// projection of each file (asVersion1: sections 1–16 under a version-1
// header), and the version-2 file must verify (the ranked pair positions
// are checked by Verify). The hand-checked greenhouse file itself is
// testdata/golden-v3.hwx (TestGoldenIndexV3). -update rewrites the digests
// from WriteFile, for a deliberate change of sections 1–16 only.
func TestStreamingWriterMatchesReference(t *testing.T) {
	t.Parallel()
	want := readWriterDigests(t)
	var fresh []string
	for _, tc := range writerCases(t) {
		for _, rp := range []int{1, 3, DefaultRankPrefix} {
			key := fmt.Sprintf("%s %d", tc.name, rp)
			var first string
			for _, mem := range []int64{DefaultWriteMemory, 2000, 100, 1} {
				path := ixWriteTemp(t, tc.src, WithRankPrefix(rp), WithWriteMemory(mem))
				if x, err := Open(path); err != nil {
					t.Errorf("%s, write memory %d: %v", key, mem, err)
				} else {
					x.Close()
				}
				got := fmt.Sprintf("%x", sha256.Sum256(asVersion1(t, ixReadFile(t, path))))
				if first == "" {
					first = got
				}
				if got != first {
					t.Errorf("%s: write memory %d gives another file than the default memory", key, mem)
				}
				if !*update && got != want[key] {
					t.Errorf("%s, write memory %d: SHA-256 %s, want %s", key, mem, got, want[key])
				}
			}
			fresh = append(fresh, key+" "+first)
			delete(want, key)
		}
	}
	if *update {
		if err := os.WriteFile(writerDigestsFile, []byte(strings.Join(fresh, "\n")+"\n"), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	for key := range want {
		t.Errorf("%s has a digest for %q, which no case writes", writerDigestsFile, key)
	}
}

// writerDigestsFile pins the writer's output (see
// TestStreamingWriterMatchesReference).
const writerDigestsFile = "testdata/writer-v1.sha256"

// readWriterDigests reads lines "case rankPrefix sha256" into a map keyed by
// "case rankPrefix".
func readWriterDigests(t *testing.T) map[string]string {
	t.Helper()
	b, err := os.ReadFile(writerDigestsFile)
	if err != nil {
		t.Fatal(err)
	}
	m := map[string]string{}
	for i, line := range strings.Split(strings.TrimSpace(string(b)), "\n") {
		f := strings.Fields(line)
		if len(f) != 3 || len(f[2]) != 64 {
			t.Fatalf("%s:%d: want \"case rankPrefix sha256\", got %q", writerDigestsFile, i+1, line)
		}
		m[f[0]+" "+f[1]] = f[2]
	}
	return m
}

// asVersion1 returns the version-1 file with the content of the version-2
// file b: sections 1–16 laid out after a 496-byte version-1 header (16
// section entries, generation and header CRC recomputed over them), section
// 17 dropped. It is how the digests of the retired version-1 writer still
// pin sections 1–16. O(len(b)).
func asVersion1(t *testing.T, b []byte) []byte {
	t.Helper()
	const (
		v1Header   = 496
		v1CRC      = 492
		v1Sections = 16
	)
	if len(b) < headerSize {
		t.Fatalf("asVersion1: %d bytes, shorter than the header", len(b))
	}
	h := decodeHeader(b)
	shift := uint64(headerSize - v1Header)
	out := make([]byte, v1Header, len(b))
	copy(out, b[:tableOffset])
	le.PutUint32(out[offVersion:], 1)
	le.PutUint32(out[offHeaderSize:], v1Header)
	le.PutUint32(out[offNumSect:], v1Sections)
	last := h.Sections[v1Sections-1]
	out = append(out, b[headerSize:last.Offset+last.Length]...)
	// FNV-1a as generationOf, over the first 16 sections.
	g := uint64(14695981039346656037)
	mix := func(v uint64) {
		for i := 0; i < 8; i++ {
			g ^= v & 0xff
			g *= 1099511628211
			v >>= 8
		}
	}
	for _, v := range []uint64{1, uint64(h.Flags), h.Contexts, h.Entities, h.Pairs, uint64(h.UniformK), uint64(h.RankPrefix)} {
		mix(v)
	}
	for i, s := range h.Sections[:v1Sections] {
		mix(s.Length)
		mix(uint64(s.CRC))
		e := out[tableOffset+i*tableEntrySize:]
		le.PutUint64(e[0:], s.Offset-shift)
		le.PutUint64(e[8:], s.Length)
		le.PutUint32(e[16:], s.CRC)
		le.PutUint32(e[20:], s.ID)
	}
	le.PutUint64(out[offGeneration:], g)
	le.PutUint64(out[offFileSize:], uint64(len(out)))
	le.PutUint32(out[v1CRC:], crc32.Checksum(out[:v1CRC], castagnoli))
	return out
}

// goldenFile is a tiny version-3 index of the hand-counted greenhouse
// (ixGreenhouse); its sections 1–16 are those of oldGoldenFile, written
// by the in-memory version-1 writer that preceded the streaming one, and
// its sections 1–17 those of v2GoldenFile, written by the version-2
// streaming writer.
const (
	goldenFile    = "testdata/golden-v3.hwx"
	v2GoldenFile  = "testdata/golden-v2.hwx"
	oldGoldenFile = "testdata/golden-v1.hwx"
)

// TestGoldenIndexV2Refused: a version-2 file is refused with ErrVersion,
// an error that names the file and says to rebuild it, and its sections
// 1–17 hold exactly the bytes of the version-3 golden file's sections
// 1–17 (version 3 added section 18 and one section-table entry).
func TestGoldenIndexV2Refused(t *testing.T) {
	t.Parallel()
	_, err := Open(v2GoldenFile)
	if !errors.Is(err, ErrVersion) || !strings.Contains(err.Error(), v2GoldenFile) || !strings.Contains(err.Error(), "rebuild") {
		t.Fatalf("Open(%s) = %v, want ErrVersion naming the file and saying to rebuild", v2GoldenFile, err)
	}
	v2, v3 := ixReadFile(t, v2GoldenFile), ixReadFile(t, goldenFile)
	if len(v2) < headerSize || len(v3) < headerSize {
		t.Fatalf("golden files of %d and %d bytes", len(v2), len(v3))
	}
	h2, h3 := decodeHeader(v2), decodeHeader(v3)
	if le.Uint32(v2[offVersion:]) != 2 || le.Uint32(v2[offNumSect:]) != 17 {
		t.Fatalf("%s: version %d with %d sections, want 2 with 17", v2GoldenFile, le.Uint32(v2[offVersion:]), le.Uint32(v2[offNumSect:]))
	}
	for i := range 17 { // the version-2 table has 17 entries
		s2, s3 := h2.Sections[i], h3.Sections[i]
		if s2.Length != s3.Length || s2.CRC != s3.CRC || s2.Offset+s2.Length > uint64(len(v2)) ||
			!bytes.Equal(v2[s2.Offset:s2.Offset+s2.Length], v3[s3.Offset:s3.Offset+s3.Length]) {
			t.Errorf("section %s differs between %s and %s", sectionName(i+1), v2GoldenFile, goldenFile)
		}
	}
}

// TestGoldenIndexV1Refused: a version-1 file is refused with ErrVersion,
// an error that names the file and says to rebuild it, and its content is
// exactly the version-1 projection of the version-2 golden file.
func TestGoldenIndexV1Refused(t *testing.T) {
	t.Parallel()
	_, err := Open(oldGoldenFile)
	if !errors.Is(err, ErrVersion) || !strings.Contains(err.Error(), oldGoldenFile) || !strings.Contains(err.Error(), "rebuild") {
		t.Fatalf("Open(%s) = %v, want ErrVersion naming the file and saying to rebuild", oldGoldenFile, err)
	}
	if got, want := asVersion1(t, ixReadFile(t, goldenFile)), ixReadFile(t, oldGoldenFile); !bytes.Equal(got, want) {
		t.Errorf("version-1 projection of %s differs from %s at byte %d", goldenFile, oldGoldenFile, firstDiff(got, want))
	}
}

// TestGoldenIndexV3: the checked-in version-3 file opens and verifies, holds
// exactly the hand-counted greenhouse, and WriteFile reproduces it byte for
// byte. A reader change that breaks old files, or a writer change that
// alters the format, fails here. -update rewrites the file from WriteFile
// (a deliberate format change only; bump the version then).
func TestGoldenIndexV3(t *testing.T) {
	t.Parallel()
	src := ixSourceFromContexts(ixGreenhouse())
	got := ixReadFile(t, ixWriteTemp(t, src))
	if *update {
		if err := os.WriteFile(goldenFile, got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want := ixReadFile(t, goldenFile)
	if !bytes.Equal(got, want) {
		t.Errorf("WriteFile gives %d bytes that differ from %s (%d bytes) at byte %d", len(got), goldenFile, len(want), firstDiff(got, want))
	}
	x, err := Open(goldenFile)
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	if err := x.Verify(); err != nil {
		t.Fatal(err)
	}
	if x.FormatVersion() != 3 || x.NumContexts() != 8 || x.NumEntities() != 5 {
		t.Errorf("version %d, %d contexts, %d entities; want 3, 8, 5", x.FormatVersion(), x.NumContexts(), x.NumEntities())
	}
	ixCheckMatches(t, x, src, DefaultRankPrefix)
	// One cell counted by hand: bed.north=wet with pump.a=on in c1 and c2.
	bed, _ := x.Lookup("bed.north")
	pump, _ := x.Lookup("pump.a")
	wet, _ := x.ValueIndex(bed, "wet")
	on, _ := x.ValueIndex(pump, "on")
	if ps, ok := x.Pair(bed, pump); !ok || ps.Count(wet, on) != 2 {
		t.Errorf("bed.north=wet, pump.a=on: %v %v, want 2", ps, ok)
	}
}

// writerCase is one input of the writer checks.
type writerCase struct {
	name string
	src  Source
}

// writerCases are the inputs the streaming writer is checked on: huge
// supports (the ranking's comparison-sort path), the hand-counted
// greenhouse, an empty index, one entity without pairs, uniform and mixed
// K, a dense graph, a hub whose degree exceeds any small bucket, and a
// compiled corpus.
func writerCases(t *testing.T) []writerCase {
	t.Helper()
	compiled := func(data []byte) Source {
		c, _, err := Compile(context.Background(), jsonlReader(bytes.NewReader(data), "s.jsonl"))
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { c.Close() })
		return c
	}
	// A hub: entity 0 is paired with everyone, so its degree exceeds any
	// small bucket limit and it gets a bucket of its own.
	hub := ixRandomSource(120, 4, 2, 9)
	{
		var pairs []PairRecord
		seen := map[[2]uint32]bool{}
		for _, pr := range hub.pairs {
			seen[[2]uint32{pr.A, pr.B}] = true
		}
		for b := 1; b < len(hub.ents); b++ {
			if !seen[[2]uint32{0, uint32(b)}] {
				pairs = append(pairs, PairRecord{A: 0, B: uint32(b), Counts: []uint32{0, 0, 0, 1}})
				hub.ents[0].Marginal[1]++
				hub.ents[b].Marginal[1]++
			}
		}
		hub.pairs = append(pairs, hub.pairs...)
		sortIxPairs(hub)
		hub.contexts += uint64(len(pairs))
	}
	// Supports above 2³²−1 take the ranking's comparison-sort path.
	const mx = 1<<32 - 1
	big := &ixSource{contexts: 1 << 40}
	for _, name := range []string{"pump1", "pump2", "pump3", "pump4"} {
		big.ents = append(big.ents, EntityRecord{Name: name, Values: []string{"off", "on"}, Marginal: []uint64{1 << 36, 1 << 36}})
	}
	big.pairs = []PairRecord{
		{A: 0, B: 1, Counts: []uint32{mx, mx, 1, 0}},
		{A: 0, B: 2, Counts: []uint32{5, 0, 0, 0}},
		{A: 0, B: 3, Counts: []uint32{mx, mx, mx, 0}},
		{A: 1, B: 2, Counts: []uint32{mx, 0, 0, mx}},
		{A: 2, B: 3, Counts: []uint32{2, 0, 0, 1}},
	}
	return []writerCase{
		{"hugeSupports", big},
		{"greenhouse", ixSourceFromContexts(ixGreenhouse())},
		{"empty", &ixSource{}},
		{"onePairless", &ixSource{contexts: 3, ents: []EntityRecord{{Name: "vent", Values: []string{"open"}, Marginal: []uint64{2}}}}},
		{"uniformK2", ixRandomSource(300, 12, 2, 1)},
		{"mixedK", ixRandomSource(200, 10, 0, 2)},
		{"dense", ixRandomSource(40, 39, 3, 3)},
		{"hub", hub},
		{"built", compiled(testcorpus.JSONL(3000, 400, 7))},
	}
}

func firstDiff(a, b []byte) int {
	for i := range min(len(a), len(b)) {
		if a[i] != b[i] {
			return i
		}
	}
	return min(len(a), len(b))
}

// sortIxPairs sorts the pairs of an ixSource by (A, B).
func sortIxPairs(s *ixSource) {
	ps := s.pairs
	for i := 1; i < len(ps); i++ {
		for j := i; j > 0 && (ps[j].A < ps[j-1].A || (ps[j].A == ps[j-1].A && ps[j].B < ps[j-1].B)); j-- {
			ps[j], ps[j-1] = ps[j-1], ps[j]
		}
	}
}

// fickleSource yields src's pairs, changed by mutate on the second call of
// Pairs.
type fickleSource struct {
	*ixSource
	mutate func(ps []PairRecord) []PairRecord
	calls  int
}

func (f *fickleSource) Pairs(fn func(PairRecord) error) error {
	f.calls++
	ps := f.ixSource.pairs
	if f.calls == 2 {
		ps = f.mutate(clonePairs(ps))
	}
	for _, p := range ps {
		if err := fn(p); err != nil {
			return err
		}
	}
	return nil
}

func clonePairs(ps []PairRecord) []PairRecord {
	out := make([]PairRecord, len(ps))
	for i, p := range ps {
		out[i] = PairRecord{A: p.A, B: p.B, Counts: append([]uint32(nil), p.Counts...)}
	}
	return out
}

// TestSecondPassMustMatch: a Source whose second Pairs pass differs from
// the first is rejected with ErrInvalidSource, with one bucket or many, and
// leaves no file behind (neither the output nor its temporary nor the
// adjacency spool).
func TestSecondPassMustMatch(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		name   string
		mutate func(ps []PairRecord) []PairRecord
	}{
		{"supportChanged", func(ps []PairRecord) []PairRecord {
			c := ps[len(ps)/2].Counts
			for i := range c {
				if c[i] > 0 {
					c[i]--
					return ps
				}
			}
			panic("no positive count")
		}},
		{"pairDropped", func(ps []PairRecord) []PairRecord { return append(ps[:7], ps[8:]...) }},
		{"lastDropped", func(ps []PairRecord) []PairRecord { return ps[:len(ps)-1] }},
		{"pairAdded", func(ps []PairRecord) []PairRecord {
			last := ps[len(ps)-1]
			return append(ps, PairRecord{A: last.A, B: last.B + 1, Counts: []uint32{1, 0, 0, 0}})
		}},
		{"orderSwapped", func(ps []PairRecord) []PairRecord { ps[3], ps[4] = ps[4], ps[3]; return ps }},
		{"partnerMoved", func(ps []PairRecord) []PairRecord {
			// Same pair count, same A, another B: the fingerprint (or the
			// degree bound) catches it.
			for i := range ps {
				if i+1 < len(ps) && ps[i+1].A == ps[i].A && ps[i+1].B > ps[i].B+1 {
					ps[i].B++
					return ps
				}
			}
			panic("no gap")
		}},
	} {
		for _, mem := range []int64{DefaultWriteMemory, 64} {
			src := &fickleSource{ixSource: ixRandomSource(150, 8, 2, 5), mutate: tc.mutate}
			dir := t.TempDir()
			err := WriteFile(filepath.Join(dir, "x.hwx"), src, WithWriteMemory(mem))
			if !errors.Is(err, ErrInvalidSource) {
				t.Errorf("%s (write memory %d): err = %v, want ErrInvalidSource", tc.name, mem, err)
			}
			if ents, _ := os.ReadDir(dir); len(ents) != 0 {
				t.Errorf("%s (write memory %d): %d files left behind, first %s", tc.name, mem, len(ents), ents[0].Name())
			}
		}
	}
	if err := WriteFile(filepath.Join(t.TempDir(), "x.hwx"), &ixSource{}, WithWriteMemory(0)); err == nil {
		t.Error("write memory 0 accepted")
	}
}

// windowSource is a pair-heavy synthetic Source that stores nothing per
// pair: n binary entities "bed.NNNNNNN", each paired with the next w
// (so about n·w pairs), tables generated from the ids on the fly.
type windowSource struct {
	n, w int
	ents []EntityRecord
}

func newWindowSource(n, w int) *windowSource {
	s := &windowSource{n: n, w: w, ents: make([]EntityRecord, n)}
	for i := range s.ents {
		s.ents[i] = EntityRecord{Name: fmt.Sprintf("bed.%07d", i), Values: []string{"dry", "wet"}, Marginal: []uint64{1000, 1000}}
	}
	return s
}

func (s *windowSource) Contexts() uint64         { return 2000 }
func (s *windowSource) Entities() []EntityRecord { return s.ents }
func (s *windowSource) Pairs(fn func(PairRecord) error) error {
	counts := make([]uint32, 4)
	for a := 0; a < s.n; a++ {
		for b := a + 1; b <= a+s.w && b < s.n; b++ {
			x := uint32(a*31 + b*17)
			counts[0], counts[1], counts[2], counts[3] = 1+x%7, x%3, x%5, x%11
			if err := fn(PairRecord{A: uint32(a), B: uint32(b), Counts: counts}); err != nil {
				return err
			}
		}
	}
	return nil
}

// TestWriteMemoryFlatInPairs: the bytes WriteFile allocates do not grow with
// the number of pairs. The same 3000 entities are written with 4 and with
// 150 neighbours on each side (about 12 k vs 450 k pairs) and a write memory
// of 1 MiB; the allocation difference must stay under 3 MiB. The in-memory
// writer this replaced held about 48 bytes per pair (supports, ids, edges)
// and fails here: it allocated 55.5 MB more for the larger index (measured
// by running this test against it).
// Not parallel: it reads the process-wide allocation counter.
func TestWriteMemoryFlatInPairs(t *testing.T) {
	if testing.Short() {
		t.Skip("writes a 450k-pair index")
	}
	const ents = 3000
	alloc := func(w int) (uint64, uint64) {
		src := newWindowSource(ents, w)
		path := filepath.Join(t.TempDir(), "w.hwx")
		runtime.GC()
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		if err := WriteFile(path, src, WithWriteMemory(1<<20)); err != nil {
			t.Fatal(err)
		}
		runtime.ReadMemStats(&after)
		x, err := Open(path)
		if err != nil {
			t.Fatal(err)
		}
		defer x.Close()
		return after.TotalAlloc - before.TotalAlloc, x.NumPairs()
	}
	smallB, smallP := alloc(4)
	bigB, bigP := alloc(150)
	t.Logf("WriteFile allocated %d bytes for %d pairs, %d bytes for %d pairs (%.2f bytes per extra pair)",
		smallB, smallP, bigB, bigP, float64(int64(bigB)-int64(smallB))/float64(bigP-smallP))
	if bigP < 30*smallP {
		t.Fatalf("pair counts %d and %d are not far enough apart", smallP, bigP)
	}
	if bigB > smallB+3<<20 {
		t.Errorf("write phase allocated %d bytes more for %d more pairs: memory grows with the pairs", bigB-smallB, bigP-smallP)
	}
}

// ringCorpus returns n JSONL contexts of 8 distinct greenhouse sensors
// drawn from a window of w consecutive ones on a ring of ents (seeded): the
// number of distinct pairs grows with w while the entities stay the same.
func ringCorpus(n, ents, w int, seed uint64) []byte {
	rng := rand.New(rand.NewPCG(seed, 5))
	var b bytes.Buffer
	picked := make([]int, 0, 8)
	for i := range n {
		picked = testcorpus.Window(rng, picked, rng.IntN(ents), w, ents, 8)
		fmt.Fprintf(&b, `{"id":"c%d","obs":{`, i)
		for j, e := range picked {
			if j > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, `"vent%05d":"%s"`, e, [2]string{"shut", "open"}[rng.IntN(2)])
		}
		b.WriteString("}}\n")
	}
	return b.Bytes()
}

// TestBuildWritePhaseFlatInPairs: Build's write phase (from the PhaseWrite
// to the PhaseDone progress event: Compiled.Pairs replayed twice through
// the prune filter into WriteFile) allocates the same whatever the number
// of pairs. 4000 vents, windows of 12 and of 200 (about 44 k and 0.6 M
// pairs), write memory 1 MiB through WithWriteOptions; the difference must
// stay under 3 MiB. The in-memory writer this replaced fails: 7.5 vs
// 75.2 MB (measured by running this test against it).
// Not parallel: it reads the process-wide allocation counter.
func TestBuildWritePhaseFlatInPairs(t *testing.T) {
	if testing.Short() {
		t.Skip("builds a 0.6M-pair index")
	}
	writeAlloc := func(w int) (uint64, uint64) {
		data := ringCorpus(60_000, 4000, w, 3)
		var at uint64
		var ms runtime.MemStats
		var delta uint64
		sum, err := Build(context.Background(), jsonlReader(bytes.NewReader(data), "ring.jsonl"),
			filepath.Join(t.TempDir(), "r.hwx"), WithTempDir(t.TempDir()), WithMemBudget(64<<20),
			WithWriteOptions(WithWriteMemory(1<<20)),
			WithProgress(func(ev ProgressEvent) {
				switch ev.Phase {
				case PhaseWrite:
					runtime.GC()
					runtime.ReadMemStats(&ms)
					at = ms.TotalAlloc
				case PhaseDone:
					runtime.ReadMemStats(&ms)
					delta = ms.TotalAlloc - at
				}
			}))
		if err != nil {
			t.Fatal(err)
		}
		return delta, sum.Pairs.After
	}
	smallB, smallP := writeAlloc(12)
	bigB, bigP := writeAlloc(200)
	t.Logf("write phase allocated %d bytes for %d pairs, %d bytes for %d pairs", smallB, smallP, bigB, bigP)
	if bigP < 10*smallP {
		t.Fatalf("pair counts %d and %d are not far enough apart", smallP, bigP)
	}
	if bigB > smallB+3<<20 {
		t.Errorf("write phase allocated %d bytes more for %d more pairs: memory grows with the pairs", bigB-smallB, bigP-smallP)
	}
}

// TestAdjacencyBuckets: the bucket split covers the entities in order, each
// bucket holds at most the limit of edges unless it is a single entity, and
// a tiny write memory still gives at most 2·maxAdjBuckets+1 buckets (here
// degrees alternate 1 and 97, the worst case for the pairing argument).
func TestAdjacencyBuckets(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		n      int
		memory int64
	}{{0, 1}, {1, 1}, {20_000, 1}, {20_000, 12 * 500}, {20_000, DefaultWriteMemory}} {
		p := &plan{k: make([]uint8, tc.n), nbrOffs: make([]uint64, tc.n+1), memory: tc.memory}
		for i := range tc.n {
			p.nbrOffs[i+1] = p.nbrOffs[i] + uint64(1+96*(i%2))
		}
		p.h.Edges = p.nbrOffs[tc.n]
		a := newAdjacency(p)
		limit := max(uint64(tc.memory/adjEdgeBytes), (p.h.Edges+maxAdjBuckets-1)/maxAdjBuckets, 1)
		nb := a.buckets()
		if nb < 1 || nb > 2*maxAdjBuckets+1 || a.first[0] != 0 || int(a.first[nb]) != tc.n || a.edge[nb] != p.h.Edges {
			t.Fatalf("n=%d memory=%d: %d buckets, first %v..., edge ends %d", tc.n, tc.memory, nb, a.first[:min(3, len(a.first))], a.edge[nb])
		}
		var largest uint64
		for b := range nb {
			size := a.edge[b+1] - a.edge[b]
			largest = max(largest, size)
			if a.edge[b] != p.nbrOffs[a.first[b]] || (size > limit && a.first[b+1]-a.first[b] != 1) {
				t.Fatalf("n=%d memory=%d: bucket %d (entities %d..%d) has %d edges, limit %d",
					tc.n, tc.memory, b, a.first[b], a.first[b+1], size, limit)
			}
		}
		if uint64(len(a.nbr)) != largest || uint64(len(a.sup)) != largest {
			t.Fatalf("n=%d memory=%d: bucket arrays of %d, largest bucket %d", tc.n, tc.memory, len(a.nbr), largest)
		}
		t.Logf("n=%d memory=%d: %d buckets, limit %d edges", tc.n, tc.memory, nb, limit)
	}
}

// BenchmarkWriteSections measures the writer (validate, lay out, write the
// sections to a file; no fsync or rename) on a 1M-pair binary window index,
// with the adjacency in one bucket (64 MiB, the baseline) and in about 24
// spooled buckets (1 MiB), and checks that both write the same file. (The
// in-memory writer it replaced was the baseline until it was retired for
// the golden digests of TestStreamingWriterMatchesReference.)
func BenchmarkWriteSections(b *testing.B) {
	src := newWindowSource(50_000, 20)
	dir := b.TempDir()
	var want []byte
	for _, mem := range []int64{64 << 20, 1 << 20} {
		b.Run(fmt.Sprintf("streaming/mem=%dMiB", mem>>20), func(b *testing.B) {
			b.ReportAllocs()
			path := filepath.Join(dir, "new.hwx")
			for b.Loop() {
				p, err := compile(src, writeConfig{rankPrefix: DefaultRankPrefix, memory: mem})
				if err != nil {
					b.Fatal(err)
				}
				f, err := os.Create(path)
				if err != nil {
					b.Fatal(err)
				}
				if err := p.write(f, path+".adj", src); err != nil {
					b.Fatal(err)
				}
				f.Close()
			}
			got, err := os.ReadFile(path)
			if err != nil {
				b.Fatal(err)
			}
			if want == nil {
				want = got
			} else if !bytes.Equal(got, want) {
				b.Fatalf("mem=%dMiB: a file of %d bytes that differs from the one-bucket file (%d bytes)", mem>>20, len(got), len(want))
			}
		})
	}
}
