package cli

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"
	"unicode/utf16"
	"unicode/utf8"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/spf13/cobra"
)

func init() { register(newRouteCmd) }

// routeOptions are the flags of `hopwise route`.
type routeOptions struct {
	index, config    string
	from, value, to  string
	key              string
	queries          string
	text, lexicon    string
	chainTemplate    string
	directTemplate   string
	tp               *textPlanner // set by runRoute from --lexicon
	json             bool
	workers          int
	timeout          time.Duration
	gainThreshold    float64
	maxBridges, beam int
	maxCandidates    int
	fanOut           int
	alpha, beta      float64
	hopAlpha         float64 // α of a chain's hop tables
	prior, spread    float64 // A and η of the Bayes model's direct estimate
	separation       float64 // λ of the separation bias
	noiseK           float64 // k of the gain margin
	fallback         string
	budget           int
	utilityLambda    float64
	hopCost          float64
	cacheSize        int
	maxLineBytes     int
}

func newRouteCmd() *cobra.Command {
	var o routeOptions
	cmd := &cobra.Command{
		Use:   "route --index PATH (--from E [--value V] --to T | --text PROMPT --lexicon FILE | --queries FILE.jsonl) [flags]",
		Short: "Decide direct or chained answers for one query, a prompt text or a JSONL batch",
		Long: `route opens a locality index and decides, per query, whether the target
entity should be answered directly from the observed entity's statistics or
through a chain of bridge entities, by the estimated error reduction (gain).

Single query: --from E --value V --to T prints a readable explanation, or with
--json the same JSON object batch mode prints. On a presence-only index
(every entity's only value is "present") --value may be left out.

Prompt text: --text PROMPT --lexicon FILE links the text against the lexicon
(lines "surface form<TAB>entity id", or with a third column the value the
form states), forms queries (evidence = mentions with a value, targets =
mentions without; least-supported pair first; see docs/PLANS.md), decides
each, and prints the mentions, the decisions and the rendered reasoning plan.

Batch: --queries FILE.jsonl (or - for stdin) reads one query per line,
  {"id":"q1","from":"E","value":"V","to":"T"}        ("key" optional: A/B unit)
  {"id":"q2","text":"a prompt"}                      (needs --lexicon)
and writes one JSON line per input line, in input order. A query line gives
the decision view (router.View):
  {"id":"q1","from":"E","value":"V","to":"T","mode":"direct"|"chain",
   "reason":"<code>","explanation":"...","bridges":[...],
   "estimate":{"<value>":p,...},"error_measure":"sq-error-sum",
   "sq_error_sum":x,"gain":g,"score":s,"truncated":false,
   "direct":{"estimate":{...},"sq_error_sum":x,"support":n},
   "chain":{"bridges":[...],"estimate":{...},"sq_error_sum":y,
            "weakest_edge_support":n}|null,
   "generation":"<hex>"}
with "cut":["beam"|"candidates"|"budget"|"deadline",...] added when truncated,
and "parallel":true (top level and in "chain") when the chain reads its two
bridges side by side (config "parallel_bridges"; docs/QUALITY.md §4e).
sq_error_sum is the expected squared error summed over the target's values.
On a presence-only index there is no distribution: "estimate" is absent and
the figures are "error_proxy" (error_measure "support-proxy"), the support
model's v0/(support+n0) summed over links plus β per bridge, which ranks
answers by co-occurrence evidence and is not an error of any probability.
Estimates cover every value of the target, in the index's value order; a
decision from a configured --unknown-entity fallback has neither estimate
nor error figure.
A text line gives {"id","text","presence_only","mentions":[...],
"decisions":[{<view>,"plan":{...},"prompt":"..."}],"dropped":n}. A bad line
gives {"id":...,"error":"line N: ..."} and the batch goes on: keys are
matched exactly (a repeated key, an unknown key or one differing only in
case, e.g. "From", is an error), strings must be valid UTF-8 without lone
surrogate escapes, and each field is at most 4096 bytes (checked before it is
decoded). Lines are processed in chunks of at most 1024 lines or 8 MiB, so
memory stays bounded whatever --max-line-bytes is. Decisions run on
--workers goroutines; output order is always input order.

The index is memory-mapped: replace it by rename (hopwise build does), never
by writing over it in place (cp, truncate, >). If the file is truncated or
overwritten while route runs, the decision in flight fails with an error
naming the file instead of crashing the process (the file is also checked
after every chunk of a batch, since an overwrite may be read without a
fault), and a batch writes its current chunk's lines as errors and stops,
exit status 1.

Settings come from --config FILE.json (the router.Config format, also
written by "hopwise tune") and are overridden by the flags given explicitly.
Exit status: 0 when every query was answered, 2 when some failed or the
index is damaged or not an index (as for "hopwise inspect"), 1 on another
fatal error (missing index, config, flags, I/O). An unknown entity is
answered with the nearest names in the index; in a batch only the first ` + strconv.Itoa(batchHints) + `
unknown names get them (each search reads every name of the index, about
30 ms on 450,000 names, while the failed decision is one lookup), the later
lines say how to list names. An error line says the same as a single query
about an unknown value (the entity's values) and an expired --timeout.`,
		Example: `  hopwise route --index greenhouse.hwx --from vent-north --value open --to bed-tomato
  hopwise route --index greenhouse.hwx --from vent-north --value open --to bed-tomato --json
  hopwise route --index greenhouse.hwx --queries queries.jsonl --config route.json > decisions.jsonl
  hopwise route --index greenhouse.hwx --lexicon lexicon.tsv --text "The north vent is open; how is the tomato bed?"`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			return runRoute(cmd, o)
		},
	}
	def := router.DefaultConfig()
	f := cmd.Flags()
	f.StringVar(&o.index, "index", "", "path of the locality index file (required)")
	f.StringVar(&o.config, "config", "", "router configuration JSON file")
	f.StringVar(&o.from, "from", "", "observed entity (single query)")
	f.StringVar(&o.value, "value", "", "observed value of --from (single query; not needed on a presence-only index)")
	f.StringVar(&o.to, "to", "", "target entity (single query)")
	f.StringVar(&o.key, "key", "", "unit key for A/B assignment and exploration (single query)")
	f.StringVar(&o.queries, "queries", "", "JSONL file of queries, - for stdin (batch)")
	f.StringVar(&o.text, "text", "", "prompt text to link, form queries from and decide (needs --lexicon)")
	f.StringVar(&o.lexicon, "lexicon", "", "lexicon TSV for --text and for text lines of --queries")
	f.StringVar(&o.chainTemplate, "chain-template", "", "text/template file replacing the default chain plan (fields: docs/PLANS.md)")
	f.StringVar(&o.directTemplate, "direct-template", "", "text/template file replacing the default direct plan")
	f.BoolVar(&o.json, "json", false, "single query: print the batch JSON object")
	workersFlag(f, &o.workers, "batch: goroutines deciding in parallel")
	f.DurationVar(&o.timeout, "timeout", 0, "deadline per decision (0: none); a cut search is reported as truncated")
	f.Float64Var(&o.gainThreshold, "gain-threshold", def.GainThreshold, "τ_gain: route chain when gain ≥ τ")
	f.IntVar(&o.maxBridges, "max-bridges", def.MaxBridges, "H: most bridges in a chain (0-3)")
	f.IntVar(&o.beam, "beam", def.Beam, "B: width of the first search layer")
	f.IntVar(&o.fanOut, "fan-out", def.FanOut, "f: second-layer neighbours per first-layer node")
	f.IntVar(&o.maxCandidates, "max-candidates", def.MaxCandidates, "k: chains scored exactly")
	f.Float64Var(&o.alpha, "alpha", def.Alpha, "Dirichlet pseudo-count α")
	f.Float64Var(&o.hopAlpha, "hop-alpha", def.HopAlpha, "Dirichlet pseudo-count of a chain's hop tables (bayes)")
	f.Float64Var(&o.beta, "beta", def.Beta, "per-hop squared bias β")
	f.Float64Var(&o.prior, "prior-strength", def.PriorStrength, "A: pseudo-count of the direct estimate's prior centred on the target's marginal (bayes)")
	f.Float64Var(&o.spread, "unseen-spread", def.UnseenSpread, "η: a never-seen pair's direct error is η·(1 − P(observed value))²·(1 − 1/K) (bayes)")
	f.Float64Var(&o.separation, "separation", def.Separation, "λ: weight of the chain's separation bias (0: off; bayes)")
	f.Float64Var(&o.noiseK, "noise-k", def.NoiseK, "k: a chain must beat direct by k standard errors of its bias estimate (0: off; bayes)")
	f.StringVar(&o.fallback, "unknown-entity", def.Fallback, "unknown endpoints: error, or answer with a direct or chain fallback decision")
	f.IntVar(&o.budget, "expansion-budget", def.ExpansionBudget, "work units one search may spend (a hub costs at most this)")
	f.Float64Var(&o.utilityLambda, "utility-lambda", def.UtilityLambda, "λ of the utility form λ·gain − hop_cost·m (0: off)")
	f.Float64Var(&o.hopCost, "hop-cost", def.HopCost, "cost per bridge in the utility form")
	f.IntVar(&o.cacheSize, "cache-size", def.CacheSize, "decision cache entries (0: off)")
	f.IntVar(&o.maxLineBytes, "max-line-bytes", 1<<20, "batch: longest accepted input line")
	_ = cmd.MarkFlagRequired("index")
	return cmd
}

