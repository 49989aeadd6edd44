package beamjob

import (
	"bufio"
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"reflect"
	"strings"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem"
	_ "github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem/local" // local paths always work
	"github.com/apache/beam/sdks/v2/go/pkg/beam/io/textio"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/register"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
	"github.com/hopwise/hopwise/graphidx/counts"
)

// DefaultShards is the number of count shards written when Config.Shards is 0.
const DefaultShards = 16

// DefaultFlushCells is the number of distinct count cells a worker
// accumulates per bundle before it emits them (about 100 bytes each).
const DefaultFlushCells = 1 << 18

// MetricsNamespace is the namespace of the pipeline's counters.
const MetricsNamespace = "hopwise"

// Counter names (in MetricsNamespace). Skipped lines are counted per reason
// as SkippedPrefix + reason code (graphidx.Reason*).
const (
	CounterLines      = "lines"       // non-blank lines examined
	CounterContexts   = "contexts"    // contexts counted
	CounterShardBytes = "shard_bytes" // bytes of count shards written
	CounterShards     = "shards"      // count shard files written
	SkippedPrefix     = "skipped."
)

// Config configures the counting pipeline.
type Config struct {
	// Inputs are file globs of JSONL corpus shards (local paths, gs://,
	// s3://, whatever filesystems the binary links). At least one.
	Inputs []string
	// Output is the directory (or object prefix) that receives the count
	// shards, named by counts.CountShardName.
	Output string
	// Shards is the number of count shards (default DefaultShards). Each
	// shard is sorted and written by one worker, so a shard must fit in a
	// worker's memory: pick Shards ≥ expected counts bytes / 256 MiB.
	Shards int
	// Strict fails the job at the first bad corpus line. Otherwise bad lines
	// are skipped and counted per reason in the job's metrics.
	Strict bool
	// FlushCells bounds the per-bundle accumulation (default
	// DefaultFlushCells).
	FlushCells int
	// MaxLineBytes is the longest accepted line (default
	// corpus.DefaultMaxLineBytes).
	MaxLineBytes int
}

func (c *Config) check() error {
	if len(c.Inputs) == 0 {
		return errors.New("beamjob: no input glob")
	}
	if c.Output == "" {
		return errors.New("beamjob: no output directory")
	}
	if c.Shards == 0 {
		c.Shards = DefaultShards
	}
	if c.Shards < 1 || c.Shards > counts.MaxCountShards {
		return fmt.Errorf("beamjob: %d shards, want 1..%d", c.Shards, counts.MaxCountShards)
	}
	if c.FlushCells <= 0 {
		c.FlushCells = DefaultFlushCells
	}
	if c.MaxLineBytes <= 0 {
		c.MaxLineBytes = corpus.DefaultMaxLineBytes
	}
	return nil
}

// contextsKey is the cell key that carries the number of contexts. Count
// cell keys start with 'M' or 'P' (counts.CountCell.AppendKey), so it
// cannot collide.
const contextsKey = "C"

// Cell is one keyed count on its way to a count shard: a cell key of
// counts.CountCell.AppendKey (or contextsKey) and its summed count.
// An empty Key is a marker that makes every shard exist, even an empty one.
type Cell struct {
	Key string
	N   int64
}

func init() {
	beam.RegisterType(reflect.TypeOf((*Cell)(nil)).Elem())
	register.DoFn4x1[context.Context, string, string, func(string, int64), error](&countFn{})
	register.Emitter2[string, int64]()
	register.Function2x1[int64, int64, int64](sumCounts)
	register.DoFn3x1[string, int64, func(int, Cell), error](&routeFn{})
	register.Function2x0[int, func(int, Cell)](markShard)
	register.Emitter2[int, Cell]()
	register.DoFn3x1[context.Context, int, func(*Cell) bool, error](&writeFn{})
	register.Iter1[Cell]()
}

