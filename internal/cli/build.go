package cli

import (
	"errors"
	"fmt"
	"io"
	"os"
	"runtime/debug"
	"strconv"
	"strings"
	"time"
	"unicode"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
	"github.com/mattn/go-isatty"
	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"
)

func init() { register(newBuildCmd) }

type buildOpts struct {
	corpus, format, lexicon, out, tempDir, memBudget      string
	minSupport                                            uint64
	maxNeighbors, workers, maxContextEntities, rankPrefix int
	minValidShare                                         float64
	strict, quiet                                         bool
	counts                                                buildCountsOpts
	lex                                                   *graphidx.Lexicon // loaded --lexicon of a text corpus
}

// corpusFormatsHelp is the "Corpus formats" section of build's help, from
// the format table (corpus.Formats): each format's name, its help lines
// and, after the last line, its extensions.
func corpusFormatsHelp() string {
	fs := corpus.Formats()
	lines := make([][]string, len(fs))
	width := 0
	for i, f := range fs {
		lines[i] = strings.Split(f.Help, "\n")
		width = max(width, len(lines[i][len(lines[i])-1]))
	}
	var b strings.Builder
	b.WriteString("Corpus formats (--format, or detected from the extension; .gz is decompressed):\n")
	for i, f := range fs {
		for j, l := range lines[i] {
			name := ""
			if j == 0 {
				name = f.Name
			}
			if j == len(lines[i])-1 {
				l = fmt.Sprintf("%-*s   (%s)", width, l, strings.Join(f.Extensions, " "))
			}
			fmt.Fprintf(&b, "  %-6s %s\n", name, l)
		}
	}
	return b.String()
}