// routeConfig merges --config and the explicitly set flags.
func routeConfig(cmd *cobra.Command, o routeOptions) (router.Config, error) {
	c := router.DefaultConfig()
	if o.config != "" {
		var err error
		if c, err = router.LoadConfig(o.config); err != nil {
			return c, err
		}
	}
	fl := cmd.Flags()
	set := func(name string, apply func()) {
		if fl.Changed(name) {
			apply()
		}
	}
	set("gain-threshold", func() { c.GainThreshold = o.gainThreshold })
	set("max-bridges", func() { c.MaxBridges = o.maxBridges })
	set("beam", func() { c.Beam = o.beam })
	set("fan-out", func() { c.FanOut = o.fanOut })
	set("max-candidates", func() { c.MaxCandidates = o.maxCandidates })
	set("alpha", func() { c.Alpha = o.alpha })
	set("hop-alpha", func() { c.HopAlpha = o.hopAlpha })
	set("beta", func() { c.Beta = o.beta })
	set("prior-strength", func() { c.PriorStrength = o.prior })
	set("unseen-spread", func() { c.UnseenSpread = o.spread })
	set("separation", func() { c.Separation = o.separation })
	set("noise-k", func() { c.NoiseK = o.noiseK })
	set("unknown-entity", func() { c.Fallback = o.fallback })
	set("expansion-budget", func() { c.ExpansionBudget = o.budget })
	set("utility-lambda", func() { c.UtilityLambda = o.utilityLambda })
	set("hop-cost", func() { c.HopCost = o.hopCost })
	set("cache-size", func() { c.CacheSize = o.cacheSize })
	if err := c.Validate(); err != nil {
		return c, fmt.Errorf("flags: %w", err)
	}
	return c, nil
}