// Pipeline adds the counting job to s: read the corpus lines → parse each
// line with corpus.JSONLLineParser and count it into a per-bundle
// counts.Partial → emit its cells keyed by counts.CountCell.AppendKey →
// CombinePerKey (sum) → route each cell to shard CountCell.Shard(Shards) →
// GroupByKey on the shard → each shard is sorted and written by one worker
// with counts.WriteCountShard. The count shards compile, with
// counts.CompileCounts, to the same index as graphidx.Build on the corpus.
//
// Shuffle volume is O(distinct cells per bundle) thanks to the per-bundle
// Partial and the lifted combine; the write stage holds one shard in memory.
func Pipeline(s beam.Scope, cfg Config) error {
	if err := cfg.check(); err != nil {
		return err
	}
	for _, path := range append([]string{cfg.Output}, cfg.Inputs...) {
		if err := validateScheme(path); err != nil {
			return err
		}
	}
	var lines []beam.PCollection
	for i, glob := range cfg.Inputs {
		lines = append(lines, textio.ReadWithFilename(s.Scope(fmt.Sprintf("read%d", i)), glob))
	}
	all := lines[0]
	if len(lines) > 1 {
		all = beam.Flatten(s, lines...)
	}
	cells := beam.ParDo(s.Scope("count"), &countFn{Strict: cfg.Strict, FlushCells: cfg.FlushCells, MaxLineBytes: cfg.MaxLineBytes}, all)
	summed := beam.CombinePerKey(s.Scope("sum"), sumCounts, cells)
	routed := beam.ParDo(s.Scope("route"), &routeFn{Shards: cfg.Shards}, summed)
	ids := make([]int, cfg.Shards)
	for i := range ids {
		ids[i] = i
	}
	markers := beam.ParDo(s.Scope("markers"), markShard, beam.CreateList(s, ids))
	grouped := beam.GroupByKey(s.Scope("group"), beam.Flatten(s, routed, markers))
	beam.ParDo0(s.Scope("write"), &writeFn{Output: cfg.Output, Shards: cfg.Shards}, grouped)
	return nil
}

// validateScheme turns Beam's panic on a path whose scheme (gs://, s3://...)
// has no registered filesystem into an error: the binary must import that
// filesystem package (cmd/hopwise-beam links local, gs and s3).
func validateScheme(path string) (err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("beamjob: %s: %v", path, r)
		}
	}()
	filesystem.ValidateScheme(path)
	return nil
}

// sumCounts is the combine function: counts are sums.
func sumCounts(a, b int64) int64 { return a + b }

// countFn parses lines and counts them into a Partial per bundle.
type countFn struct {
	Strict       bool
	FlushCells   int
	MaxLineBytes int

	p        *counts.Partial
	parsers  map[string]*corpus.JSONLLineParser
	key      []byte
	lines    beam.Counter
	contexts beam.Counter
}

func (f *countFn) Setup() {
	f.parsers = map[string]*corpus.JSONLLineParser{}
	f.lines = beam.NewCounter(MetricsNamespace, CounterLines)
	f.contexts = beam.NewCounter(MetricsNamespace, CounterContexts)
}

func (f *countFn) StartBundle(_ context.Context, _ func(string, int64)) {
	f.p = counts.NewPartial()
}

func (f *countFn) ProcessElement(ctx context.Context, file, line string, emit func(string, int64)) error {
	lp := f.parsers[file]
	if lp == nil {
		if len(f.parsers) > 1024 {
			clear(f.parsers)
		}
		lp = corpus.NewJSONLLineParser(file, corpus.WithMaxLineBytes(f.MaxLineBytes))
		f.parsers[file] = lp
	}
	c, blank, err := lp.Parse([]byte(line))
	if blank {
		return nil
	}
	f.lines.Inc(ctx, 1)
	if err != nil {
		var le *graphidx.LineError
		if !errors.As(err, &le) {
			return err
		}
		if f.Strict {
			return fmt.Errorf("%w (line starts %q)", err, snippet(line))
		}
		beam.NewCounter(MetricsNamespace, SkippedPrefix+le.Reason).Inc(ctx, 1)
		return nil
	}
	if err := f.p.Add(c); err != nil {
		return fmt.Errorf("%s: %w", file, err)
	}
	f.contexts.Inc(ctx, 1)
	if f.p.Len() >= f.FlushCells {
		f.flush(emit)
	}
	return nil
}

