package counts

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// greenhouseCorpus returns n JSONL contexts of an invented greenhouse: each
// context observes 2..7 of `ents` entities (zone sensors, vents, pumps, crop
// beds) with 1..4 values each, Zipf-skewed so that some pairs are frequent
// and many are rare; every tenth line is presence-only ("ents"), and bad
// lines are sprinkled in to check that both paths skip the same lines.
func greenhouseCorpus(seed uint64, n, ents int) []byte {
	rng := rand.New(rand.NewPCG(seed, 0x9e3779b97f4a7c15))
	zipf := rand.NewZipf(rng, 1.3, 2, uint64(ents-1))
	kinds := []string{"zone", "vent", "pump", "bed", "sensor"}
	vals := [][]string{{"high", "low", "mid"}, {"open", "shut"}, {"on", "off"}, {"dry", "wet", "ok", "flooded"}, {"fault", "nominal"}}
	var b bytes.Buffer
	for i := range n {
		if i%97 == 13 {
			b.WriteString(`{"id":"bad` + fmt.Sprint(i) + `","obs":{"x":1}}` + "\n") // bad-field
			continue
		}
		if i%211 == 5 {
			b.WriteString("\n") // blank
		}
		k := 2 + rng.IntN(6)
		seen := map[uint64]bool{}
		presence := i%10 == 3
		if presence {
			fmt.Fprintf(&b, `{"id":"c%d","ents":[`, i)
		} else {
			fmt.Fprintf(&b, `{"id":"c%d","obs":{`, i)
		}
		first := true
		for range k {
			e := zipf.Uint64()
			if seen[e] {
				continue
			}
			seen[e] = true
			if !first {
				b.WriteByte(',')
			}
			first = false
			kind := int(e) % len(kinds)
			name := fmt.Sprintf("%s%d", kinds[kind], e)
			if presence {
				fmt.Fprintf(&b, "%q", name+"-seen")
			} else {
				vs := vals[kind]
				fmt.Fprintf(&b, "%q:%q", name, vs[rng.IntN(len(vs))])
			}
		}
		if presence {
			b.WriteString("]}\n")
		} else {
			b.WriteString("}}\n")
		}
	}
	return b.Bytes()
}