func runRoute(cmd *cobra.Command, o routeOptions) error {
	single := o.from != "" || o.value != "" || o.to != ""
	text := cmd.Flags().Changed("text")
	if n := btoi(single) + btoi(text) + btoi(o.queries != ""); n != 1 {
		return errors.New("route: give exactly one of --from/--value/--to, --text or --queries")
	}
	if single && (o.from == "" || o.to == "") {
		return errors.New("route: a single query needs --from and --to (and --value unless the index is presence-only)")
	}
	if text && o.lexicon == "" {
		return errors.New("route: --text needs --lexicon")
	}
	if (o.chainTemplate != "" || o.directTemplate != "") && o.lexicon == "" {
		return errors.New("route: --chain-template and --direct-template render plans of texts, which need --lexicon")
	}
	var err error
	if o.workers, err = resolveWorkers(o.workers); err != nil {
		return fmt.Errorf("route: %w", err)
	}
	if o.maxLineBytes < 64 {
		return fmt.Errorf("route: --max-line-bytes must be ≥ 64, got %d", o.maxLineBytes)
	}
	if o.timeout < 0 {
		return fmt.Errorf("route: --timeout must not be negative, got %v (0 means no deadline)", o.timeout)
	}
	cfg, err := routeConfig(cmd, o)
	if err != nil {
		return err
	}
	opts, err := cfg.Options()
	if err != nil {
		return err
	}
	if o.lexicon != "" {
		if o.tp, err = newTextPlanner(o.lexicon, o.chainTemplate, o.directTemplate, cfg); err != nil {
			return err
		}
	}
	ix, err := graphidx.Open(o.index)
	if err != nil {
		return indexError(err) // damage: exit 2, as in inspect
	}
	r, err := router.New(ix, opts...) // the router closes the index
	if err != nil {
		ix.Close()
		return err
	}
	defer r.Close()
	gd := guardedDecider{r: r, ix: ix, timeout: o.timeout}
	ctx := cmd.Context()
	if ctx == nil {
		ctx = context.Background()
	}
	out := bufio.NewWriter(cmd.OutOrStdout())
	defer out.Flush()

	if text {
		return o.tp.runSingle(ctx, gd, out, o)
	}
	if single {
		q := routeQuery{ID: "", From: o.from, Value: o.value, To: o.to, Key: o.key}
		d, err := decideSingle(ctx, gd, &q)
		if err == nil {
			err = ix.CheckFile()
		}
		if err != nil {
			err = decideErrorHint(ix, router.Query{From: q.From, Value: q.Value, To: q.To}, o.timeout, err)
			if o.json {
				line, _ := json.Marshal(routeError{ID: nil, Error: err.Error()})
				out.Write(append(line, '\n'))
			}
			if errors.Is(err, graphidx.ErrFileChanged) {
				return err
			}
			return &ExitError{Code: 2, Err: err}
		}
		if o.json {
			line, err := json.Marshal(newRouteLine(q, d, r.ErrorMeasure()))
			if err != nil {
				return err
			}
			_, err = out.Write(append(line, '\n'))
			return err
		}
		return explain(out, q, d, cfg, r.ErrorMeasure())
	}

	var in io.Reader
	if o.queries == "-" {
		in = cmd.InOrStdin()
	} else {
		f, err := os.Open(o.queries)
		if err != nil {
			return err
		}
		defer f.Close()
		in = f
	}
	failed, total, err := routeBatch(ctx, gd, in, o.queries, out, o)
	if err != nil {
		return err
	}
	if err := out.Flush(); err != nil {
		return err
	}
	if failed > 0 {
		return &ExitError{Code: 2, Err: fmt.Errorf("route: %d of %d queries failed", failed, total)}
	}
	return nil
}

