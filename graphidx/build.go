package graphidx

import (
	"bufio"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// Build errors.
var (
	// ErrTooManyValues: an entity takes more than MaxValues distinct values.
	// The error names the entity and the context where the excess appeared.
	ErrTooManyValues = errors.New("graphidx: entity has more than 64 distinct values")
	// ErrTooManyEntities: the corpus names more than 2^26 distinct entities.
	ErrTooManyEntities = errors.New("graphidx: more than 67108864 distinct entities")
	// ErrCountOverflow: a pair table cell counts more than MaxUint32 contexts.
	ErrCountOverflow = errors.New("graphidx: pair count overflows uint32")
	// ErrDuplicateEntity: a context from a foreign ContextReader observes one
	// entity twice (the readers of graphidx/corpus reject such lines first).
	ErrDuplicateEntity = errors.New("graphidx: entity observed twice in one context")
	// ErrEmptyName: a context from a foreign ContextReader has an empty
	// entity name or value.
	ErrEmptyName = errors.New("graphidx: empty entity name or value")
	// ErrWideContext: under WithPolicy(Strict), a context from a reader
	// that does not apply WithMaxContextEntities itself has more entities
	// than the limit. (The readers of graphidx/corpus report a
	// too-many-entities LineError naming file and line instead.)
	ErrWideContext = errors.New("graphidx: context has more entities than the limit")
	// ErrNoContexts: Build read no valid context (an empty corpus, or one
	// whose every line was skipped); the output file is left untouched, so
	// a good index is never replaced by an empty one.
	ErrNoContexts = errors.New("graphidx: no valid context in the corpus")
	// ErrTooFewValid: Build's reader accepted fewer records than
	// WithMinValidShare requires; the output file is left untouched.
	ErrTooFewValid = errors.New("graphidx: too few valid records in the corpus")
)

// contextPlace names a context in an error: "file:line: context \"id\"" when
// the reader tells its position, else "context \"id\"".
func contextPlace(r ContextReader, id string) string {
	q := "context " + EscapeControl(strconv.Quote(id))
	if p, ok := r.(Positioner); ok {
		if f, l := p.Position(); l > 0 {
			return fmt.Sprintf("%s:%d: %s", EscapeControl(f), l, q)
		}
	}
	return q
}

// Build reads every context of r, counts co-occurrences and writes the
// locality index to out with WriteFile. It is Compile followed by WriteFile;
// see Compile for the counting, the memory budget and pruning. The write
// streams the pairs (see WriteFile) with WithWriteMemory set to a quarter of
// the budget, so its memory does not grow with the number of pairs; a
// WithWriteMemory passed through WithWriteOptions overrides that. The summary
// includes the reader's line accounting when r implements StatsReader.
// Build stops early, removing its temporary files, when ctx is cancelled.
func Build(ctx context.Context, r ContextReader, out string, opts ...BuildOption) (BuildSummary, error) {
	start := time.Now()
	cfg := newBuildConfig(opts)
	cfg.guard = true
	if err := cfg.checkWrite(); err != nil {
		return BuildSummary{}, err
	}
	if err := CheckOutput(out); err != nil {
		return BuildSummary{}, err
	}
	c, sum, err := compileWith(ctx, r, cfg, start)
	if err != nil {
		return sum, err
	}
	defer c.Close()
	if err := ctx.Err(); err != nil {
		return sum, err
	}
	cfg.emit(ProgressEvent{Phase: PhaseWrite, Contexts: sum.Contexts, Entities: sum.Entities,
		SpillRuns: sum.SpillRuns, Pairs: sum.Pairs.After, BytesRead: -1, Elapsed: time.Since(start)})
	// The write phase streams the pairs; its adjacency buckets get a
	// quarter of the budget (an option given by the caller comes later and
	// wins).
	wopts := append([]WriteOption{WithWriteMemory(max(cfg.memBudget/4, 1))}, cfg.writeOpts...)
	if err := WriteFile(out, cancelSource{ctx, c}, wopts...); err != nil {
		if cerr := ctx.Err(); cerr != nil && errors.Is(err, cerr) {
			return sum, cerr
		}
		return sum, err
	}
	if err := ctx.Err(); err != nil {
		// Cancelled after the rename: the new index is complete and valid;
		// report the cancellation all the same.
		return sum, err
	}
	if fi, err := os.Stat(out); err == nil {
		sum.BytesWritten = fi.Size()
	}
	sum.Elapsed = time.Since(start)
	cfg.emit(ProgressEvent{Phase: PhaseDone, Contexts: sum.Contexts, Entities: sum.Entities,
		SpillRuns: sum.SpillRuns, Pairs: sum.Pairs.After, BytesRead: -1, Elapsed: sum.Elapsed})
	return sum, nil
}

// cancelSource passes a Source to WriteFile and stops its pair stream when
// ctx is done (polled every 4096 pairs), so an interrupt during the write
// phase aborts the write: WriteFile removes its temporary file and leaves
// the output untouched.
type cancelSource struct {
	ctx context.Context
	Source
}

func (s cancelSource) Pairs(fn func(PairRecord) error) error {
	if err := s.ctx.Err(); err != nil {
		return err
	}
	n := 0
	return s.Source.Pairs(func(p PairRecord) error {
		if n++; n&4095 == 0 {
			if err := s.ctx.Err(); err != nil {
				return err
			}
		}
		return fn(p)
	})
}

// checkValid applies Build's guards against replacing an index with the
// result of a bad corpus: no context at all (ErrNoContexts), or a reader
// that accepted less than the minimum share of its records (ErrTooFewValid).
func (cfg *buildConfig) checkValid(sum *BuildSummary) error {
	st := sum.Read
	if sum.Contexts == 0 {
		detail := "the corpus is empty"
		if st.Records > 0 {
			detail = fmt.Sprintf("%d records, none valid; %s", st.Records, firstBad(st))
		} else if sum.WideContexts > 0 {
			detail = fmt.Sprintf("%d contexts over the entity limit were skipped", sum.WideContexts)
		}
		return fmt.Errorf("%w (%s); the output was not written", ErrNoContexts, detail)
	}
	if st.Records > 0 && cfg.minValid > 0 {
		valid := st.OK + st.Empty
		if share := float64(valid) / float64(st.Records); share < cfg.minValid {
			return fmt.Errorf("%w: %d of %d records valid (%.1f%%, minimum %.1f%%); %s; the output was not written",
				ErrTooFewValid, valid, st.Records, 100*share, 100*cfg.minValid, firstBad(st))
		}
	}
	return nil
}

// firstBad describes the most frequent skip reason and its first example.
func firstBad(st ReadStats) string {
	best, bn := "", int64(0)
	for r, n := range st.Skipped {
		if n > bn || (n == bn && r < best) {
			best, bn = r, n
		}
	}
	if best == "" {
		return "nothing was skipped"
	}
	msg := fmt.Sprintf("most skipped: %s ×%d", best, bn)
	if e := st.FirstBad[best]; e != nil {
		msg += ", first at " + e.Error()
	}
	return msg
}

// Compiled is the counted, merged and pruned content of a corpus: a Source
// for WriteFile. Its pair tables live in memory or, after spilling, in a temp
// file; Close releases them. Pairs may be called any number of times.
type Compiled struct {
	contexts uint64
	ents     []EntityRecord
	k        []uint8
	store    *pairStore
	filter   *PruneFilter
	dir      string
}

// Contexts is the number of contexts counted.
func (c *Compiled) Contexts() uint64 { return c.contexts }

// Entities lists the entities in ascending name order.
func (c *Compiled) Entities() []EntityRecord { return c.ents }

// Pairs calls fn with every kept pair in ascending (A, B) order.
func (c *Compiled) Pairs(fn func(PairRecord) error) error {
	if c.store == nil {
		return errors.New("graphidx: Compiled is closed")
	}
	return c.store.each(c.k, func(a, b uint32, counts []uint32) error {
		if !c.filter.Keep(a, b, sumCounts(counts)) {
			return nil
		}
		return fn(PairRecord{A: a, B: b, Counts: counts})
	})
}

// Close removes the temporary files.
func (c *Compiled) Close() error {
	var err error
	if c.store != nil {
		err = c.store.close()
		c.store = nil
	}
	if c.dir != "" {
		err = errors.Join(err, os.RemoveAll(c.dir))
		c.dir = ""
	}
	return err
}

// Compile counts the contexts of r and returns the compiled, pruned index
// content without writing it.
//
// Counting. Entities get provisional ids in first-seen order and values
// provisional indices; every context adds 1 to its entities' marginals and,
// for each unordered pair of its n observations, to one cell of the pair's
// K×K table: n(n−1)/2 increments per context. One goroutine reads and
// interns; WithWorkers(n) goroutines count pairs into private open-addressing
// tables keyed by a packed uint64 (see cellKey). Work is O(Σ n²) plus the
// sort of the distinct cells, O(C log C).
//
// Memory. The dictionary and the tables share the WithMemBudget budget. When
// a worker's table cannot grow within its share it is sorted in name order
// and spilled to the temp dir as a run of 12-byte records, then reused. At
// the end the remaining tables become in-memory runs, and all runs are
// k-way merged (container/heap), summing equal cells: counts are sums, so
// the result does not depend on how contexts were split between workers and
// runs, and a spilled build equals an in-memory one exactly.
//
// Output. Entity ids ascend with the name and values ascend in byte order,
// so the result is deterministic. More than MaxValues values for one entity
// (ErrTooManyValues) or a cell above MaxUint32 (ErrCountOverflow) is an
// error. Pruning (WithMinSupport, WithMaxNeighbors) is applied last and
// reported in the summary; entities are never pruned.
func Compile(ctx context.Context, r ContextReader, opts ...BuildOption) (*Compiled, BuildSummary, error) {
	return compileWith(ctx, r, newBuildConfig(opts), time.Now())
}

func newBuildConfig(opts []BuildOption) buildConfig {
	cfg := buildConfig{workers: min(runtime.GOMAXPROCS(0), MaxWorkers), memBudget: DefaultMemBudget, minSupport: 1,
		progressTick: 200 * time.Millisecond, fanIn: 256, maxCtxEnts: DefaultMaxContextEntities,
		minValid: DefaultMinValidShare}
	for _, o := range opts {
		if o != nil {
			o.applyBuild(&cfg)
		}
	}
	cfg.checkWorkers()
	return cfg
}

func (cfg *buildConfig) emit(ev ProgressEvent) {
	if cfg.progress != nil {
		cfg.progress(ev)
	}
}

// buildDict interns names for the reading goroutine. Only that goroutine
// writes; workers read the name list (under mu) to rank entities when they
// spill.
type buildDict struct {
	mu     sync.RWMutex
	ids    map[string]entSlot
	names  []string
	vals   [][]string // per provisional entity, first-seen order, canonical strings
	marg   [][]uint64 // summed from the workers by finish
	gvals  map[string]uint32
	gnames []string
	bytes  atomic.Int64

	rankMu     sync.Mutex
	rankN      int
	rank, ordr []uint32
}

// entSlot is the map value of an entity: its id and the global ids of its
// first values inline, so that the common lookup touches one map entry and
// the small, cache-resident value map only.
type entSlot struct {
	id uint32
	nv uint8
	gv [inlineValues]uint16 // global value ids; noInline when ≥ 0xffff
}

const (
	inlineValues   = 5
	noInline       = 0xffff
	dictEntryBytes = 256 // map entry, names, values, workers' marginals per entity (estimate)
)

// observe interns one observation and returns its item entity<<6 | value.
func (d *buildDict) observe(ent, val string) (uint32, error) {
	slot, ok := d.ids[ent]
	if !ok {
		if len(d.names) >= maxEntities {
			return 0, ErrTooManyEntities
		}
		slot = entSlot{id: uint32(len(d.names))}
		name := strings.Clone(ent) // the reader's string may be a transient view
		d.mu.Lock()
		d.ids[name] = slot
		d.names = append(d.names, name)
		d.mu.Unlock()
		d.vals = append(d.vals, nil)
		d.bytes.Add(int64(len(name)) + dictEntryBytes)
	}
	n := int(slot.nv)
	// Fast path: compare with the entity's first values (canonical strings
	// in the small, cache-resident global list), no hashing.
	for i := range min(n, inlineValues) {
		if g := slot.gv[i]; g != noInline && d.gnames[g] == val {
			return slot.id<<6 | uint32(i), nil
		}
	}
	g, ok := d.gvals[val]
	if !ok {
		c := strings.Clone(val)
		g = uint32(len(d.gnames))
		d.gvals[c] = g
		d.gnames = append(d.gnames, c)
		d.bytes.Add(int64(len(c)) + 64)
	}
	vs := d.vals[slot.id]
	if n > inlineValues || g >= noInline {
		for i, s := range vs {
			if s == val {
				return slot.id<<6 | uint32(i), nil
			}
		}
	}
	if n >= MaxValues {
		return 0, ErrTooManyValues
	}
	d.vals[slot.id] = append(vs, d.gnames[g])
	if n < inlineValues {
		slot.gv[n] = uint16(min(g, noInline))
	}
	slot.nv++
	// Assign with the stored (cloned) name: a map assignment may replace the
	// key with the one given, which could be a transient view.
	d.ids[d.names[slot.id]] = slot
	d.bytes.Add(24)
	return slot.id<<6 | uint32(n), nil
}

func (d *buildDict) name(e uint32) string {
	d.mu.RLock()
	defer d.mu.RUnlock()
	return d.names[e]
}

// ranks returns rank[prov] (position in name order) and its inverse for
// every entity interned so far. Cached until a new entity appears.
// O(E log E).
func (d *buildDict) ranks() (rank, order []uint32) {
	d.rankMu.Lock()
	defer d.rankMu.Unlock()
	d.mu.RLock()
	names := d.names
	d.mu.RUnlock()
	if len(names) == d.rankN && d.rank != nil {
		return d.rank, d.ordr
	}
	order = make([]uint32, len(names))
	for i := range order {
		order[i] = uint32(i)
	}
	slices.SortFunc(order, func(a, b uint32) int { return strings.Compare(names[a], names[b]) })
	rank = make([]uint32, len(names))
	for r, p := range order {
		rank[p] = uint32(r)
	}
	d.rankN, d.rank, d.ordr = len(names), rank, order
	return rank, order
}

// ctxBatch carries interned contexts from the reader to the workers.
type ctxBatch struct {
	refs  atomic.Int32 // workers still reading the batch
	first uint64       // ordinal of the first context (1-based)
	ids   []string     // context ids, only when the reader's strings persist
	off   []int32
	items []uint32 // entity<<6 | value
}

const (
	batchContexts = 1024
	batchItems    = 1 << 15
	// keyChunk is the most pair keys a worker collects before counting
	// them (32 KiB), whatever the width of the context.
	keyChunk = 4096
	// cancelPollKeys is how many keys a worker counts between two polls
	// of the build's context inside one context (under a millisecond of work;
	// under the race detector, with other tests beside it, 2^20 keys took
	// seconds).
	cancelPollKeys = 1 << 16
)

// buildRun is the shared state of one compile.
type buildRun struct {
	cfg    buildConfig
	dict   *buildDict
	dir    string
	dirMu  sync.Mutex
	runsMu sync.Mutex
	runs   []runFile
	spillB int64
	merges int
	start  time.Time
}

func (b *buildRun) tempDir() (string, error) {
	b.dirMu.Lock()
	defer b.dirMu.Unlock()
	if b.dir == "" {
		d, err := fileio.MakeSpillDir(b.cfg.tempDir, fileio.BuildDirPrefix)
		if err != nil {
			return "", fmt.Errorf("graphidx: temp dir: %w", err)
		}
		b.dir = d
	}
	return b.dir, nil
}

// fixedOverhead is the memory reserved outside the dictionary and tables:
// read buffers, batches in flight, the runtime and the program around it.
const fixedOverhead = 4 << 20

// tableLimit is the most bytes one worker's table may use right now,
// transients included. One eighth of the budget is left to the garbage
// collector's headroom and the runtime.
func (b *buildRun) tableLimit() int64 {
	free := b.cfg.memBudget - b.cfg.memBudget/8 - fixedOverhead - b.dict.bytes.Load()
	return max(free/int64(b.cfg.workers), minTableBytes)
}

// canGrow reports whether a table of the given bytes may double: growing
// holds the old and the new table (3×), and the doubled table later needs
// its sort buffer at a spill (2× + 0.75·2× = 3.5×).
func (b *buildRun) canGrow(bytes int64) bool { return 7*bytes <= 2*b.tableLimit() }

// spill writes a drained table as a run.
func (b *buildRun) spill(t *pairTab) error {
	rank, order := b.dict.ranks()
	cells := t.drain(rank)
	dir, err := b.tempDir()
	if err != nil {
		return err
	}
	b.runsMu.Lock()
	path := filepath.Join(dir, fmt.Sprintf("run-%06d", len(b.runs)))
	b.runs = append(b.runs, runFile{path: path, cells: int64(len(cells))})
	b.runsMu.Unlock()
	n, err := writeRun(path, cells, order)
	if err != nil {
		return err
	}
	b.runsMu.Lock()
	b.spillB += n
	b.runsMu.Unlock()
	t.reset()
	return nil
}

func (b *buildRun) numRuns() int {
	b.runsMu.Lock()
	defer b.runsMu.Unlock()
	return len(b.runs)
}

// entityShard is the worker that owns entity e: it counts e's marginals and
// every pair (e, f) with e < f (provisional ids). Lemire's multiply-shift
// range reduction of a Fibonacci hash, instead of a division.
func entityShard(e uint32, workers uint32) uint32 {
	return uint32(uint64(e*0x9E3779B1) * uint64(workers) >> 32)
}

// worker counts the marginals and pairs of its shard in every batch: all
// workers see all contexts, each counts the pairs whose lower entity it
// owns, so the tables hold disjoint keys (each cell once overall) and a
// worker skips the other workers' rows without generating them.
func (b *buildRun) worker(ctx context.Context, me int, in <-chan *ctxBatch, free chan<- *ctxBatch) (t *pairTab, marg [][]uint64, err error) {
	nw := uint32(b.cfg.workers)
	self := uint32(me)
	// Start large enough to skip the early doublings, within the budget.
	slots := 1 << 12
	for slots < 1<<18 && b.canGrow(int64(slots)*cellBytes) {
		slots *= 2
	}
	t = newPairTab(slots)
	var scratch []uint32
	keys := make([]uint64, 0, keyChunk)
	streamed := 0 // keys counted since the last cancellation poll
	for batch := range in {
		if ctx.Err() != nil {
			continue // drain
		}
		for c := 0; c+1 < len(batch.off); c++ {
			items := batch.items[batch.off[c]:batch.off[c+1]]
			for _, x := range items {
				if e := x >> 6; nw == 1 || entityShard(e, nw) == self {
					for int(e) >= len(marg) {
						marg = append(marg, nil)
					}
					for int(x&63) >= len(marg[e]) {
						marg[e] = append(marg[e], 0)
					}
					marg[e][x&63]++
				}
			}
			scratch = append(scratch[:0], items...)
			if len(scratch) < 2 {
				continue
			}
			if len(scratch) <= 16 {
				for i := 1; i < len(scratch); i++ {
					for j := i; j > 0 && scratch[j] < scratch[j-1]; j-- {
						scratch[j], scratch[j-1] = scratch[j-1], scratch[j]
					}
				}
			} else {
				slices.Sort(scratch)
			}
			for i := 1; i < len(scratch); i++ {
				if scratch[i]>>6 == scratch[i-1]>>6 {
					id := "#" + strconv.FormatUint(batch.first+uint64(c), 10)
					if c < len(batch.ids) {
						id = strconv.Quote(batch.ids[c])
					}
					return t, marg, fmt.Errorf("%w: context %s: entity %s", ErrDuplicateEntity,
						id, strconv.Quote(b.dict.name(scratch[i]>>6)))
				}
			}
			// Stream the pairs in chunks of keyChunk keys: a wide context
			// (n entities, n(n−1)/2 pairs) then spills mid-context within
			// the budget instead of collecting all its keys first, and
			// cancellation is polled every cancelPollKeys keys.
			for i, x := range scratch {
				if nw > 1 && entityShard(x>>6, nw) != self {
					continue
				}
				hi := uint64(x>>6)<<38 | uint64(x&63)<<6
				rest := scratch[i+1:]
				for len(rest) > 0 {
					m := min(len(rest), keyChunk-len(keys))
					for _, y := range rest[:m] {
						keys = append(keys, hi|uint64(y>>6)<<12|uint64(y&63))
					}
					rest = rest[m:]
					if len(keys) < keyChunk {
						break
					}
					if err := b.addKeys(t, keys); err != nil {
						return t, marg, err
					}
					keys = keys[:0]
					if streamed += keyChunk; streamed >= cancelPollKeys {
						streamed = 0
						if err := ctx.Err(); err != nil {
							return t, marg, err
						}
					}
				}
			}
			if len(keys) >= 256 {
				if err := b.addKeys(t, keys); err != nil {
					return t, marg, err
				}
				keys = keys[:0]
			}
		}
		if err := b.addKeys(t, keys); err != nil {
			return t, marg, err
		}
		keys = keys[:0]
		if batch.refs.Add(-1) == 0 {
			select {
			case free <- batch:
			default:
			}
		}
	}
	if err := ctx.Err(); err != nil {
		return t, marg, err
	}
	// The input is closed, so every entity is interned and the ranks are
	// final: sort the table here, in parallel with the other workers.
	if t.used > 0 {
		rank, _ := b.dict.ranks()
		t.sorted = t.drain(rank)
		if len(t.sorted) > 0 && &t.sorted[0] != &t.slots[0] {
			t.slots = nil // the sorted copy is all that is needed now
		} else {
			t.buf = nil
		}
	}
	return t, marg, nil
}

// addKeys counts keys into t. It first touches the slot of every key: the
// loads are independent, so the processor overlaps their cache misses, and
// the dependent probing loop that follows mostly hits the cache (a software
// prefetch; about 2× faster on tables far larger than the cache).
func (b *buildRun) addKeys(t *pairTab, keys []uint64) error {
	var sink uint64
	for _, k := range keys {
		sink += t.slots[(k*0x9E3779B97F4A7C15)>>t.shift].key
	}
	t.sink += sink
	for _, k := range keys {
		if t.used >= t.limit {
			if err := b.makeRoom(t); err != nil {
				return err
			}
		}
		if !t.add(k) {
			a, bb, _, _ := splitKey(k)
			return fmt.Errorf("%w: pair %s, %s", ErrCountOverflow, strconv.Quote(b.dict.name(a)), strconv.Quote(b.dict.name(bb)))
		}
	}
	return nil
}

// makeRoom grows the table if the budget allows, else spills it.
func (b *buildRun) makeRoom(t *pairTab) error {
	// Growing holds the old and the new table at once: 3× the current size.
	if b.canGrow(t.bytes()) {
		t.grow()
		return nil
	}
	return b.spill(t)
}

func compileWith(ctx context.Context, r ContextReader, cfg buildConfig, start time.Time) (_ *Compiled, sum BuildSummary, err error) {
	if cfg.err != nil {
		return nil, sum, cfg.err
	}
	sum.Workers, sum.MemBudget = cfg.workers, cfg.memBudget
	b := &buildRun{cfg: cfg, start: start, dict: &buildDict{ids: map[string]entSlot{}, gvals: map[string]uint32{}}}
	defer func() {
		if err != nil && b.dir != "" {
			os.RemoveAll(b.dir)
		}
		sum.Elapsed = time.Since(start)
	}()

	wctx, cancel := context.WithCancelCause(ctx)
	defer cancel(nil)
	in := make([]chan *ctxBatch, cfg.workers)
	for w := range in {
		in[w] = make(chan *ctxBatch, 4)
	}
	free := make(chan *ctxBatch, 3*cfg.workers+1)
	tables := make([]*pairTab, cfg.workers)
	margs := make([][][]uint64, cfg.workers)
	var wg sync.WaitGroup
	for w := range cfg.workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			t, marg, err := b.worker(wctx, w, in[w], free)
			tables[w], margs[w] = t, marg
			if err != nil {
				cancel(err)
			}
		}()
	}
	rerr := b.read(wctx, r, in, free, &sum)
	for _, c := range in {
		close(c)
	}
	wg.Wait()
	if rerr == nil {
		rerr = context.Cause(wctx)
		if rerr == nil {
			rerr = ctx.Err()
		}
	} else if c := context.Cause(wctx); c != nil && !errors.Is(c, context.Canceled) {
		rerr = c // a worker's error explains the cancellation
	}
	if sr, ok := r.(StatsReader); ok {
		sum.Read = sr.Stats()
	}
	if rerr == nil && cfg.guard {
		rerr = cfg.checkValid(&sum)
	}
	if rerr != nil {
		return nil, sum, rerr
	}

	// Marginals: each worker counted the entities of its shard.
	d := b.dict
	d.marg = make([][]uint64, len(d.names))
	for e := range d.marg {
		d.marg[e] = make([]uint64, len(d.vals[e]))
	}
	for _, m := range margs {
		for e, vs := range m {
			for v, n := range vs {
				d.marg[e][v] += n
			}
		}
	}
	comp, err := b.finish(ctx, tables, &sum)
	if err != nil {
		return nil, sum, err
	}
	return comp, sum, nil
}