func newBuildCmd() *cobra.Command {
	var o buildOpts
	cmd := &cobra.Command{
		Use:   "build (--corpus PATH | --from-counts DIR) --out PATH [flags]",
		Short: "Build a locality index from a corpus of contexts",
		Long: strings.Replace(`build reads a corpus of contexts, counts which entities are observed together
and with which values, and writes the locality index to --out (through a
temporary file that is synced and renamed, so an existing index survives a
failed build).

{{formats}}
Bad lines. By default a bad line is skipped and counted by reason (bad-json,
missing-id, duplicate-entity, too-many-columns, ...); the counts and the first
example of each are printed at the end. --strict stops at the first bad line
with "file:line: field: reason". Nothing is dropped without being counted.
Names, values and ids with control characters (control-char) or lone UTF-16
surrogate escapes (bad-utf8) are bad lines, and JSONL keys that differ from
"id", "obs" or "ents" only in case are rejected (bad-field).

Guards. A context with more than --max-context-entities entities (its
n(n-1)/2 pairs would dominate the build) is a bad line (too-many-entities).
A build that reads no valid context, or whose valid share of records is
below --min-valid-share, fails with exit status 2 and leaves --out as it was:
a garbage or empty corpus never replaces a good index.

Memory. --mem-budget bounds the builder's dictionary and count tables; when
they fill it, sorted runs are spilled to --temp-dir and merged at the end,
giving the same index as an in-memory build. For csv, half of the budget
groups rows and half counts. The index is then written in two streaming
passes over the merged pairs with a quarter of the budget for its adjacency
buffers (the rest is spooled to a temporary file next to --out, 16 bytes per
edge of disk), so the write phase does not grow with the number of pairs.
What does grow is the dictionary, about 300 bytes per entity. A text
corpus's lexicon is loaded first; its memory (printed, about 90 bytes per
form) is taken out of the budget, and a lexicon larger than the budget is an
error. The Go runtime gets a soft memory limit equal to the budget.

Pruning. --min-support drops pairs seen together in fewer contexts;
--max-neighbors keeps each entity's N best neighbours by support (a pair stays
if either endpoint keeps it). Both are reported in the summary.

Count shards. --counts-out DIR also writes the corpus's unpruned counts as
shards for "hopwise merge", in further passes over the corpus: each pass
counts the cells of a group of shards (about 160 bytes per cell in memory),
and there are as many passes as keep a pass within half of --mem-budget (at
most --shards; raise --shards for corpora with more cells). --from-counts
DIR compiles an index from such shards (or the Beam job's) instead of a
corpus; the shards are mapped, not read into the heap.

Progress goes to stderr: a bar on a terminal, a line every few seconds
otherwise (--quiet silences both). The summary goes to stdout.
Ctrl-C (SIGINT) or SIGTERM stops the build in any phase, removes its
temporary files and leaves --out untouched.
Exit status: 0 on success, 2 for bad input (a bad line with --strict, a bad
CSV header or lexicon, too many values, no or too few valid records), 1 for
other errors.`, "{{formats}}", corpusFormatsHelp(), 1),
		Example: `  hopwise build --corpus greenhouse.jsonl --out greenhouse.idx
  hopwise build --corpus notes.txt --lexicon lexicon.tsv --out notes.idx --min-support 2
  hopwise build --corpus big.csv --out big.idx --mem-budget 256MiB --workers 2 --strict`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			return runBuild(cmd, o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.corpus, "corpus", "", "corpus file (required unless --from-counts)")
	f.StringVar(&o.format, "format", "", "corpus format: "+corpus.FormatNames()+" (default: from the extension)")
	f.StringVar(&o.lexicon, "lexicon", "", "lexicon TSV for text corpora: surface form<TAB>entity id[<TAB>value]")
	f.StringVar(&o.out, "out", "", "index file to write (required)")
	f.Uint64Var(&o.minSupport, "min-support", 1, "drop pairs observed together in fewer than N contexts")
	f.IntVar(&o.maxNeighbors, "max-neighbors", 0, "keep each entity's N best neighbours by support (0: no limit)")
	f.StringVar(&o.memBudget, "mem-budget", "512MiB", "memory budget, e.g. 256MiB, 2GiB, 500MB or bytes")
	workersFlag(f, &o.workers, "counting goroutines")
	f.IntVar(&o.rankPrefix, "rank-prefix", graphidx.DefaultRankPrefix, "neighbours stored per entity in support order (the router's first layers read them)")
	f.StringVar(&o.tempDir, "temp-dir", "", "directory for spilled runs (default: the system temp dir)")
	f.BoolVar(&o.strict, "strict", false, "stop at the first bad line instead of skipping and counting it")
	f.IntVar(&o.maxContextEntities, "max-context-entities", graphidx.DefaultMaxContextEntities,
		"skip (with --strict: reject) contexts with more entities (0: no limit)")
	f.Float64Var(&o.minValidShare, "min-valid-share", graphidx.DefaultMinValidShare,
		"fail, keeping --out, when fewer than this share of records is valid (0: off)")
	f.BoolVar(&o.quiet, "quiet", false, "no progress output")
	addBuildCountsFlags(cmd, &o.counts)
	_ = cmd.MarkFlagRequired("out")
	return cmd
}

func runBuild(cmd *cobra.Command, o buildOpts) error {
	budget, err := parseByteSize(o.memBudget)
	if err != nil {
		return &ExitError{Code: 2, Err: fmt.Errorf("--mem-budget: %w", err)}
	}
	if o.rankPrefix < 1 || o.rankPrefix > graphidx.MaxRankPrefix {
		return &ExitError{Code: 2, Err: fmt.Errorf("--rank-prefix must be in [1, %d], got %d", graphidx.MaxRankPrefix, o.rankPrefix)}
	}
	switch {
	case o.counts.fromCounts != "" && o.corpus != "":
		return &ExitError{Code: 2, Err: errors.New("give either --corpus or --from-counts, not both")}
	case o.counts.fromCounts != "":
		return runBuildFromCounts(cmd, o.counts.fromCounts, o.out, o.minSupport, o.maxNeighbors, graphidx.WithRankPrefix(o.rankPrefix))
	case o.corpus == "":
		return &ExitError{Code: 2, Err: errors.New(`required flag "corpus" not set (or give --from-counts)`)}
	}
	if err := graphidx.CheckOutput(o.out); err != nil {
		return &ExitError{Code: 2, Err: fmt.Errorf("--out: %w", err)}
	}
	workersGiven := o.workers != 0
	if o.workers, err = resolveWorkers(o.workers); err != nil {
		return &ExitError{Code: 2, Err: err}
	}
	if o.workers > graphidx.MaxWorkers {
		return &ExitError{Code: 2, Err: fmt.Errorf("--workers must be at most %d, got %d (every counting goroutine reads every context and holds its own table)", graphidx.MaxWorkers, o.workers)}
	}
	if o.maxNeighbors < 0 {
		return &ExitError{Code: 2, Err: fmt.Errorf("--max-neighbors must not be negative, got %d (0 means no limit)", o.maxNeighbors)}
	}
	if o.maxContextEntities < 0 {
		return &ExitError{Code: 2, Err: fmt.Errorf("--max-context-entities must not be negative, got %d", o.maxContextEntities)}
	}
	if !(o.minValidShare >= 0 && o.minValidShare <= 1) {
		return &ExitError{Code: 2, Err: fmt.Errorf("--min-valid-share must be in [0, 1], got %g", o.minValidShare)}
	}
	format := strings.ToLower(o.format) // --format CSV works too
	if format == "" {
		format = corpus.DetectFormat(o.corpus)
	}
	cf, known := corpus.LookupFormat(format) // unknown: corpus.Open names the error
	readBudget, buildBudget := budget, budget
	if cf.GroupsInMemory {
		readBudget, buildBudget = budget/2, budget/2
	}
	policy := graphidx.Lenient
	if o.strict {
		policy = graphidx.Strict
	}
	// The builder keeps its live data well under the budget; a soft limit of
	// the budget stops the collector from letting garbage grow past it (also
	// while the lexicon loads).
	old := debug.SetMemoryLimit(budget)
	defer debug.SetMemoryLimit(old)
	if known && cf.NeedsLexicon && o.lexicon != "" {
		if o.lex, err = loadBuildLexicon(o.lexicon, budget); err != nil {
			return err
		}
		buildBudget -= o.lex.Stats().MemBytes
	}
	if buildBudget < graphidx.MinMemBudget {
		return &ExitError{Code: 2, Err: fmt.Errorf("--mem-budget %s leaves %d bytes for the builder%s, want at least %d", o.memBudget, buildBudget, budgetShares(cf.GroupsInMemory, o.lex != nil), graphidx.MinMemBudget)}
	}
	if most := graphidx.MaxWorkersFor(buildBudget); o.workers > most {
		if workersGiven {
			return &ExitError{Code: 2, Err: fmt.Errorf("--workers %d does not fit --mem-budget %s: the builder's %d bytes%s hold at most %d counting goroutines (64 KiB of table each, in half the budget)", o.workers, o.memBudget, buildBudget, budgetShares(cf.GroupsInMemory, o.lex != nil), most)}
		}
		o.workers = most
	}
	r, closer, err := corpus.Open(o.corpus, format, o.lexicon, corpus.WithLexicon(o.lex),
		graphidx.WithPolicy(policy), graphidx.WithMemBudget(readBudget), graphidx.WithTempDir(o.tempDir),
		graphidx.WithMaxContextEntities(o.maxContextEntities))
	if err != nil {
		return classifyBuildErr(err)
	}
	defer closer.Close()

	var total int64 = -1
	if fi, err := os.Stat(o.corpus); err == nil && !strings.HasSuffix(strings.ToLower(o.corpus), ".gz") {
		total = fi.Size()
	}
	stderr := cmd.ErrOrStderr()
	progress, done := newBuildProgress(stderr, total, o.quiet)
	sum, err := graphidx.Build(cmd.Context(), r, o.out,
		graphidx.WithMemBudget(buildBudget), graphidx.WithTempDir(o.tempDir), graphidx.WithWorkers(o.workers),
		graphidx.WithMinSupport(o.minSupport), graphidx.WithMaxNeighbors(o.maxNeighbors),
		graphidx.WithProgress(progress), graphidx.WithPolicy(policy), graphidx.WithRankPrefix(o.rankPrefix),
		graphidx.WithMaxContextEntities(o.maxContextEntities), graphidx.WithMinValidShare(o.minValidShare))
	done()
	if err != nil {
		if n := sum.Read.SkippedTotal(); n > 0 && !o.quiet {
			fmt.Fprintf(stderr, "build: %d bad records were skipped before the error\n", n)
		}
		return classifyBuildErr(err)
	}
	out := cmd.OutOrStdout()
	fmt.Fprintf(out, "wrote %s\n", o.out)
	if o.lex != nil {
		printLexiconStats(out, o.lex.Stats(), sum.Read.Unvalued)
	}
	fmt.Fprint(out, sum.String())
	if o.counts.countsOut != "" {
		return buildCountsOut(cmd, o, format, policy, budget, sum.Pairs)
	}
	return nil
}

// buildCountsOut reads the corpus again and writes its counts as shards to
// --counts-out, in as many passes as keep one pass's cells within half the
// memory budget (countsPasses).
func buildCountsOut(cmd *cobra.Command, o buildOpts, format string, policy graphidx.BadLinePolicy, budget int64, pairs graphidx.PruneStats) error {
	passes, cells, err := countsPasses(o.out, pairs.Before, pairs.After, budget, o.counts.shards)
	if err != nil {
		return err
	}
	if cells*partialCellBytes/uint64(passes) > uint64(budget)/2 && !o.quiet {
		fmt.Fprintf(cmd.ErrOrStderr(), "counts: about %d cells; one shard of %d holds more than half of --mem-budget: raise --shards to bound the memory of --counts-out\n",
			cells, o.counts.shards)
	}
	open := func() (graphidx.ContextReader, io.Closer, error) {
		return corpus.Open(o.corpus, format, o.lexicon, corpus.WithLexicon(o.lex), graphidx.WithPolicy(policy),
			graphidx.WithTempDir(o.tempDir), graphidx.WithMaxContextEntities(o.maxContextEntities))
	}
	var progress func(int)
	if passes > 1 && !o.quiet {
		progress = func(g int) {
			fmt.Fprintf(cmd.ErrOrStderr(), "counts: pass %d of %d over the corpus (about %d cells in all)\n", g+1, passes, cells)
		}
	}
	n, err := writeCorpusCounts(cmd.Context(), open, o.counts.countsOut, o.counts.shards, passes, progress)
	if err != nil {
		return err
	}
	fmt.Fprintf(cmd.OutOrStdout(), "counts        %d bytes in %d shards under %s (%d pass(es) over the corpus)\n", n, o.counts.shards, o.counts.countsOut, passes)
	return nil
}

// loadBuildLexicon loads the lexicon of a text corpus and checks that its
// memory leaves room in the budget (the builder gets what is left).
func loadBuildLexicon(path string, budget int64) (*graphidx.Lexicon, error) {
	lex, err := graphidx.LoadLexicon(path)
	if err != nil {
		return nil, classifyBuildErr(err)
	}
	if st := lex.Stats(); st.MemBytes >= budget {
		return nil, &ExitError{Code: 2, Err: fmt.Errorf("lexicon %s holds %d bytes of memory (%d forms), not less than --mem-budget %d bytes: raise --mem-budget or shrink the lexicon",
			path, st.MemBytes, st.Forms, budget)}
	}
	return lex, nil
}

// printLexiconStats prints the lexicon line of the build summary: its size,
// its colliding forms (never silent) and the valued mentions left out.
func printLexiconStats(w io.Writer, st graphidx.LexiconStats, unvalued int64) {
	fmt.Fprintf(w, "lexicon       %d forms (%d with a value), %d entities, %d colliding forms (first listed kept), %d duplicate lines, longest form %d tokens, %d bytes of the memory budget\n",
		st.Forms, st.ValuedForms, st.Entities, st.Collisions, st.Duplicates, st.MaxFormTokens, st.MemBytes)
	if st.FirstCollision != nil {
		fmt.Fprintf(w, "  first collision: %s\n", st.FirstCollision.Error())
	}
	if unvalued > 0 {
		fmt.Fprintf(w, "  %d times a valued entity was named without a value and left out of that paragraph\n", unvalued)
	}
}

// classifyBuildErr maps input errors to exit status 2.
func classifyBuildErr(err error) error {
	var le *graphidx.LineError
	switch {
	case errors.As(err, &le), errors.Is(err, graphidx.ErrTooManyValues), errors.Is(err, corpus.ErrUnknownFormat),
		errors.Is(err, corpus.ErrLexiconRequired), errors.Is(err, graphidx.ErrDuplicateEntity),
		errors.Is(err, graphidx.ErrTooManyEntities), errors.Is(err, graphidx.ErrCountOverflow),
		errors.Is(err, graphidx.ErrNoContexts), errors.Is(err, graphidx.ErrTooFewValid), errors.Is(err, graphidx.ErrWideContext):
		return &ExitError{Code: 2, Err: err}
	}
	return err
}

// newBuildProgress returns the progress callback of a build and a function
// that finishes the display. On a terminal it draws a bar over the input
// bytes (a spinner when the size is unknown); otherwise it prints a line at
// each phase change and every 5 seconds while reading.
func newBuildProgress(w io.Writer, total int64, quiet bool) (func(graphidx.ProgressEvent), func()) {
	if quiet {
		return nil, func() {}
	}
	f, ok := w.(*os.File)
	if ok && (isatty.IsTerminal(f.Fd()) || isatty.IsCygwinTerminal(f.Fd())) {
		bar := progressbar.NewOptions64(total,
			progressbar.OptionSetWriter(w),
			progressbar.OptionSetDescription("reading"),
			progressbar.OptionShowBytes(true),
			progressbar.OptionUseIECUnits(true),
			progressbar.OptionSetPredictTime(true),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionSetWidth(30),
			progressbar.OptionShowDescriptionAtLineEnd(),
			progressbar.OptionClearOnFinish(),
		)
		phase := graphidx.PhaseRead
		return func(ev graphidx.ProgressEvent) {
				if ev.Phase == graphidx.PhaseRead && ev.BytesRead >= 0 {
					_ = bar.Set64(ev.BytesRead)
					bar.Describe(fmt.Sprintf("%s contexts, %d entities, %d runs", humanCount(ev.Contexts), ev.Entities, ev.SpillRuns))
				}
				if ev.Phase != phase {
					phase = ev.Phase
					if total > 0 {
						_ = bar.Set64(total)
					}
					bar.Describe(ev.Phase + "...")
				}
			}, func() {
				_ = bar.Finish()
			}
	}
	var (
		last    time.Time
		phase   string
		pending *graphidx.ProgressEvent // the newest event not printed, of phase
	)
	return func(ev graphidx.ProgressEvent) {
		if ev.Phase == phase && time.Since(last) < 5*time.Second {
			pending = &ev
			return
		}
		if pending != nil && ev.Phase != phase {
			// The phase ends: its last figures (the read totals, say)
			// are shown before the next phase starts.
			fmt.Fprintln(w, progressLine(*pending, total))
		}
		phase, last, pending = ev.Phase, time.Now(), nil
		fmt.Fprintln(w, progressLine(ev, total))
	}, func() {}
}

// progressLine is one line of the plain (not terminal) build progress. The
// first line says that reading started (and the input's size, when known).
// While reading a corpus of known size it gives the share read and, once some bytes are read, the time left to read at the rate so
// far.
func progressLine(ev graphidx.ProgressEvent, total int64) string {
	if ev.Phase == graphidx.PhaseRead && ev.Contexts == 0 && ev.BytesRead <= 0 && ev.Elapsed < time.Second {
		if total > 0 {
			return fmt.Sprintf("build: read  started, %d bytes of input", total)
		}
		return "build: read  started"
	}
	msg := fmt.Sprintf("build: %-5s %s contexts, %d entities, %d spill runs", ev.Phase, humanCount(ev.Contexts), ev.Entities, ev.SpillRuns)
	if ev.Phase == graphidx.PhaseRead && ev.BytesRead >= 0 && total > 0 {
		msg += fmt.Sprintf(", %.0f%% of input", 100*float64(ev.BytesRead)/float64(total))
		if ev.BytesRead > 0 && ev.BytesRead < total && ev.Elapsed > 0 {
			left := time.Duration(float64(ev.Elapsed) * float64(total-ev.BytesRead) / float64(ev.BytesRead))
			msg += fmt.Sprintf(", about %s left to read", left.Round(time.Second))
		}
	}
	if ev.Pairs > 0 {
		msg += fmt.Sprintf(", %d pairs", ev.Pairs)
	}
	return fmt.Sprintf("%s (%s)", msg, ev.Elapsed.Round(100*time.Millisecond))
}

func humanCount(n uint64) string {
	switch {
	case n >= 10_000_000:
		return fmt.Sprintf("%.0fM", float64(n)/1e6)
	case n >= 1_000_000:
		return fmt.Sprintf("%.1fM", float64(n)/1e6)
	case n >= 10_000:
		return fmt.Sprintf("%.0fk", float64(n)/1e3)
	}
	return strconv.FormatUint(n, 10)
}

// parseByteSize parses a size: a number with an optional unit, KiB/MiB/GiB/
// TiB (and K/M/G/T) as powers of 1024, kB/MB/GB/TB as powers of 1000, B or
// nothing for bytes. Case-insensitive; the number may have a fraction.
func parseByteSize(s string) (int64, error) {
	t := strings.TrimSpace(s)
	i := strings.IndexFunc(t, func(r rune) bool { return !unicode.IsDigit(r) && r != '.' })
	num, unit := t, ""
	if i >= 0 {
		num, unit = t[:i], strings.TrimSpace(t[i:])
	}
	v, err := strconv.ParseFloat(num, 64)
	if err != nil || v < 0 {
		return 0, fmt.Errorf("bad size %q (want e.g. 512MiB, 2GiB, 500MB)", s)
	}
	mult := map[string]float64{"": 1, "b": 1,
		"k": 1 << 10, "kib": 1 << 10, "m": 1 << 20, "mib": 1 << 20, "g": 1 << 30, "gib": 1 << 30, "t": 1 << 40, "tib": 1 << 40,
		"kb": 1e3, "mb": 1e6, "gb": 1e9, "tb": 1e12}
	m, ok := mult[strings.ToLower(unit)]
	if !ok {
		return 0, fmt.Errorf("bad size unit %q in %q (want KiB, MiB, GiB, kB, MB, GB)", unit, s)
	}
	b := v * m
	if b < 1 || b > 1<<62 {
		return 0, fmt.Errorf("size %q out of range", s)
	}
	return int64(b), nil
}

// budgetShares says what the build budget is left after: the half a corpus
// reader that groups rows in memory takes, and the lexicon.
func budgetShares(readerHalf, lexicon bool) string {
	switch {
	case readerHalf && lexicon:
		return " (after the corpus reader's half and the lexicon)"
	case readerHalf:
		return " (after the corpus reader's half)"
	case lexicon:
		return " (after the lexicon)"
	}
	return ""
}