// guardedDecider decides queries on r inside ix.Guard, so that an index
// file truncated or overwritten under its memory map fails the decision
// with a *graphidx.FaultError naming the file instead of killing the
// process with SIGBUS.
type guardedDecider struct {
	r       *router.Router
	ix      *graphidx.Index
	timeout time.Duration
}

func (g guardedDecider) decide(ctx context.Context, q routeQuery) (d router.Decision, err error) {
	if g.timeout > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, g.timeout)
		defer cancel()
	}
	err = g.ix.Guard(func() error {
		var derr error
		d, derr = g.r.Decide(ctx, router.Query{From: q.From, Value: q.Value, To: q.To, Key: q.Key})
		return derr
	})
	return d, err
}

// routeQuery is one batch input line.
type routeQuery struct {
	ID    string `json:"id"`
	From  string `json:"from"`
	Value string `json:"value"`
	To    string `json:"to"`
	Key   string `json:"key,omitempty"`
	Text  string `json:"text,omitempty"`
}

// routeLine is the JSON of one decided query line: the batch line's id
// and the decision's public view (router.View).
type routeLine struct {
	ID string `json:"id"`
	router.View
}

type routeError struct {
	ID    *string `json:"id"`
	Error string  `json:"error"`
}

func newRouteLine(q routeQuery, d router.Decision, m router.ErrorMeasure) routeLine {
	return routeLine{ID: q.ID, View: router.NewView(router.Query{From: q.From, Value: q.Value, To: q.To, Key: q.Key}, d, m)}
}

// batchItem is one input line on its way through the workers.
type batchItem struct {
	line  int
	q     routeQuery
	idSet bool
	err   error // parse error, or the decision error
	out   []byte
}

// maxQueryField is the longest accepted value of a batch field, in bytes:
// the longest name an index can hold (graphidx.MaxNameBytes).
const maxQueryField = graphidx.MaxNameBytes

// queryFields are the keys of a batch line, matched exactly.
var queryFields = [...]string{"id", "from", "value", "to", "key"}

// parseQueryLine decodes one batch line strictly: each key once and spelt
// exactly (encoding/json would match "From" to from and keep the last of
// two), no unknown keys, string values only, valid UTF-8 without lone
// surrogate escapes (encoding/json would turn them into U+FFFD), each value
// at most maxQueryField bytes, checked on the raw bytes before decoding, and
// nothing after the object. Errors name the line and the field.
//
// A string literal too long for any field is found on the raw bytes first
// (firstLongString) and handed to the decoder shortened, so a line of a
// megabyte is rejected in O(line) memchr time instead of being tokenized
// by encoding/json (about 10 ms per megabyte): the decoder still reads
// every byte before it, so the error is the one a full decode gives.
func parseQueryLine(b []byte, line int) (routeQuery, bool, error) {
	if start, end, ok := firstLongString(b, 6*maxQueryField+2); ok {
		src := io.MultiReader(bytes.NewReader(b[:start]), bytes.NewReader(shortLiteral(b[start:end])), bytes.NewReader(b[end:]))
		return decodeQueryLine(src, int64(start), line)
	}
	return decodeQueryLine(bytes.NewReader(b), -1, line)
}