func buildBytes(t *testing.T, data []byte, opts ...graphidx.BuildOption) []byte {
	t.Helper()
	out := filepath.Join(t.TempDir(), "direct.hwi")
	if _, err := graphidx.Build(context.Background(), corpus.NewJSONLReader(bytes.NewReader(data), "data.jsonl"), out, opts...); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func countsPartialOf(t testing.TB, data []byte) *Partial {
	t.Helper()
	p := NewPartial()
	eachContext(t, data, p.Add)
	return p
}

// eachContext calls add with every context of a JSONL corpus.
func eachContext(t testing.TB, data []byte, add func(graphidx.Context) error) {
	t.Helper()
	r := corpus.NewJSONLReader(bytes.NewReader(data), "data.jsonl")
	for {
		c, err := r.Next()
		if err == io.EOF {
			return
		}
		if err != nil {
			t.Fatal(err)
		}
		if err := add(c); err != nil {
			t.Fatal(err)
		}
	}
}

func compileCountsBytes(t *testing.T, dirs []string, opts ...graphidx.BuildOption) []byte {
	t.Helper()
	src, _, err := MergeCounts(context.Background(), dirs, opts...)
	if err != nil {
		t.Fatal(err)
	}
	defer src.(io.Closer).Close()
	out := filepath.Join(t.TempDir(), "counts.hwi")
	if err := graphidx.WriteFile(out, src); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestCountsByteIdentical: count shards written from a Partial and compiled
// with CompileCounts give the same index file, byte for byte, as Build on the
// corpus, with and without pruning and for several shard counts.
func TestCountsByteIdentical(t *testing.T) {
	t.Parallel()
	data := greenhouseCorpus(1, 3000, 60)
	p := countsPartialOf(t, data)
	for _, tc := range []struct {
		shards int
		opts   []graphidx.BuildOption
	}{
		{1, nil},
		{7, nil},
		{16, []graphidx.BuildOption{graphidx.WithMinSupport(3)}},
		{5, []graphidx.BuildOption{graphidx.WithMaxNeighbors(4)}},
		{3, []graphidx.BuildOption{graphidx.WithMinSupport(2), graphidx.WithMaxNeighbors(6)}},
	} {
		t.Run(fmt.Sprintf("shards=%d/opts=%d", tc.shards, len(tc.opts)), func(t *testing.T) {
			t.Parallel()
			dir := t.TempDir()
			if _, err := WriteCounts(dir, p, tc.shards); err != nil {
				t.Fatal(err)
			}
			direct := buildBytes(t, data, tc.opts...)
			fromCounts := compileCountsBytes(t, []string{dir}, tc.opts...)
			if !bytes.Equal(direct, fromCounts) {
				t.Fatalf("index from counts differs from direct build (%d vs %d bytes)", len(fromCounts), len(direct))
			}
		})
	}
}

// TestMergeCountsEqualsRebuild: counting two halves of a corpus separately
// and merging the count sets gives the index of the whole corpus.
func TestMergeCountsEqualsRebuild(t *testing.T) {
	t.Parallel()
	data := greenhouseCorpus(2, 2000, 40)
	cut := bytes.IndexByte(data[len(data)/3:], '\n') + len(data)/3 + 1
	a, b := data[:cut], data[cut:]
	da, db := t.TempDir(), t.TempDir()
	if _, err := WriteCounts(da, countsPartialOf(t, a), 4); err != nil {
		t.Fatal(err)
	}
	if _, err := WriteCounts(db, countsPartialOf(t, b), 9); err != nil { // shard counts need not agree
		t.Fatal(err)
	}
	for _, opts := range [][]graphidx.BuildOption{nil, {graphidx.WithMinSupport(2), graphidx.WithMaxNeighbors(5)}} {
		direct := buildBytes(t, data, opts...)
		if !bytes.Equal(direct, compileCountsBytes(t, []string{da, db}, opts...)) {
			t.Fatalf("merge of A and B differs from the build of A∪B (opts %d)", len(opts))
		}
		// The Partial path (ReadCounts, Check, Compile) agrees with the
		// streaming one.
		p := NewPartial()
		for _, d := range []string{da, db} {
			if _, err := ReadCounts(context.Background(), d, p); err != nil {
				t.Fatal(err)
			}
		}
		if err := p.Check(); err != nil {
			t.Fatal(err)
		}
		src, _, err := p.Compile(opts...)
		if err != nil {
			t.Fatal(err)
		}
		out := filepath.Join(t.TempDir(), "p.hwi")
		if err := graphidx.WriteFile(out, src); err != nil {
			t.Fatal(err)
		}
		if b, _ := os.ReadFile(out); !bytes.Equal(direct, b) {
			t.Fatalf("ReadCounts+Partial.Compile differs from the build of A∪B (opts %d)", len(opts))
		}
	}
}

// TestCountShardDeterministic: the same counts give byte-identical shards,
// whatever order cells were added in.
func TestCountShardDeterministic(t *testing.T) {
	t.Parallel()
	p := countsPartialOf(t, greenhouseCorpus(3, 500, 30))
	q := NewPartial()
	q.AddContexts(p.Contexts())
	var cells []CountCell
	if err := p.Cells(func(c CountCell) error { cells = append(cells, c); return nil }); err != nil {
		t.Fatal(err)
	}
	for i := len(cells) - 1; i >= 0; i-- { // reverse order, split in two halves
		c := cells[i]
		h := c
		h.N = c.N / 2
		if h.N > 0 {
			if err := q.AddCell(h); err != nil {
				t.Fatal(err)
			}
		}
		c.N -= h.N
		if err := q.AddCell(c); err != nil {
			t.Fatal(err)
		}
	}
	d1, d2 := t.TempDir(), t.TempDir()
	if _, err := WriteCounts(d1, p, 3); err != nil {
		t.Fatal(err)
	}
	if _, err := WriteCounts(d2, q, 3); err != nil {
		t.Fatal(err)
	}
	for s := range 3 {
		b1, _ := os.ReadFile(filepath.Join(d1, CountShardName(s, 3)))
		b2, _ := os.ReadFile(filepath.Join(d2, CountShardName(s, 3)))
		if !bytes.Equal(b1, b2) || len(b1) < countsHeaderSize {
			t.Fatalf("shard %d differs (%d vs %d bytes)", s, len(b1), len(b2))
		}
	}
}

func TestCountKeyRoundTrip(t *testing.T) {
	t.Parallel()
	// Names with separators, NUL bytes and multi-byte runes must survive.
	for _, c := range []CountCell{
		{A: "vent3", U: "open", N: 1},
		{A: "a\x00b", U: "x", N: 7},
		{A: "bed1", B: "pump2", U: "dry", V: "on", N: 42},
		{A: "zone\x00z", B: "zone ñ", U: "é", V: "\x00", N: 1 << 40},
	} {
		got, err := ParseCountKey(c.AppendKey(nil), c.N)
		if err != nil || got != c {
			t.Fatalf("round trip of %+v: got %+v, %v", c, got, err)
		}
		if s := c.Shard(13); s < 0 || s >= 13 {
			t.Fatalf("shard %d out of range", s)
		}
	}
	for _, key := range [][]byte{nil, []byte("X"), []byte("M\x00"), []byte("M\x01a"), []byte("M\x01a\x01bextra"),
		[]byte("P\x01b\x01a\x01u\x01v"), []byte("M\xff\xff\xff\xff\xff\xff\xff\xff\xff\xff")} {
		if _, err := ParseCountKey(key, 1); !errors.Is(err, ErrBadCounts) {
			t.Fatalf("key %q: got %v, want ErrBadCounts", key, err)
		}
	}
}

func TestAddCellRejects(t *testing.T) {
	t.Parallel()
	p := NewPartial()
	for _, c := range []CountCell{
		{A: "", U: "x", N: 1},
		{A: "a", U: "", N: 1},
		{A: "b", B: "a", U: "x", V: "y", N: 1},
		{A: "a", B: "a", U: "x", V: "y", N: 1},
		{A: "a", B: "b", U: "x", N: 1},
		{A: "a", U: "x", N: 0},
		{A: strings.Repeat("a", graphidx.MaxNameBytes+1), U: "x", N: 1},
	} {
		if err := p.AddCell(c); !errors.Is(err, ErrBadCounts) {
			t.Fatalf("AddCell(%+v) = %v, want ErrBadCounts", c, err)
		}
	}
	if p.Len() != 0 {
		t.Fatalf("rejected cells were added: %d", p.Len())
	}
}

// TestCountShardCorruption flips every byte of a small shard in turn, and
// truncates it at every length: each damaged file must be rejected.
func TestCountShardCorruption(t *testing.T) {
	t.Parallel()
	p := countsPartialOf(t, greenhouseCorpus(4, 40, 8))
	var buf bytes.Buffer
	if _, err := writeCountShard(&buf, p, 0, 1, p.Contexts(), true); err != nil {
		t.Fatal(err)
	}
	good := buf.Bytes()
	if _, err := DecodeCountShard(good, "s", NewPartial()); err != nil {
		t.Fatal(err)
	}
	for i := range good {
		b := bytes.Clone(good)
		b[i] ^= 0x20
		if _, err := DecodeCountShard(b, "s", nil); !errors.Is(err, ErrBadCounts) {
			t.Fatalf("flip at byte %d accepted: %v", i, err)
		}
	}
	for n := range len(good) {
		if _, err := DecodeCountShard(good[:n], "s", nil); !errors.Is(err, ErrBadCounts) {
			t.Fatalf("truncation to %d bytes accepted: %v", n, err)
		}
	}
	if _, err := DecodeCountShard(append(bytes.Clone(good), 0), "s", nil); !errors.Is(err, ErrBadCounts) {
		t.Fatal("trailing byte accepted")
	}
}

func TestReadCountsSetErrors(t *testing.T) {
	t.Parallel()
	p := countsPartialOf(t, greenhouseCorpus(5, 200, 20))
	ctx := context.Background()

	missing := t.TempDir()
	if _, err := WriteCounts(missing, p, 4); err != nil {
		t.Fatal(err)
	}
	os.Remove(filepath.Join(missing, CountShardName(2, 4)))
	if _, err := ReadCounts(ctx, missing, NewPartial()); !errors.Is(err, ErrBadCounts) || !strings.Contains(err.Error(), "counts-00002-of-00004.hwc is missing") {
		t.Fatalf("missing shard: %v", err)
	}

	mixed := t.TempDir()
	if _, err := WriteCounts(mixed, p, 2); err != nil {
		t.Fatal(err)
	}
	if _, err := WriteCounts(mixed, p, 3); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadCounts(ctx, mixed, NewPartial()); !errors.Is(err, ErrBadCounts) {
		t.Fatalf("two sets in one dir: %v", err)
	}

	swapped := t.TempDir()
	if _, err := WriteCounts(swapped, p, 2); err != nil {
		t.Fatal(err)
	}
	a, b := filepath.Join(swapped, CountShardName(0, 2)), filepath.Join(swapped, CountShardName(1, 2))
	os.Rename(a, a+".x")
	os.Rename(b, a)
	os.Rename(a+".x", b)
	if _, err := ReadCounts(ctx, swapped, NewPartial()); !errors.Is(err, ErrBadCounts) {
		t.Fatalf("swapped shards: %v", err)
	}

	if _, err := ReadCounts(ctx, t.TempDir(), NewPartial()); !errors.Is(err, ErrBadCounts) {
		t.Fatalf("empty dir: %v", err)
	}
}

// TestCompileCountsInconsistent: a well-formed shard whose pair counts exceed
// the marginals (impossible for real contexts) is refused before compiling.
func TestCompileCountsInconsistent(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		name  string
		cells []CountCell
		ctxs  uint64
	}{
		{"pair above marginal", []CountCell{{A: "a", U: "x", N: 1}, {A: "b", U: "y", N: 5}, {A: "a", B: "b", U: "x", V: "y", N: 2}}, 5},
		{"pair value without marginal", []CountCell{{A: "a", U: "x", N: 1}, {A: "b", U: "y", N: 1}, {A: "a", B: "b", U: "z", V: "y", N: 1}}, 1},
		{"more observations than contexts", []CountCell{{A: "a", U: "x", N: 3}}, 2},
	} {
		p := NewPartial()
		p.AddContexts(tc.ctxs)
		for _, c := range tc.cells {
			if err := p.AddCell(c); err != nil {
				t.Fatal(err)
			}
		}
		dir := t.TempDir()
		if _, err := WriteCounts(dir, p, 2); err != nil {
			t.Fatal(err)
		}
		if _, _, err := CompileCounts(context.Background(), dir); !errors.Is(err, ErrBadCounts) {
			t.Fatalf("%s: got %v, want ErrBadCounts", tc.name, err)
		}
	}
}

// TestJSONLLineParserMatchesReader: parsing line by line accepts and rejects
// exactly what JSONLReader does, with the same reasons.
func TestJSONLLineParserMatchesReader(t *testing.T) {
	t.Parallel()
	data := append(greenhouseCorpus(6, 400, 20), []byte(
		"{\"id\":\"x\",\"obs\":{\"a\":\"1\",\"a\":\"2\"}}\r\n"+
			"not json\n"+
			"   \n"+
			"{\"id\":\"y\",\"ents\":[\"p\"],\"obs\":{\"q\":\"r\"}}\n"+
			"{\"obs\":{\"q\":\"r\"}}\n"+
			"{\"id\":\"z\",\"obs\":{\"q\":\"r\"}}\r\n")...)
	r := corpus.NewJSONLReader(bytes.NewReader(data), "f.jsonl")
	var want []string
	for {
		c, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		want = append(want, fmt.Sprint(c))
	}
	lp := corpus.NewJSONLLineParser("f.jsonl")
	var got []string
	reasons := map[string]int64{}
	for line := range bytes.SplitSeq(bytes.TrimSuffix(data, []byte("\n")), []byte("\n")) {
		c, blank, err := lp.Parse(line)
		var le *graphidx.LineError
		switch {
		case blank:
		case errors.As(err, &le):
			if le.File != "f.jsonl" {
				t.Fatalf("error names %q", le.File)
			}
			reasons[le.Reason]++
		case err != nil:
			t.Fatal(err)
		default:
			got = append(got, fmt.Sprint(c))
		}
	}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Fatalf("line parser accepted %d contexts, reader %d", len(got), len(want))
	}
	if fmt.Sprint(reasons) != fmt.Sprint(r.Stats().Skipped) {
		t.Fatalf("skip reasons differ: line parser %v, reader %v", reasons, r.Stats().Skipped)
	}
	long := corpus.NewJSONLLineParser("f", corpus.WithMaxLineBytes(10))
	if _, _, err := long.Parse([]byte(`{"id":"c1","obs":{"a":"b"}}`)); err == nil || !strings.Contains(err.Error(), graphidx.ReasonLineTooLong) {
		t.Fatalf("long line: %v", err)
	}
}