// read is the producer: it reads contexts, interns them, counts marginals
// and sends batches to the workers.
func (b *buildRun) read(ctx context.Context, r ContextReader, in []chan *ctxBatch, free chan *ctxBatch, sum *BuildSummary) error {
	d := b.dict
	br, _ := r.(interface{ BytesRead() int64 })
	// A reader that can hand out views into its line buffer (the JSONL
	// reader) does so: every string kept below is cloned, so it can skip
	// its interning.
	transient := false
	if t, ok := r.(TransientReader); ok {
		t.SetTransient(true)
		defer t.SetTransient(false)
		transient = true
	}
	newBatch := func() *ctxBatch {
		select {
		case x := <-free:
			x.ids, x.off, x.items = x.ids[:0], x.off[:1], x.items[:0]
			x.first = sum.Contexts + 1
			return x
		default:
			return &ctxBatch{off: []int32{0}, first: sum.Contexts + 1}
		}
	}
	batch := newBatch()
	send := func() error {
		batch.refs.Store(int32(len(in)))
		for _, c := range in {
			select {
			case c <- batch:
			case <-ctx.Done():
				return context.Cause(ctx)
			}
		}
		batch = newBatch()
		return nil
	}
	lastTick := time.Now()
	progress := func(phase string) {
		ev := ProgressEvent{Phase: phase, Contexts: sum.Contexts, BytesRead: -1, Entities: len(d.names),
			SpillRuns: b.numRuns(), Elapsed: time.Since(b.start)}
		if br != nil {
			ev.BytesRead = br.BytesRead()
		}
		b.cfg.emit(ev)
	}
	progress(PhaseRead)
	for {
		c, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return err
		}
		if m := b.cfg.maxCtxEnts; m > 0 && len(c.Obs) > m {
			place := contextPlace(r, c.ID)
			if b.cfg.strict {
				return fmt.Errorf("%w: %s has %d entities (limit %d)", ErrWideContext, place, len(c.Obs), m)
			}
			if sum.WideContexts == 0 {
				sum.FirstWide = fmt.Sprintf("%s, %d entities (limit %d)", place, len(c.Obs), m)
			}
			sum.WideContexts++
			continue
		}
		if len(batch.items)+len(c.Obs) > batchItems && len(batch.off) > 1 {
			if err := send(); err != nil {
				return err
			}
		}
		if len(c.Obs) > math.MaxInt32-len(batch.items) {
			return fmt.Errorf("graphidx: %s has too many observations", contextPlace(r, c.ID))
		}
		for _, o := range c.Obs {
			if o.Entity == "" || o.Value == "" {
				return fmt.Errorf("%w: %s", ErrEmptyName, contextPlace(r, c.ID))
			}
			item, err := d.observe(o.Entity, o.Value)
			if err != nil {
				if errors.Is(err, ErrTooManyValues) {
					slot := d.ids[o.Entity]
					return fmt.Errorf("%w: %s: entity %s, value %s (it already has %s)", ErrTooManyValues,
						contextPlace(r, c.ID), EscapeControl(strconv.Quote(o.Entity)), EscapeControl(strconv.Quote(o.Value)),
						EscapeControl(strings.Join(d.vals[slot.id], ",")))
				}
				return err
			}
			batch.items = append(batch.items, item)
		}
		if !transient {
			batch.ids = append(batch.ids, c.ID)
		}
		batch.off = append(batch.off, int32(len(batch.items)))
		sum.Contexts++
		sum.Observations += uint64(len(c.Obs))
		if len(batch.off) > batchContexts {
			if err := send(); err != nil {
				return err
			}
			if b.cfg.progress != nil && time.Since(lastTick) >= b.cfg.progressTick {
				lastTick = time.Now()
				progress(PhaseRead)
			}
		}
	}
	if len(batch.off) > 1 {
		if err := send(); err != nil {
			return err
		}
	}
	progress(PhaseRead)
	return nil
}