// decodeQueryLine is parseQueryLine on src, in which the string literal at
// byte offset longAt (if ≥ 0) stands shortened for one too long for a field.
func decodeQueryLine(src io.Reader, longAt int64, line int) (routeQuery, bool, error) {
	var q routeQuery
	dec := json.NewDecoder(src)
	if tok, err := dec.Token(); err != nil || tok != json.Delim('{') {
		return q, false, fmt.Errorf("line %d: not a JSON object", line)
	}
	var seen [len(queryFields)]bool
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return q, seen[0], fmt.Errorf("line %d: not a JSON object: %v", line, err)
		}
		key, _ := tok.(string)
		i := slices.Index(queryFields[:], key)
		if i < 0 {
			for _, f := range queryFields {
				if strings.EqualFold(key, f) {
					return q, seen[0], fmt.Errorf("line %d: key %s differs from %q only in case", line, quoteField(key), f)
				}
			}
			return q, seen[0], fmt.Errorf("line %d: unknown field %s", line, quoteField(key))
		}
		if seen[i] {
			return q, seen[0], fmt.Errorf("line %d: field %q appears twice", line, key)
		}
		seen[i] = true
		var raw json.RawMessage
		if err := dec.Decode(&raw); err != nil {
			return q, seen[0], fmt.Errorf("line %d: field %q: %v", line, key, err)
		}
		if dec.InputOffset()-int64(len(raw)) == longAt {
			return q, seen[0], fmt.Errorf("line %d: field %q: longer than %d bytes", line, key, maxQueryField)
		}
		v, err := decodeQueryString(raw)
		if err != nil {
			return q, seen[0], fmt.Errorf("line %d: field %q: %v", line, key, err)
		}
		*[...]*string{&q.ID, &q.From, &q.Value, &q.To, &q.Key}[i] = v
	}
	if _, err := dec.Token(); err != nil {
		return q, seen[0], fmt.Errorf("line %d: not a JSON object: %v", line, err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return q, seen[0], fmt.Errorf("line %d: data after the JSON object", line)
	}
	for i, f := range queryFields[:4] {
		if !seen[i] {
			return q, seen[0], fmt.Errorf("line %d: missing field %q", line, f)
		}
		if v := *[...]*string{&q.ID, &q.From, &q.Value, &q.To}[i]; v == "" && f != "id" {
			return q, seen[0], fmt.Errorf("line %d: field %q is empty", line, f)
		}
	}
	return q, seen[0], nil
}

// decodeQueryString decodes one JSON string value of a batch line. It
// rejects other JSON types, values over maxQueryField bytes (on the raw
// length first: an escape takes at most 6 bytes per decoded byte, so a raw
// string over 6·maxQueryField+2 bytes is too long without decoding it),
// invalid UTF-8 and lone UTF-16 surrogate escapes.
func decodeQueryString(raw []byte) (string, error) {
	if len(raw) == 0 || raw[0] != '"' {
		kind := "a number"
		switch {
		case len(raw) == 0:
			kind = "nothing"
		case raw[0] == '{':
			kind = "an object"
		case raw[0] == '[':
			kind = "an array"
		case raw[0] == 't' || raw[0] == 'f':
			kind = "a boolean"
		case raw[0] == 'n':
			kind = "null"
		}
		return "", fmt.Errorf("want a string, got %s", kind)
	}
	if len(raw) > 6*maxQueryField+2 {
		return "", fmt.Errorf("longer than %d bytes", maxQueryField)
	}
	if !utf8.Valid(raw) {
		return "", errors.New("not valid UTF-8")
	}
	if loneSurrogate(raw) {
		return "", errors.New("lone UTF-16 surrogate escape (not a character)")
	}
	var v string
	if err := json.Unmarshal(raw, &v); err != nil {
		return "", err
	}
	if len(v) > maxQueryField {
		return "", fmt.Errorf("longer than %d bytes", maxQueryField)
	}
	return v, nil
}

// firstLongString finds the first JSON string literal of b whose raw form
// (quotes included) is longer than max bytes, as b[start:end], by skipping
// from quote to quote with bytes.IndexByte (a quote preceded by an odd run
// of backslashes is escaped). Outside string literals a valid JSON line has
// no quote, and in an invalid one the decoder stops at or before the
// literal, so the literals found are the decoder's. O(len(b)); a line no
// longer than max is not scanned.
func firstLongString(b []byte, max int) (start, end int, ok bool) {
	if len(b) <= max {
		return 0, 0, false
	}
	for i := 0; ; {
		o := bytes.IndexByte(b[i:], '"')
		if o < 0 {
			return 0, 0, false
		}
		start = i + o
		j := start + 1
		for {
			c := bytes.IndexByte(b[j:], '"')
			if c < 0 {
				return 0, 0, false // unterminated: the decoder reports it
			}
			j += c
			bs := 0
			for k := j - 1; k > start && b[k] == '\\'; k-- {
				bs++
			}
			j++
			if bs%2 == 0 {
				break
			}
		}
		if j-start > max {
			return start, j, true
		}
		i = j
	}
}

// shortLiteral returns the raw JSON string literal lit cut to its first 512
// or so raw bytes, at an escape boundary, and closed: as a key it decodes to
// the same first 64 bytes (an escape is at most 6 raw bytes for at least
// one decoded byte, so 512 raw bytes give at least 85), which is all an
// unknown-field error shows (quoteField).
func shortLiteral(lit []byte) []byte {
	i := 1
	for i < len(lit)-1 && i < 512 {
		switch {
		case lit[i] != '\\':
			i++
		case i+1 < len(lit) && lit[i+1] == 'u':
			i += 6
		default:
			i += 2
		}
	}
	i = min(i, len(lit)-1)
	return append(append([]byte(nil), lit[:i]...), '"')
}

