package graphidx

import (
	"errors"
	"fmt"
	"maps"
	"sort"
	"strings"
	"time"
)

// DefaultMemBudget is the memory budget of Build and of the CSV reader when
// none is given: 512 MiB.
const DefaultMemBudget = 512 << 20

// MinMemBudget is the smallest budget Build and Compile accept (a smaller
// WithMemBudget is an ErrBadBuildOption). Below it the fixed costs (read
// buffers, minimum tables) dominate.
const MinMemBudget = 1 << 20

// MaxWorkers is the most counting goroutines Build and Compile accept
// (WithWorkers). Every counting goroutine reads every context (it counts
// the pairs of its own entity shard) and holds a pair table of at least
// minTableBytes, so time and memory grow with the count whatever the
// corpus: 100,000 goroutines took a 100,000-context build from 0.7 s to
// more than ten minutes and 3.8 GB.
const MaxWorkers = 256

// minTableBytes is the smallest pair table a counting goroutine keeps,
// whatever the budget leaves it.
const minTableBytes = 64 << 10

// BuildOption configures Build and Compile.
type BuildOption interface{ applyBuild(*buildConfig) }

// SharedOption configures both a corpus reader (graphidx/corpus) and the
// builder.
type SharedOption interface {
	ReadOption
	BuildOption
}

type buildConfig struct {
	workers      int
	workersSet   bool // WithWorkers was given (else workers is the default)
	memBudget    int64
	tempDir      string
	minSupport   uint64
	maxNeighbors int
	progress     func(ProgressEvent)
	progressTick time.Duration
	writeOpts    []WriteOption
	fanIn        int     // maximum runs merged at once
	maxCtxEnts   int     // contexts with more entities are skipped (0: no limit)
	minValid     float64 // Build: least share of valid records (see WithMinValidShare)
	strict       bool    // WithPolicy(Strict): a too-wide context is an error
	guard        bool    // Build: apply checkValid before writing
	err          error   // the first option outside its domain (checked by check)
}

// ErrBadBuildOption reports a build option outside its domain (a worker
// count < 1, a negative neighbour or context-width limit, a memory budget
// below MinMemBudget, a valid share outside [0, 1]). Build, Compile and the count compilers return it before
// reading anything.
var ErrBadBuildOption = errors.New("graphidx: bad build option")

// fail records the first bad option.
func (c *buildConfig) fail(format string, args ...any) {
	if c.err == nil {
		c.err = fmt.Errorf("%w: %s", ErrBadBuildOption, fmt.Sprintf(format, args...))
	}
}

type buildOptionFunc func(*buildConfig)

func (f buildOptionFunc) applyBuild(c *buildConfig) { f(c) }

// WithWorkers sets the number of counting goroutines (1 to MaxWorkers;
// default GOMAXPROCS, at most MaxWorkers and at most what the memory budget
// holds). A value outside [1, MaxWorkers], or more goroutines than half the
// memory budget holds at minTableBytes each, is an ErrBadBuildOption.
func WithWorkers(n int) BuildOption {
	return buildOptionFunc(func(c *buildConfig) {
		switch {
		case n < 1:
			c.fail("WithWorkers(%d): want at least 1 counting goroutine", n)
			return
		case n > MaxWorkers:
			c.fail("WithWorkers(%d): want at most MaxWorkers = %d (every counting goroutine reads every context and holds a table of at least %d KiB)",
				n, MaxWorkers, minTableBytes>>10)
			return
		}
		c.workers, c.workersSet = n, true
	})
}

// MaxWorkersFor is the most counting goroutines Build and Compile accept
// with a memory budget of budget bytes: at most MaxWorkers, and as many as
// half the budget holds at the smallest table each (64 KiB), at least 1.
// O(1).
func MaxWorkersFor(budget int64) int { return int(min(max(budget/2/minTableBytes, 1), MaxWorkers)) }

// checkWorkers fits the worker count to the budget once every option is
// applied: a default count is lowered, an explicit one is an error.
func (c *buildConfig) checkWorkers() {
	most := MaxWorkersFor(c.memBudget)
	switch {
	case c.workers <= most:
	case c.workersSet:
		c.fail("WithWorkers(%d) with a memory budget of %d bytes: each counting goroutine holds a table of at least %d KiB, so the budget holds at most %d of them in its half",
			c.workers, c.memBudget, minTableBytes>>10, most)
	default:
		c.workers = most
	}
}