// finish merges the tables and runs into the compiled pairs and prunes.
func (b *buildRun) finish(ctx context.Context, tables []*pairTab, sum *BuildSummary) (_ *Compiled, err error) {
	d := b.dict
	rank, order := d.ranks() // final: rank[prov] is the EntityID
	n := len(order)
	// Reading is over: drop the interning maps (a large part of the
	// dictionary) before the entity records and merge buffers are made.
	d.mu.Lock()
	d.ids, d.gvals = nil, nil
	d.mu.Unlock()
	sum.Entities = n
	comp := &Compiled{contexts: sum.Contexts, ents: make([]EntityRecord, n), k: make([]uint8, n)}
	defer func() {
		if err != nil {
			comp.Close()
		}
	}()
	// Values sorted per entity; valFinal[prov][provValue] = final index.
	valFinal := make([][]uint8, n)
	for id, p := range order {
		vs := d.vals[p]
		idx := make([]int, len(vs))
		for i := range idx {
			idx[i] = i
		}
		slices.SortFunc(idx, func(x, y int) int { return strings.Compare(vs[x], vs[y]) })
		rec := EntityRecord{Name: d.names[p], Values: make([]string, len(vs)), Marginal: make([]uint64, len(vs))}
		vf := make([]uint8, len(vs))
		for fi, pi := range idx {
			rec.Values[fi] = vs[pi]
			rec.Marginal[fi] = d.marg[p][pi]
			vf[pi] = uint8(fi)
		}
		comp.ents[id] = rec
		comp.k[id] = uint8(len(vs))
		valFinal[p] = vf
		d.vals[p], d.marg[p] = nil, nil // copied into rec
	}
	b.cfg.emit(ProgressEvent{Phase: PhaseMerge, Contexts: sum.Contexts, Entities: n, SpillRuns: b.numRuns(),
		BytesRead: -1, Elapsed: time.Since(b.start)})

	// Sources: the remaining tables in memory, the runs on disk.
	var srcs []cellSource
	defer func() {
		for _, s := range srcs {
			s.close()
		}
	}()
	for _, t := range tables {
		if t != nil && t.used > 0 {
			if t.sorted == nil {
				t.sorted = t.drain(rank)
			}
			srcs = append(srcs, &memRun{cells: t.sorted})
		}
	}
	runs := b.runs
	sum.SpillRuns, sum.SpillBytes = len(runs), b.spillB
	if len(runs) > 0 {
		// Intermediate merges while there are more runs than the fan-in.
		for len(runs) > 1 && len(runs)+len(srcs) > b.cfg.fanIn {
			k := max(2, min(b.cfg.fanIn, len(runs)))
			merged, err := b.mergeRuns(runs[:k], rank)
			if err != nil {
				return nil, err
			}
			runs = append(runs[k:], merged)
			sum.MergePasses++
			if err := ctx.Err(); err != nil {
				return nil, err
			}
		}
		bufSize := runBufSize(b.cfg.memBudget, len(runs))
		for _, rf := range runs {
			fr, err := openRun(rf, rank, bufSize)
			if err != nil {
				return nil, err
			}
			srcs = append(srcs, fr)
		}
	}
	dir := ""
	if len(b.runs) > 0 {
		dir = b.dir
	}
	comp.store = &pairStore{dir: dir, memLimit: max(b.cfg.memBudget/4, 1<<20)}
	if dir != "" {
		comp.store.memLimit = 0 // spilled: memory is short, stream to disk
	} else {
		// Nothing spilled: keep the compiled pairs in memory unless huge.
		comp.store.dir = b.cfg.tempDir
	}
	m, err := newCellMerger(srcs)
	if err != nil {
		return nil, err
	}
	srcs = nil
	defer m.close()

	var (
		curAB = uint64(math.MaxUint64)
		acc   []uint64
		cnt   []uint32
		seen  uint64
	)
	flush := func() error {
		if curAB == math.MaxUint64 {
			return nil
		}
		a, bb := uint32(curAB>>26), uint32(curAB)&keyEntMask
		cnt = slices.Grow(cnt[:0], len(acc))[:len(acc)]
		for i, x := range acc {
			if x > math.MaxUint32 {
				return fmt.Errorf("%w: pair %s, %s", ErrCountOverflow, strconv.Quote(comp.ents[a].Name), strconv.Quote(comp.ents[bb].Name))
			}
			cnt[i] = uint32(x)
		}
		return comp.store.put(a, bb, cnt)
	}
	err = m.each(func(key uint64, c uint64) error {
		a, bb, u, v := splitKey(key)
		if int(a) >= n || int(bb) >= n || a >= bb {
			return fmt.Errorf("graphidx: internal error: bad merged key %#x", key)
		}
		ab := key >> 12
		if ab != curAB {
			if err := flush(); err != nil {
				return err
			}
			curAB = ab
			kb := int(comp.k[bb])
			acc = slices.Grow(acc[:0], int(comp.k[a])*kb)[:int(comp.k[a])*kb]
			clear(acc)
			seen++
			if seen&0xffff == 0 {
				if err := ctx.Err(); err != nil {
					return err
				}
			}
		}
		fu, fv := valFinal[order[a]], valFinal[order[bb]]
		if int(u) >= len(fu) || int(v) >= len(fv) {
			return fmt.Errorf("graphidx: internal error: bad merged value in key %#x", key)
		}
		acc[int(fu[u])*int(comp.k[bb])+int(fv[v])] += c
		return nil
	})
	if err == nil {
		err = flush()
	}
	if err == nil {
		err = comp.store.seal()
	}
	if err != nil {
		return nil, err
	}
	// Release the tables before pruning.
	for i := range tables {
		tables[i] = nil
	}
	if b.dir != "" {
		comp.dir = b.dir
		b.dir = ""
		// Runs are merged; only the pair store may still live there.
		for _, rf := range b.runs {
			os.Remove(rf.path)
		}
	}

	b.cfg.emit(ProgressEvent{Phase: PhasePrune, Contexts: sum.Contexts, Entities: n, SpillRuns: sum.SpillRuns,
		Pairs: comp.store.n, BytesRead: -1, Elapsed: time.Since(b.start)})
	f, st, err := planPrune(n, b.cfg.minSupport, b.cfg.maxNeighbors, func(fn func(a, b uint32, sup uint64) error) error {
		return comp.store.each(comp.k, func(a, bb uint32, counts []uint32) error {
			return fn(a, bb, sumCounts(counts))
		})
	})
	if err != nil {
		return nil, err
	}
	comp.filter = f
	sum.Pairs = st
	return comp, nil
}