func ExampleCompileCounts() {
	// Two greenhouse contexts counted into a Partial, written as 2 count
	// shards and compiled back.
	p := NewPartial()
	for _, c := range []graphidx.Context{
		{ID: "c1", Obs: []graphidx.Observation{{Entity: "vent3", Value: "open"}, {Entity: "zone2.humidity", Value: "high"}}},
		{ID: "c2", Obs: []graphidx.Observation{{Entity: "vent3", Value: "shut"}, {Entity: "zone2.humidity", Value: "high"}, {Entity: "pump1", Value: "on"}}},
	} {
		if err := p.Add(c); err != nil {
			fmt.Println(err)
			return
		}
	}
	dir, _ := os.MkdirTemp("", "counts")
	defer os.RemoveAll(dir)
	if _, err := WriteCounts(dir, p, 2); err != nil {
		fmt.Println(err)
		return
	}
	src, sum, err := CompileCounts(context.Background(), dir)
	if err != nil {
		fmt.Println(err)
		return
	}
	defer src.(io.Closer).Close() // unmaps the shards
	fmt.Println("contexts:", sum.Contexts, "entities:", sum.Entities, "pairs:", sum.Pairs.After)
	for _, e := range src.Entities() {
		fmt.Println(e.Name, e.Values, e.Marginal)
	}
	// Output:
	// contexts: 2 entities: 3 pairs: 3
	// pump1 [on] [1]
	// vent3 [open shut] [1 1]
	// zone2.humidity [high] [2]
}