// WithMinSupport drops pairs observed together in fewer than n contexts.
// The default 1 keeps every observed pair.
func WithMinSupport(n uint64) BuildOption {
	return buildOptionFunc(func(c *buildConfig) { c.minSupport = max(n, 1) })
}

// WithMaxNeighbors keeps, for every entity, only its n best neighbours: the
// pairs ranked by support (descending), ties broken by the neighbour's
// EntityID (ascending), among the pairs that pass the minimum support. A pair
// is kept when EITHER endpoint ranks the other in its top n, so every entity
// keeps min(n, degree) neighbours and the graph stays symmetric; an entity's
// degree may therefore exceed n when it is in the top n of many others.
// n = 0 (the default) disables the limit; n < 0 is an ErrBadBuildOption.
// Cost: O(entities·n) memory.
func WithMaxNeighbors(n int) BuildOption {
	return buildOptionFunc(func(c *buildConfig) {
		if n < 0 {
			c.fail("WithMaxNeighbors(%d): want ≥ 0 (0 = no limit)", n)
			return
		}
		c.maxNeighbors = n
	})
}

// WithProgress registers a callback for progress events. It is called from
// the building goroutine, at most every 200 ms while reading and once per
// phase change; a slow callback slows the build.
func WithProgress(fn func(ProgressEvent)) BuildOption {
	return buildOptionFunc(func(c *buildConfig) { c.progress = fn })
}

// WithWriteOptions passes options through to WriteFile (Build only).
func WithWriteOptions(opts ...WriteOption) BuildOption {
	return buildOptionFunc(func(c *buildConfig) { c.writeOpts = append(c.writeOpts, opts...) })
}

// checkWrite validates the options Build will pass to WriteFile (the rank
// prefix) before any counting starts, so a bad WithRankPrefix fails at
// once instead of after the corpus was read.
func (c *buildConfig) checkWrite() error {
	wc := writeConfig{rankPrefix: DefaultRankPrefix}
	for _, o := range c.writeOpts {
		if o != nil {
			o.applyWrite(&wc)
		}
	}
	if c.err != nil {
		return c.err
	}
	return checkRankPrefix(wc.rankPrefix)
}

// withFanIn sets the maximum number of runs merged at once (tests).
func withFanIn(n int) BuildOption {
	return buildOptionFunc(func(c *buildConfig) { c.fanIn = max(n, 2) })
}

type memBudgetOption int64

func (o memBudgetOption) applyBuild(c *buildConfig) {
	switch {
	case o < 0 || (o > 0 && o < MinMemBudget):
		c.fail("WithMemBudget(%d): want 0 (DefaultMemBudget) or at least MinMemBudget = %d bytes", int64(o), MinMemBudget)
	case o > 0:
		c.memBudget = int64(o)
	}
}

func (o memBudgetOption) ApplyRead(s *ReadSettings) {
	if o > 0 {
		s.MemBudget = max(int64(o), 64<<10)
	}
}

// WithMemBudget bounds the memory, in bytes, that the builder uses for its
// dictionary and count tables (and that the CSV reader uses to group rows).
// When the tables reach it they are spilled to the temp dir as sorted runs.
// The Go runtime adds its own overhead on top; set a soft memory limit
// (runtime/debug.SetMemoryLimit) to keep the process close to the budget.
// 0 keeps DefaultMemBudget; Build and Compile refuse a negative budget or
// one below MinMemBudget with ErrBadBuildOption (a corpus reader, which
// cannot fail at construction, raises a budget below 64 KiB to 64 KiB).
func WithMemBudget(bytes int64) SharedOption { return memBudgetOption(bytes) }

type tempDirOption string

func (o tempDirOption) applyBuild(c *buildConfig) { c.tempDir = string(o) }
func (o tempDirOption) ApplyRead(s *ReadSettings) { s.TempDir = string(o) }