// runBufSize is the read buffer per run in a merge of k runs: at most 256
// KiB, at least 4 KiB, and together at most a quarter of the budget (the
// in-memory tables still hold their share during the final merge).
func runBufSize(budget int64, k int) int {
	if k == 0 {
		return 4 << 10
	}
	return int(min(256<<10, max(4<<10, budget/int64(4*k))))
}

// mergeRuns merges runs into one final-keyed run file.
func (b *buildRun) mergeRuns(runs []runFile, final []uint32) (runFile, error) {
	bufSize := runBufSize(b.cfg.memBudget, len(runs))
	var srcs []cellSource
	for _, rf := range runs {
		fr, err := openRun(rf, final, bufSize)
		if err != nil {
			for _, s := range srcs {
				s.close()
			}
			return runFile{}, err
		}
		srcs = append(srcs, fr)
	}
	m, err := newCellMerger(srcs)
	if err != nil {
		m.close()
		return runFile{}, err
	}
	defer m.close()
	b.merges++
	path := filepath.Join(b.dir, fmt.Sprintf("merged-%06d", b.merges))
	out := runFile{path: path, final: true}
	f, err := os.Create(path)
	if err != nil {
		return runFile{}, err
	}
	w := bufio.NewWriterSize(f, 256<<10)
	var rec [12]byte
	err = m.each(func(key uint64, c uint64) error {
		if c > math.MaxUint32 {
			a, bb, _, _ := splitKey(key)
			return fmt.Errorf("%w: pair of entities %d and %d", ErrCountOverflow, a, bb)
		}
		binary.LittleEndian.PutUint64(rec[:8], key)
		binary.LittleEndian.PutUint32(rec[8:], uint32(c))
		_, err := w.Write(rec[:])
		out.cells++
		return err
	})
	if err == nil {
		err = w.Flush()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return runFile{}, err
	}
	for _, rf := range runs {
		os.Remove(rf.path)
	}
	return out, nil
}