// loneSurrogate reports a \uD800–\uDFFF escape in the raw JSON string s
// that is not a high surrogate directly followed by a low one.
func loneSurrogate(s []byte) bool {
	hex4 := func(i int) (rune, bool) {
		if i+6 > len(s) || s[i] != '\\' || s[i+1] != 'u' {
			return 0, false
		}
		v, err := strconv.ParseUint(string(s[i+2:i+6]), 16, 16)
		return rune(v), err == nil
	}
	for i := 0; i < len(s); i++ {
		if s[i] != '\\' {
			continue
		}
		r, ok := hex4(i)
		if !ok {
			i++ // skip the escaped character (it may be a backslash)
			continue
		}
		if utf16.IsSurrogate(r) {
			r2, ok := hex4(i + 6)
			if r >= 0xdc00 || !ok || r2 < 0xdc00 || r2 > 0xdfff {
				return true
			}
			i += 6
		}
		i += 5
	}
	return false
}

// quoteField quotes a key for an error message, shortened to 64 bytes.
func quoteField(k string) string {
	if len(k) > 64 {
		return strconv.Quote(k[:64]) + "..."
	}
	return strconv.Quote(k)
}

// routeBatch decides every line of in and writes the results in input
// order. It processes chunks of at most chunkLines lines and chunkBytes
// input bytes with o.workers goroutines, so memory stays bounded whatever
// the line limit. It returns the number of failed and total lines; err is
// for fatal errors: I/O, and an index file changed under its map (the
// chunk's lines are written first, the failed ones as errors).
func routeBatch(ctx context.Context, gd guardedDecider, in io.Reader, name string, out io.Writer, o routeOptions) (failed, total int, err error) {
	br := bufio.NewReaderSize(in, 64<<10)
	items := make([]batchItem, 0, chunkLines)
	lineNo := 0
	eof := false
	var lineBuf []byte // reused: a line is parsed before the next is read
	hinted := 0        // unknown-entity lines given near names so far
	for !eof {
		items = items[:0]
		for n := 0; len(items) < chunkLines && n < chunkBytes; {
			b, tooLong, rerr := readLine(br, o.maxLineBytes, lineBuf[:0])
			lineBuf = b[:0]
			if rerr == io.EOF && b == nil && !tooLong {
				eof = true
				break
			}
			if rerr != nil && rerr != io.EOF {
				return failed, total, fmt.Errorf("%s: %w", name, rerr)
			}
			lineNo++
			n += len(b)
			it := batchItem{line: lineNo}
			switch {
			case tooLong:
				it.err = fmt.Errorf("line %d: longer than %d bytes", lineNo, o.maxLineBytes)
			case len(bytes.TrimSpace(b)) == 0:
				it.err = fmt.Errorf("line %d: empty line", lineNo)
			default:
				it.q, it.idSet, it.err = parseRouteLine(b, lineNo)
			}
			items = append(items, it)
			if rerr == io.EOF {
				eof = true
				break
			}
		}
		decideChunk(ctx, gd, items, o)
		hinted = hintUnknown(gd, items, hinted)
		// A file overwritten in place may be read without a fault (new
		// bytes at old offsets): check it once per chunk and withhold the
		// chunk's answers when it changed.
		changed := gd.ix.CheckFile()
		for i := range items {
			if it := &items[i]; changed != nil && it.err == nil {
				it.err = fmt.Errorf("line %d: answer withheld: %w", it.line, changed)
				it.out = errorLine(it)
			}
		}
		for i := range items {
			it := &items[i]
			total++
			if it.err != nil {
				failed++
				if changed == nil && errors.Is(it.err, graphidx.ErrFileChanged) {
					changed = it.err
				}
			}
			if _, werr := out.Write(it.out); werr != nil {
				return failed, total, werr
			}
		}
		if changed != nil {
			return failed, total, fmt.Errorf("route: stopped after input line %d: %w", lineNo, changed)
		}
	}
	return failed, total, nil
}

// Chunk bounds of a batch: lines are read, decided and written chunk by
// chunk, so at most this much input is held at once (each line's decoded
// fields are at most 5·maxQueryField bytes).
const (
	chunkLines = 1024
	chunkBytes = 8 << 20
)

// readLine returns the next line without its newline, appended to buf
// (give the last line's buf[:0] to reuse its memory: lines of a megabyte
// would otherwise each allocate and copy a growing buffer). A line longer
// than max is consumed and reported as tooLong. At the end it returns
// io.EOF, with the last line's bytes when it had no final newline.
func readLine(br *bufio.Reader, max int, buf []byte) (line []byte, tooLong bool, err error) {
	for {
		frag, e := br.ReadSlice('\n')
		if !tooLong {
			if len(buf)+len(frag) > max+1 { // +1: the newline
				tooLong, buf = true, buf[:0]
			} else {
				buf = append(buf, frag...)
			}
		}
		if e == bufio.ErrBufferFull {
			continue
		}
		if e == io.EOF {
			if len(buf) == 0 && !tooLong && len(frag) == 0 {
				return nil, false, io.EOF
			}
			return bytes.TrimRight(buf, "\r\n"), tooLong, io.EOF
		}
		if e != nil {
			return nil, false, e
		}
		return bytes.TrimRight(buf, "\r\n"), tooLong, nil
	}
}