// DefaultMaxContextEntities is the default limit on the entities of one
// context (WithMaxContextEntities). A context of n entities costs n(n−1)/2
// pair increments and, when its pairs are new, about 12 bytes of index per
// pair. Measured with `hopwise build --max-context-entities 0` on one
// context alone (2 shared cores, user+sys CPU): n = 1024 takes 0.16 s and
// writes a 6.6 MB index, n = 2048 0.8 s and 26 MB, n = 4096 4.5 s and
// 102 MB, n = 8192 17 s and 405 MB. The limit keeps one corpus line under
// a second of CPU and ~26 MB of index, far above realistic documents (tens
// to hundreds of entities); raise it for corpora whose contexts are
// legitimately wider.
const DefaultMaxContextEntities = 2048

type maxCtxEntsOption int

func (o maxCtxEntsOption) applyBuild(c *buildConfig) {
	if o < 0 {
		c.fail("WithMaxContextEntities(%d): want ≥ 0 (0 = no limit)", int(o))
		return
	}
	c.maxCtxEnts = int(o)
}
func (o maxCtxEntsOption) ApplyRead(s *ReadSettings) { s.MaxContextEntities = max(int(o), 0) }

// WithMaxContextEntities bounds the entities of one context. The readers of
// graphidx/corpus reject a wider context as a bad line (reason
// too-many-entities, naming file and line: skipped and counted in lenient
// mode, an error in strict mode) without keeping its observations; the
// builder skips and counts wider contexts from other readers
// (BuildSummary.WideContexts), or fails with ErrWideContext under
// WithPolicy(Strict). n = 0 removes the limit (the builder still streams
// the pairs of a wide context within its memory budget). Default
// DefaultMaxContextEntities. A negative n is an ErrBadBuildOption for Build
// and Compile; a corpus reader, which cannot fail at construction, reads it
// as 0.
func WithMaxContextEntities(n int) SharedOption { return maxCtxEntsOption(n) }

// DefaultMinValidShare is the default least share of valid records a build
// needs (WithMinValidShare).
const DefaultMinValidShare = 0.5

// WithMinValidShare makes Build fail with ErrTooFewValid, leaving its output
// file untouched, when the reader (a StatsReader) accepted fewer than share
// of the records it examined ((OK + Empty) / Records, so text paragraphs
// without a lexicon match are not held against the corpus). A build that
// counts no context at all always fails with ErrNoContexts. share is in
// [0, 1]: 0 disables the share check (not the empty check), and a share
// outside [0, 1] or NaN is an ErrBadBuildOption. Default
// DefaultMinValidShare.
func WithMinValidShare(share float64) BuildOption {
	return buildOptionFunc(func(c *buildConfig) {
		if !(share >= 0 && share <= 1) { // also NaN
			c.fail("WithMinValidShare(%g): want a share in [0, 1]", share)
			return
		}
		c.minValid = share
	})
}

// WithTempDir sets the directory for spilled runs (default os.TempDir()).
// A private subdirectory (hopwise-build-<pid>-* or hopwise-csv-<pid>-*) is
// created in it and removed when done; those left by processes that died
// (a killed build) are removed when the next one is created.
func WithTempDir(dir string) SharedOption { return tempDirOption(dir) }

// Build phases reported in ProgressEvent.Phase.
const (
	PhaseRead  = "read"  // reading the corpus and counting
	PhaseMerge = "merge" // merging counts (and spilled runs)
	PhasePrune = "prune" // applying min-support and max-neighbours
	PhaseWrite = "write" // writing the index file
	PhaseDone  = "done"
)

// ProgressEvent reports the state of a build.
type ProgressEvent struct {
	Phase     string
	Contexts  uint64        // contexts counted so far
	BytesRead int64         // input bytes consumed, -1 if the reader does not tell
	Entities  int           // distinct entities so far
	SpillRuns int           // runs spilled so far
	Pairs     uint64        // pairs compiled (merge phase and later)
	Elapsed   time.Duration // since the build started
}

// PruneStats reports what pruning removed. Before = After + ByMinSupport +
// ByMaxNeighbors.
type PruneStats struct {
	Before         uint64 // distinct pairs observed
	After          uint64 // pairs kept
	ByMinSupport   uint64 // pairs with support below the minimum
	ByMaxNeighbors uint64 // pairs above the minimum but in neither top-n
	MinSupport     uint64
	MaxNeighbors   int
}