// FuzzDecodeCountShard: no input makes the decoder panic, and an accepted
// shard re-encodes to the same bytes (the encoding is canonical).
func FuzzDecodeCountShard(f *testing.F) {
	p := NewPartial()
	for _, c := range []graphidx.Context{
		{ID: "c1", Obs: []graphidx.Observation{{Entity: "vent3", Value: "open"}, {Entity: "zone2", Value: "high"}}},
		{ID: "c2", Obs: []graphidx.Observation{{Entity: "vent3", Value: "shut"}, {Entity: "zone2", Value: "high"}, {Entity: "pump1", Value: "on"}}},
	} {
		if err := p.Add(c); err != nil {
			f.Fatal(err)
		}
	}
	var buf bytes.Buffer
	if _, err := writeCountShard(&buf, p, 0, 1, p.Contexts(), true); err != nil {
		f.Fatal(err)
	}
	f.Add(buf.Bytes())
	f.Add([]byte(CountsMagic))
	f.Add([]byte{})
	f.Fuzz(func(t *testing.T, b []byte) {
		q := NewPartial()
		hd, err := DecodeCountShard(b, "fuzz", q)
		if err != nil {
			if !errors.Is(err, ErrBadCounts) {
				t.Fatalf("error does not wrap ErrBadCounts: %v", err)
			}
			return
		}
		var out bytes.Buffer
		if _, err := writeCountShard(&out, q, hd.Shard, hd.Shards, hd.Contexts, true); err != nil {
			t.Fatalf("re-encode: %v", err)
		}
		if !bytes.Equal(out.Bytes(), b) {
			t.Fatalf("accepted shard is not canonical")
		}
	})
}

