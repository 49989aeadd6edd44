package corpus

import (
	"io"
	"maps"
	"slices"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// DefaultMaxLineBytes is the default limit on one corpus line (JSONL, CSV
// record) or one text paragraph. Longer input is a graphidx.LineError with reason
// graphidx.ReasonLineTooLong; the reader skips to the next line in constant memory.
const DefaultMaxLineBytes = 16 << 20

// ReadOption configures a reader: graphidx's SharedOptions
// (graphidx.WithPolicy, graphidx.WithMemBudget, graphidx.WithTempDir,
// graphidx.WithMaxContextEntities) and this package's WithMaxLineBytes and
// WithLexicon. It is graphidx.ReadOption, so one list of options can be
// given to a reader and to graphidx.Build.
type ReadOption = graphidx.ReadOption

// config is the reader settings: graphidx's shared ones and this package's.
type config struct {
	graphidx.ReadSettings
	lexicon *graphidx.Lexicon
	maxLine int
}

// option is an option of this package's readers only: it sets config and
// leaves graphidx.ReadSettings alone.
type option func(*config)

func (option) ApplyRead(*graphidx.ReadSettings) {}

func newConfig(opts []ReadOption) config {
	c := config{ReadSettings: graphidx.NewReadSettings(opts...), maxLine: DefaultMaxLineBytes}
	for _, o := range opts {
		if o, ok := o.(option); ok {
			o(&c)
		}
	}
	return c
}

// WithMaxLineBytes sets the longest accepted line or paragraph in bytes.
// Values ≤ 0 keep DefaultMaxLineBytes.
func WithMaxLineBytes(n int) ReadOption {
	return option(func(c *config) {
		if n > 0 {
			c.maxLine = n
		}
	})
}

// WithLexicon gives Open an already loaded lexicon for a text corpus, so a
// caller can load it once, check its memory (Stats) and read the corpus
// several times. It takes precedence over Open's lexicon path.
func WithLexicon(l *graphidx.Lexicon) ReadOption {
	return option(func(c *config) { c.lexicon = l })
}

// withReadMemLimit sets the CSV grouping budget without the lower bound
// (tests force spilling with it).
func withReadMemLimit(n int64) ReadOption {
	return option(func(c *config) { c.MemBudget = n })
}

// badLines implements the policy and the accounting shared by the readers.
type badLines struct {
	policy graphidx.BadLinePolicy
	stats  graphidx.ReadStats
}

func (b *badLines) init(p graphidx.BadLinePolicy) {
	b.policy = p
	b.stats.Skipped = map[string]int64{}
	b.stats.FirstBad = map[string]*graphidx.LineError{}
}

// bad records a rejected record; it returns the error to stop with in strict
// mode and nil in lenient mode.
func (b *badLines) bad(e *graphidx.LineError) error {
	if b.policy == graphidx.Strict {
		return e
	}
	b.stats.Skipped[e.Reason]++
	if _, ok := b.stats.FirstBad[e.Reason]; !ok {
		b.stats.FirstBad[e.Reason] = e
	}
	return nil
}

func (b *badLines) snapshot() graphidx.ReadStats {
	s := b.stats
	s.Skipped = maps.Clone(b.stats.Skipped)
	s.FirstBad = maps.Clone(b.stats.FirstBad)
	return s
}

// Skipped returns the lenient-mode counts of skipped records by reason.
func (b *badLines) Skipped() map[string]int {
	m := make(map[string]int, len(b.stats.Skipped))
	for k, v := range b.stats.Skipped {
		m[k] = int(v)
	}
	return m
}

// dupCheck reports a repeated entity in obs. Up to 32 observations it
// compares cheap fingerprints pairwise (O(n²) integer compares, a string
// compare only on a fingerprint match) and leaves obs in place; longer
// contexts are sorted by entity name (O(n log n)).
func dupCheck(obs []graphidx.Observation) (string, bool) {
	if len(obs) > 32 {
		sortObs(obs)
		for i := 1; i < len(obs); i++ {
			if obs[i].Entity == obs[i-1].Entity {
				return obs[i].Entity, true
			}
		}
		return "", false
	}
	var h [32]uint64
	for i := range obs {
		h[i] = fingerprint(obs[i].Entity)
		for j := range i {
			if h[j] == h[i] && obs[j].Entity == obs[i].Entity {
				return obs[i].Entity, true
			}
		}
	}
	return "", false
}

// fingerprint mixes a name's length with its first and last 8 bytes. Equal
// names have equal fingerprints; different ones rarely do.
func fingerprint(s string) uint64 {
	n := len(s)
	var a, b uint64
	if n >= 8 {
		a = load64(s)
		b = load64(s[n-8:])
	} else {
		for i := range n {
			a = a<<8 | uint64(s[i])
		}
	}
	return (a*0x9E3779B97F4A7C15 ^ b*0xC2B2AE3D27D4EB4F) + uint64(n)
}

func load64(s string) uint64 {
	_ = s[7]
	return uint64(s[0]) | uint64(s[1])<<8 | uint64(s[2])<<16 | uint64(s[3])<<24 |
		uint64(s[4])<<32 | uint64(s[5])<<40 | uint64(s[6])<<48 | uint64(s[7])<<56
}

// sortObs sorts by entity name; insertion sort for the usual short contexts.
func sortObs(obs []graphidx.Observation) {
	if len(obs) > 24 {
		slicesSortObs(obs)
		return
	}
	for i := 1; i < len(obs); i++ {
		for j := i; j > 0 && obs[j].Entity < obs[j-1].Entity; j-- {
			obs[j], obs[j-1] = obs[j-1], obs[j]
		}
	}
}

func slicesSortObs(obs []graphidx.Observation) {
	slices.SortFunc(obs, func(a, b graphidx.Observation) int { return strings.Compare(a.Entity, b.Entity) })
}

// interner returns shared strings for repeated byte sequences so that the
// readers allocate once per distinct name rather than once per observation.
// It is bounded: when full it starts over.
type interner struct {
	m map[string]string
}

const internCap = 1 << 16

func (in *interner) get(b []byte) string {
	if s, ok := in.m[string(b)]; ok { // no allocation for the lookup
		return s
	}
	if in.m == nil || len(in.m) >= internCap {
		in.m = make(map[string]string, 1024)
	}
	s := string(b)
	in.m[s] = s
	return s
}

// lineReader is the bounded line reader of the corpus readers and the
// lexicon (fileio.LineReader) under the names they use.
type lineReader struct {
	fileio.LineReader
	line    int // number of the line last returned (1-based)
	bytes   int64
	tooLong bool // the line last returned was truncated
	max     int  // the longest line accepted
}

func newLineReader(r io.Reader, max int) *lineReader {
	return &lineReader{LineReader: *fileio.NewLineReader(r, max), max: max}
}

// next is LineReader.Next, mirroring its counters into the fields.
func (l *lineReader) next() ([]byte, error) {
	b, err := l.Next()
	l.line, l.bytes, l.tooLong = l.Line, l.Bytes, l.TooLong
	return b, err
}