// errorLine renders the error output line of a failed item.
func errorLine(it *batchItem) []byte {
	e := routeError{Error: it.err.Error()}
	if it.idSet {
		id := it.q.ID
		e.ID = &id
	}
	b, _ := json.Marshal(e)
	return append(b, '\n')
}

// batchHints is how many unknown-entity lines of a batch get near names
// (graphidx.Index.Suggest), in input order. Suggest reads every name of the
// index, O(N): 30 ms per call on 454,812 names against 2.4 µs for the
// lookup that fails the decision (2-core development machine), so 5,000
// unknown names would add 150 s to a batch that otherwise takes about one;
// with this bound the hints add at most batchHints·O(N) per batch.
const batchHints = 8

// hintUnknown adds near names to the unknown-entity errors of items, in
// input order, while fewer than batchHints lines of the batch have had
// them (done counts those so far; the new count is returned), and to the
// later ones the way to find names. It runs after the chunk's parallel
// decisions, so which lines get hints does not depend on --workers.
func hintUnknown(gd guardedDecider, items []batchItem, done int) int {
	for i := range items {
		it := &items[i]
		if it.err == nil || it.q.Text != "" || !errors.Is(it.err, router.ErrUnknownEntity) {
			continue
		}
		if done < batchHints {
			done++
			it.err = decideErrorHint(gd.ix, router.Query{From: it.q.From, Value: it.q.Value, To: it.q.To}, gd.timeout, it.err)
		} else {
			it.err = fmt.Errorf("%w (near names are looked up for the first %d unknown names of a batch only; "+
				"route this query alone for them, or list names with: hopwise inspect --index %s --list --prefix P)",
				it.err, batchHints, graphidx.EscapeControl(gd.ix.Path()))
		}
		it.out = errorLine(it)
	}
	return done
}

// decideChunk decides the items on o.workers goroutines and renders each
// item's output line. Errors other than an unknown entity get their hint
// (decideErrorHint) here; unknown entities get theirs from hintUnknown.
func decideChunk(ctx context.Context, gd guardedDecider, items []batchItem, o routeOptions) {
	work := func(it *batchItem) {
		if it.err == nil && it.q.Text != "" {
			if it.out, it.err = o.tp.batchLine(ctx, gd, it.q, it.line, o); it.out != nil {
				return
			}
			it.err = fmt.Errorf("line %d: %w", it.line, it.err)
		}
		if it.err == nil {
			d, err := gd.decide(ctx, it.q)
			if err != nil {
				if !errors.Is(err, router.ErrUnknownEntity) {
					err = decideErrorHint(gd.ix, router.Query{From: it.q.From, Value: it.q.Value, To: it.q.To}, gd.timeout, err)
				}
				it.err = fmt.Errorf("line %d: %w", it.line, err)
			} else if b, err := json.Marshal(newRouteLine(it.q, d, gd.r.ErrorMeasure())); err != nil {
				it.err = fmt.Errorf("line %d: %w", it.line, err)
			} else {
				it.out = append(b, '\n')
				return
			}
		}
		it.out = errorLine(it)
	}
	w := o.workers
	if w > len(items) {
		w = len(items)
	}
	if w <= 1 {
		for i := range items {
			work(&items[i])
		}
		return
	}
	var wg sync.WaitGroup
	for g := 0; g < w; g++ {
		wg.Add(1)
		go func(g int) {
			defer wg.Done()
			for i := g; i < len(items); i += w {
				work(&items[i])
			}
		}(g)
	}
	wg.Wait()
}