func BenchmarkCountShards(b *testing.B) {
	p := countsPartialOf(b, greenhouseCorpus(7, 20000, 200))
	b.Run("write", func(b *testing.B) {
		b.ReportAllocs()
		var n int64
		for b.Loop() {
			var err error
			if n, err = WriteCounts(b.TempDir(), p, 8); err != nil {
				b.Fatal(err)
			}
		}
		b.ReportMetric(float64(n)/float64(p.Len()), "bytes/cell")
	})
	dir := b.TempDir()
	if _, err := WriteCounts(dir, p, 8); err != nil {
		b.Fatal(err)
	}
	b.Run("compile", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			src, sum, err := CompileCounts(context.Background(), dir)
			if err != nil || sum.Contexts != p.Contexts() || len(src.Entities()) == 0 {
				b.Fatalf("compile: %v, %d contexts", err, sum.Contexts)
			}
			src.(io.Closer).Close()
		}
	})
}

// TestCountSourceCloseUnmaps: MergeCounts maps the shards (on Linux they
// appear in /proc/self/maps) and Close unmaps them; Pairs fails after
// Close, and Close is idempotent. A failing MergeCounts leaves nothing
// mapped either.
func TestCountSourceCloseUnmaps(t *testing.T) {
	dir := t.TempDir()
	if _, err := WriteCounts(dir, countsPartialOf(t, greenhouseCorpus(3, 300, 12)), 3); err != nil {
		t.Fatal(err)
	}
	mapped := func() int {
		b, err := os.ReadFile("/proc/self/maps")
		if err != nil {
			return -1 // not Linux: nothing to count
		}
		return bytes.Count(b, []byte(dir))
	}
	src, _, err := CompileCounts(context.Background(), dir)
	if err != nil {
		t.Fatal(err)
	}
	if n := mapped(); n == 0 && fileio.MmapSupported {
		t.Error("no shard of the open source is mapped")
	}
	c := src.(io.Closer)
	if err := c.Close(); err != nil {
		t.Fatal(err)
	}
	if n := mapped(); n > 0 {
		t.Errorf("%d mappings of the shards left after Close", n)
	}
	if err := src.Pairs(func(graphidx.PairRecord) error { return nil }); err == nil {
		t.Error("Pairs after Close succeeded")
	}
	if err := c.Close(); err != nil {
		t.Errorf("second Close: %v", err)
	}
	// A set whose last shard is corrupt fails after mapping the others.
	paths, err := filepath.Glob(filepath.Join(dir, "*.hwc"))
	if err != nil || len(paths) != 3 {
		t.Fatalf("shards %v, %v", paths, err)
	}
	b, err := os.ReadFile(paths[2])
	if err != nil {
		t.Fatal(err)
	}
	b[len(b)-1] ^= 0xff
	if err := os.WriteFile(paths[2], b, 0o644); err != nil {
		t.Fatal(err)
	}
	if _, _, err := CompileCounts(context.Background(), dir); err == nil {
		t.Fatal("a corrupt shard was accepted")
	}
	if n := mapped(); n > 0 {
		t.Errorf("%d mappings left after a failed compile", n)
	}
}