func (f *countFn) FinishBundle(_ context.Context, emit func(string, int64)) error {
	f.flush(emit)
	return nil
}

// flush emits every cell of the bundle's Partial and empties it.
func (f *countFn) flush(emit func(string, int64)) {
	if f.p == nil || f.p.Contexts() == 0 {
		return
	}
	_ = f.p.Cells(func(c counts.CountCell) error {
		f.key = c.AppendKey(f.key[:0])
		emit(string(f.key), int64(c.N))
		return nil
	})
	emit(contextsKey, int64(f.p.Contexts()))
	f.p.Reset()
}

func snippet(s string) string {
	if len(s) > 80 {
		return s[:80] + "…"
	}
	return s
}

// routeFn keys each summed cell by its count shard.
type routeFn struct {
	Shards int
}

func (f *routeFn) ProcessElement(key string, n int64, emit func(int, Cell)) error {
	if key == contextsKey {
		emit(0, Cell{Key: key, N: n})
		return nil
	}
	c, err := counts.ParseCountKey([]byte(key), uint64(n))
	if err != nil {
		return err
	}
	emit(c.Shard(f.Shards), Cell{Key: key, N: n})
	return nil
}

// markShard emits an empty marker for shard i so that every shard is
// written, even one that receives no cell.
func markShard(i int, emit func(int, Cell)) { emit(i, Cell{}) }

// writeFn sorts one shard's cells and writes the count shard file: each
// worker writes the shards it is given, to a temporary name first, then
// renames it into place (or copies and deletes, on object stores).
type writeFn struct {
	Output string
	Shards int

	bytes, files beam.Counter
}

func (f *writeFn) Setup() {
	f.bytes = beam.NewCounter(MetricsNamespace, CounterShardBytes)
	f.files = beam.NewCounter(MetricsNamespace, CounterShards)
}

func (f *writeFn) ProcessElement(ctx context.Context, shard int, iter func(*Cell) bool) error {
	p := counts.NewPartial()
	var c Cell
	for iter(&c) {
		switch c.Key {
		case "":
		case contextsKey:
			p.AddContexts(uint64(c.N))
		default:
			cell, err := counts.ParseCountKey([]byte(c.Key), uint64(c.N))
			if err == nil {
				err = p.AddCell(cell)
			}
			if err != nil {
				return err
			}
		}
	}
	final := JoinPath(f.Output, counts.CountShardName(shard, f.Shards))
	var rnd [6]byte
	_, _ = rand.Read(rnd[:])
	tmp := JoinPath(f.Output, "."+counts.CountShardName(shard, f.Shards)+".tmp-"+hex.EncodeToString(rnd[:]))
	fs, err := filesystem.New(ctx, final)
	if err != nil {
		return err
	}
	defer fs.Close()
	w, err := fs.OpenWrite(ctx, tmp)
	if err != nil {
		return fmt.Errorf("beamjob: create %s: %w", tmp, err)
	}
	bw := bufio.NewWriterSize(w, 1<<20)
	n, err := counts.WriteCountShard(bw, p, shard, f.Shards)
	if err == nil {
		err = bw.Flush()
	}
	if cerr := w.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = filesystem.Rename(ctx, fs, tmp, final)
	}
	if err != nil {
		return fmt.Errorf("beamjob: write %s: %w", final, err)
	}
	f.bytes.Inc(ctx, n)
	f.files.Inc(ctx, 1)
	return nil
}

// JoinPath joins a directory or object prefix and a file name with one "/".
func JoinPath(dir, name string) string { return strings.TrimSuffix(dir, "/") + "/" + name }