// explain prints a readable account of one decision.
func explain(w io.Writer, q routeQuery, d router.Decision, cfg router.Config, m router.ErrorMeasure) error {
	// Names come from the command line and the index: escape control
	// characters so that printing them cannot drive the terminal.
	esc := graphidx.EscapeControl
	escAll := func(ss []string) []string {
		out := make([]string, len(ss))
		for i, x := range ss {
			out[i] = esc(x)
		}
		return out
	}
	q = routeQuery{From: esc(q.From), Value: esc(q.Value), To: esc(q.To)}
	var b strings.Builder
	fmtDist := func(p []float64) string {
		if len(p) == 0 {
			return "(none)"
		}
		parts := make([]string, 0, len(p))
		for i, v := range p {
			if i < len(d.Values) {
				parts = append(parts, fmt.Sprintf("%s %.3f", esc(d.Values[i]), v))
			}
		}
		return strings.Join(parts, "  ")
	}
	fmt.Fprintf(&b, "query      %s = %s  →  %s\n", q.From, q.Value, q.To)
	mode := d.Mode.String()
	if d.Mode == router.ModeChain && len(d.Bridges) > 0 {
		if d.Chain != nil && d.Chain.Parallel {
			mode += " via " + strings.Join(escAll(d.Bridges), " and ") + " in parallel"
		} else {
			mode += " via " + strings.Join(escAll(d.Bridges), " → ")
		}
	}
	fmt.Fprintf(&b, "decision   %s\n", mode)
	fmt.Fprintf(&b, "reason     %s: %s\n", d.Reason.Code, esc(d.Reason.Text))
	// A target with one label (presence-only) has no distribution to show;
	// its figures are the support proxy, not a probability error.
	proxy := m == router.MeasureSupportProxy
	if len(d.Values) < 2 {
		fmtDist = func([]float64) string { return "" }
	}
	errName := "error"
	if proxy {
		errName = "error proxy"
	}
	if len(d.Estimate) > 0 {
		if len(d.Values) < 2 {
			fmt.Fprintf(&b, "estimate   no distribution: %s records presence only\n", q.To)
		} else {
			fmt.Fprintf(&b, "estimate   P(%s) = %s   (expected error %.4g)\n", q.To, fmtDist(d.Estimate), d.Err)
		}
		if proxy {
			fmt.Fprintf(&b, "figures    error proxy %.4g = Σ over links v0/(support + n0) + β per bridge: lower means\n"+
				"           more co-occurrence evidence; it is not an error of any probability\n", d.Err)
		} else {
			fmt.Fprintf(&b, "figures    expected squared error summed over %s's %d values\n", q.To, len(d.Values))
		}
	}
	// withDist prefixes a distribution, when there is one, to the figures.
	withDist := func(p []float64, rest string) string {
		if s := fmtDist(p); s != "" {
			return s + "   " + rest
		}
		return rest
	}
	if d.Direct.Estimate != nil {
		fmt.Fprintf(&b, "direct     %s\n", withDist(d.Direct.Estimate, fmt.Sprintf("%s %.4g, support %d contexts", errName, d.Direct.Err, d.Direct.Support)))
	}
	if d.Chain != nil {
		path := append(append([]string{q.From}, escAll(d.Chain.Bridges)...), q.To)
		if d.Chain.Parallel {
			// s → {b1, b2} → t: both bridges read from s, the target from both.
			fmt.Fprintf(&b, "chain      %s → {%s} → %s (parallel: each bridge from %s, %s from both)\n",
				path[0], strings.Join(path[1:len(path)-1], ", "), path[len(path)-1], path[0], path[len(path)-1])
			if d.Chain.Midpoint {
				fmt.Fprintf(&b, "           estimate: the midpoint of that and the chain through one of the two, which the\n"+
					"           pair tables fit equally well\n")
			}
		} else {
			fmt.Fprintf(&b, "chain      %s\n", strings.Join(path, " → "))
		}
		fmt.Fprintf(&b, "           %s\n", withDist(d.Chain.Estimate, fmt.Sprintf("%s %.4g, weakest edge %d contexts", errName, d.Chain.Err, d.Chain.MinSupport)))
		rule := fmt.Sprintf("direct %s − chain %s = %.4g", errName, errName, d.Gain)
		if cfg.UtilityLambda > 0 {
			rule += fmt.Sprintf("; utility = %.4g·gain − %.4g·%d = %.4g", cfg.UtilityLambda, cfg.HopCost, len(d.Chain.Bridges), d.Score)
		}
		fmt.Fprintf(&b, "gain       %s (threshold %.4g)\n", rule, cfg.GainThreshold)
	} else if d.Reason.Code == router.ReasonNoChain {
		fmt.Fprintf(&b, "chain      none within %d bridges\n", cfg.MaxBridges)
	}
	if d.Truncated {
		fanOut := cfg.FanOut
		if fanOut == 0 {
			fanOut = router.DefaultFanOut
		}
		fmt.Fprintf(&b, "search     truncated by %s (beam %d, fan-out %d, candidates %d, expansion budget %d); a better chain may exist\n",
			strings.Join(d.Cut.Names(), ", "), cfg.Beam, fanOut, cfg.MaxCandidates, cfg.ExpansionBudget)
	} else if d.Reason.Code != router.ReasonUnknownEntityFallback && d.Reason.Code != router.ReasonUnknownValueFallback {
		fmt.Fprintf(&b, "search     complete: no bound was hit\n")
	}
	if d.Arm != "" || d.Propensity != 1 {
		fmt.Fprintf(&b, "policy     arm %s, propensity %.4g, explored %v\n", esc(strconv.Quote(d.Arm)), d.Propensity, d.Explored)
	}
	fmt.Fprintf(&b, "index      generation %016x\n", d.Generation)
	_, err := io.WriteString(w, b.String())
	return err
}