// TestCountShardsInGroups: counting a corpus once per group of shards
// (Partial.AddShards) and writing each group (WriteCountShards) gives the
// same files, byte for byte, as WriteCounts from one Partial of the whole
// corpus, and each group's Partial holds only its shards' cells.
func TestCountShardsInGroups(t *testing.T) {
	t.Parallel()
	data := greenhouseCorpus(4, 1500, 30)
	const n, groups = 7, 3
	whole := t.TempDir()
	full := countsPartialOf(t, data)
	if _, err := WriteCounts(whole, full, n); err != nil {
		t.Fatal(err)
	}
	grouped := t.TempDir()
	maxCells := 0
	for g := range groups {
		var mine []int
		for s := range n {
			if s%groups == g {
				mine = append(mine, s)
			}
		}
		p := NewPartial()
		eachContext(t, data, func(c graphidx.Context) error {
			return p.AddShards(c, n, func(s int) bool { return s%groups == g })
		})
		maxCells = max(maxCells, len(p.cells))
		if _, err := WriteCountShards(grouped, p, n, mine); err != nil {
			t.Fatal(err)
		}
	}
	if maxCells*2 > len(full.cells) {
		t.Errorf("a group held %d of %d cells: the grouping does not bound memory", maxCells, len(full.cells))
	}
	for s := range n {
		a, err := os.ReadFile(filepath.Join(whole, CountShardName(s, n)))
		if err != nil {
			t.Fatal(err)
		}
		b, err := os.ReadFile(filepath.Join(grouped, CountShardName(s, n)))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(a, b) {
			t.Fatalf("shard %d differs when counted in %d groups", s, groups)
		}
	}
	if _, err := WriteCountShards(grouped, full, n, []int{n}); err == nil {
		t.Error("a shard out of range was accepted")
	}
}