// BuildSummary reports a build.
type BuildSummary struct {
	Contexts     uint64
	Observations uint64
	Entities     int
	Pairs        PruneStats
	Read         ReadStats // zero when the reader does not implement StatsReader
	Workers      int
	MemBudget    int64
	SpillRuns    int   // sorted runs written to the temp dir
	SpillBytes   int64 // bytes of those runs
	MergePasses  int   // intermediate merge passes (fan-in limit)
	// WideContexts counts contexts the builder skipped for having more
	// entities than WithMaxContextEntities (only from readers that do not
	// apply the limit themselves; the readers of graphidx/corpus count them
	// in Read.Skipped as too-many-entities). FirstWide names the first.
	WideContexts uint64
	FirstWide    string
	BytesWritten int64 // size of the index file (Build only)
	Elapsed      time.Duration
}

// String renders the summary as a few human-readable lines, including the
// skipped-line counts by reason.
func (s BuildSummary) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "contexts      %d (%d observations)\n", s.Contexts, s.Observations)
	fmt.Fprintf(&b, "entities      %d\n", s.Entities)
	fmt.Fprintf(&b, "pairs         %d kept of %d", s.Pairs.After, s.Pairs.Before)
	if s.Pairs.ByMinSupport > 0 || s.Pairs.MinSupport > 1 {
		fmt.Fprintf(&b, "; %d below min support %d", s.Pairs.ByMinSupport, s.Pairs.MinSupport)
	}
	if s.Pairs.MaxNeighbors > 0 {
		fmt.Fprintf(&b, "; %d outside every top-%d", s.Pairs.ByMaxNeighbors, s.Pairs.MaxNeighbors)
	}
	b.WriteString("\n")
	if s.Read.Records > 0 || s.Read.Lines > 0 {
		fmt.Fprintf(&b, "records       %d read, %d ok, %d skipped", s.Read.Records, s.Read.OK, s.Read.SkippedTotal())
		if s.Read.Empty > 0 {
			fmt.Fprintf(&b, ", %d without entities", s.Read.Empty)
		}
		fmt.Fprintf(&b, " (%d lines)\n", s.Read.Lines)
		reasons := make([]string, 0, len(s.Read.Skipped))
		for r := range maps.Keys(s.Read.Skipped) {
			reasons = append(reasons, r)
		}
		sort.Strings(reasons)
		for _, r := range reasons {
			fmt.Fprintf(&b, "  skipped %-18s %d", r, s.Read.Skipped[r])
			if e := s.Read.FirstBad[r]; e != nil {
				fmt.Fprintf(&b, "  (first: %s)", e.Error())
			}
			b.WriteString("\n")
		}
	}
	if s.WideContexts > 0 {
		fmt.Fprintf(&b, "  skipped %-18s %d  (first: %s)\n", "wide contexts", s.WideContexts, s.FirstWide)
	}
	fmt.Fprintf(&b, "spill         %d runs, %d bytes, %d extra merge passes (budget %s, %d workers)\n",
		s.SpillRuns, s.SpillBytes, s.MergePasses, formatSize(s.MemBudget), s.Workers)
	if s.BytesWritten > 0 {
		fmt.Fprintf(&b, "index         %d bytes\n", s.BytesWritten)
	}
	fmt.Fprintf(&b, "elapsed       %s", s.Elapsed.Round(time.Millisecond))
	if sec := s.Elapsed.Seconds(); sec > 0 {
		fmt.Fprintf(&b, " (%.0f contexts/s)", float64(s.Contexts)/sec)
	}
	b.WriteString("\n")
	return b.String()
}

// formatSize writes a byte count the way a user writes a budget: in the
// largest binary unit (KiB, MiB, GiB, TiB) that divides it, else the largest
// decimal one (kB, MB, GB, TB), else in bytes. So 512 << 20 prints as
// 512MiB and 500e6 as 500MB, as given to --mem-budget.
func formatSize(n int64) string {
	if n > 0 {
		for _, u := range []struct {
			size int64
			name string
		}{{1 << 40, "TiB"}, {1 << 30, "GiB"}, {1 << 20, "MiB"}, {1 << 10, "KiB"}, {1e12, "TB"}, {1e9, "GB"}, {1e6, "MB"}, {1e3, "kB"}} {
			if n%u.size == 0 {
				return fmt.Sprintf("%d%s", n/u.size, u.name)
			}
		}
	}
	return fmt.Sprintf("%d bytes", n)
}