// TestMergeCountsRefusesDuplicateSets: a count set given twice, by the same
// path or as a copy, is refused instead of being counted twice; distinct
// sets with the same shard count still merge.
func TestMergeCountsRefusesDuplicateSets(t *testing.T) {
	t.Parallel()
	write := func(ctxs []map[string]string) string {
		p := NewPartial()
		for _, c := range ctxs {
			var obs []graphidx.Observation
			for e, v := range c {
				obs = append(obs, graphidx.Observation{Entity: e, Value: v})
			}
			if err := p.Add(graphidx.Context{Obs: obs}); err != nil {
				t.Fatal(err)
			}
		}
		dir := t.TempDir()
		if _, err := WriteCounts(dir, p, 2); err != nil {
			t.Fatal(err)
		}
		return dir
	}
	gh := greenhouseContexts()
	a, b := write(gh[:4]), write(gh[4:])
	cp := filepath.Join(t.TempDir(), "copy")
	if err := os.CopyFS(cp, os.DirFS(a)); err != nil {
		t.Fatal(err)
	}
	for _, dirs := range [][]string{{a, a}, {a, b, a + string(filepath.Separator)}, {a, cp}} {
		_, _, err := MergeCounts(context.Background(), dirs)
		if !errors.Is(err, ErrDuplicateCounts) || !errors.Is(err, ErrBadCounts) {
			t.Errorf("MergeCounts(%v): %v, want ErrDuplicateCounts", dirs, err)
		}
	}
	src, sum, err := MergeCounts(context.Background(), []string{a, b})
	if err != nil {
		t.Fatal(err)
	}
	if c, ok := src.(io.Closer); ok {
		c.Close()
	}
	if sum.Contexts != uint64(len(gh)) {
		t.Errorf("merged %d contexts, want %d", sum.Contexts, len(gh))
	}
}

// greenhouseContexts is a small hand-written corpus: one map (entity to
// value) per context.
func greenhouseContexts() []map[string]string {
	return []map[string]string{
		{"bed.north": "wet", "pump.a": "on", "vent.east": "open"},
		{"bed.north": "wet", "pump.a": "on"},
		{"bed.north": "dry", "pump.a": "off", "zone.temp": "hot"},
		{"vent.east": "closed", "zone.temp": "mild"},
		{"bed.north": "dry", "vent.east": "open", "zone.temp": "hot"},
		{"pump.a": "on", "zone.temp": "cold"},
		{"pump.a": "on", "sensor.co2": "low"},
		{"sensor.co2": "high"},
	}
}

// TestPartialCountOverflow: a Partial carries cell sums in uint64 and
// Compile rejects one above MaxUint32 with ErrCountOverflow.
func TestPartialCountOverflow(t *testing.T) {
	t.Parallel()
	p := NewPartial()
	for _, c := range []CountCell{{A: "a", U: "1", N: 1 << 33}, {A: "b", U: "1", N: 1 << 33}, {A: "a", U: "1", B: "b", V: "1", N: 1 << 32}} {
		if err := p.AddCell(c); err != nil {
			t.Fatal(err)
		}
	}
	p.AddContexts(1 << 33)
	if _, _, err := p.Compile(); !errors.Is(err, graphidx.ErrCountOverflow) {
		t.Errorf("compile: %v", err)
	}
}
