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
	"strconv"
	"strings"
	"sync"
	"time"

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
	json             bool
	workers          int
	timeout          time.Duration
	gainThreshold    float64
	maxBridges, beam int
	maxCandidates    int
	alpha, beta      float64
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
		Use:   "route --index PATH (--from E --value V --to T | --queries FILE.jsonl) [flags]",
		Short: "Decide direct or chained answers for one query or a JSONL batch",
		Long: `route opens a locality index and decides, per query, whether the target
entity should be answered directly from the observed entity's statistics or
through a chain of bridge entities, by the estimated error reduction (gain).

Single query: --from E --value V --to T prints a readable explanation, or with
--json the same JSON object batch mode prints.

Batch: --queries FILE.jsonl (or - for stdin) reads one query per line,
  {"id":"q1","from":"E","value":"V","to":"T"}        ("key" optional: A/B unit)
and writes one JSON line per input line, in input order:
  {"id":"q1","from":"E","value":"V","to":"T","mode":"direct"|"chain",
   "estimate":{"<value>":p,...},"err":x,"gain":g,"reason":"<code>",
   "truncated":false,"direct":{"estimate":{...},"err":x,"support":n},
   "chain":{"bridges":["B1",...],"estimate":{...},"err":y,"min_support":n}|null,
   "generation":"<hex>"}
with "cut":["beam"|"candidates"|"budget"|"deadline",...] added when truncated.
Estimates cover every value of the target, in the index's value order
(decisions from a configured --unknown-entity fallback carry an empty
estimate and their reason code says so). A bad
line gives {"id":...,"error":"line N: ..."} and the batch goes on. Decisions
run on --workers goroutines; output order is always input order.

Settings come from --config FILE.json (the router.Config format, also
written by "hopwise tune") and are overridden by the flags given explicitly.
Exit status: 0 when every query was answered, 2 when some failed or the
index is damaged or not an index (as for "hopwise inspect"), 1 on another
fatal error (missing index, config, flags, I/O). An unknown entity is
answered with the nearest names in the index.`,
		Example: `  hopwise route --index greenhouse.hwx --from vent-north --value open --to bed-tomato
  hopwise route --index greenhouse.hwx --from vent-north --value open --to bed-tomato --json
  hopwise route --index greenhouse.hwx --queries queries.jsonl --config route.json > decisions.jsonl`,
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
	f.StringVar(&o.value, "value", "", "observed value of --from (single query)")
	f.StringVar(&o.to, "to", "", "target entity (single query)")
	f.StringVar(&o.key, "key", "", "unit key for A/B assignment and exploration (single query)")
	f.StringVar(&o.queries, "queries", "", "JSONL file of queries, - for stdin (batch)")
	f.BoolVar(&o.json, "json", false, "single query: print the batch JSON object")
	workersFlag(f, &o.workers, "batch: goroutines deciding in parallel")
	f.DurationVar(&o.timeout, "timeout", 0, "deadline per decision (0: none); a cut search is reported as truncated")
	f.Float64Var(&o.gainThreshold, "gain-threshold", def.GainThreshold, "τ_gain: route chain when gain ≥ τ")
	f.IntVar(&o.maxBridges, "max-bridges", def.MaxBridges, "H: most bridges in a chain (0-3)")
	f.IntVar(&o.beam, "beam", def.Beam, "B: beam width of each search layer")
	f.IntVar(&o.maxCandidates, "max-candidates", def.MaxCandidates, "k: chains scored exactly")
	f.Float64Var(&o.alpha, "alpha", def.Alpha, "Dirichlet pseudo-count α")
	f.Float64Var(&o.beta, "beta", def.Beta, "per-hop squared bias β")
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
	set("max-candidates", func() { c.MaxCandidates = o.maxCandidates })
	set("alpha", func() { c.Alpha = o.alpha })
	set("beta", func() { c.Beta = o.beta })
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
	if single == (o.queries != "") {
		return errors.New("route: give either --from/--value/--to or --queries")
	}
	if single && (o.from == "" || o.value == "" || o.to == "") {
		return errors.New("route: a single query needs --from, --value and --to")
	}
	var err error
	if o.workers, err = resolveWorkers(o.workers); err != nil {
		return fmt.Errorf("route: %w", err)
	}
	if o.maxLineBytes < 64 {
		return fmt.Errorf("route: --max-line-bytes must be ≥ 64, got %d", o.maxLineBytes)
	}
	cfg, err := routeConfig(cmd, o)
	if err != nil {
		return err
	}
	opts, err := cfg.Options()
	if err != nil {
		return err
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
	ctx := cmd.Context()
	if ctx == nil {
		ctx = context.Background()
	}
	out := bufio.NewWriter(cmd.OutOrStdout())
	defer out.Flush()

	if single {
		q := routeQuery{ID: "", From: o.from, Value: o.value, To: o.to, Key: o.key}
		d, err := decideOne(ctx, r, q, o.timeout)
		if err != nil {
			err = decideErrorHint(ix, router.Query{From: q.From, Value: q.Value, To: q.To}, o.timeout, err)
			if o.json {
				line, _ := json.Marshal(routeError{ID: nil, Error: err.Error()})
				out.Write(append(line, '\n'))
			}
			return &ExitError{Code: 2, Err: err}
		}
		if o.json {
			line, err := json.Marshal(newRouteLine(q, d))
			if err != nil {
				return err
			}
			_, err = out.Write(append(line, '\n'))
			return err
		}
		return explain(out, q, d, cfg)
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
	failed, total, err := routeBatch(ctx, r, in, o.queries, out, o)
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

func decideOne(ctx context.Context, r *router.Router, q routeQuery, timeout time.Duration) (router.Decision, error) {
	if timeout > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, timeout)
		defer cancel()
	}
	return r.Decide(ctx, router.Query{From: q.From, Value: q.Value, To: q.To, Key: q.Key})
}

// routeQuery is one batch input line.
type routeQuery struct {
	ID    string `json:"id"`
	From  string `json:"from"`
	Value string `json:"value"`
	To    string `json:"to"`
	Key   string `json:"key,omitempty"`
}

// dist is an estimate printed as a JSON object in the target's value order.
type dist struct {
	labels []string
	p      []float64
}

func (d dist) MarshalJSON() ([]byte, error) {
	var b bytes.Buffer
	b.WriteByte('{')
	for i, l := range d.labels {
		if i >= len(d.p) {
			break
		}
		if i > 0 {
			b.WriteByte(',')
		}
		k, err := json.Marshal(l)
		if err != nil {
			return nil, err
		}
		b.Write(k)
		b.WriteByte(':')
		b.WriteString(strconv.FormatFloat(d.p[i], 'g', -1, 64))
	}
	b.WriteByte('}')
	return b.Bytes(), nil
}

type routeDirect struct {
	Estimate dist    `json:"estimate"`
	Err      float64 `json:"err"`
	Support  uint64  `json:"support"`
}

type routeChain struct {
	Bridges    []string `json:"bridges"`
	Estimate   dist     `json:"estimate"`
	Err        float64  `json:"err"`
	MinSupport uint64   `json:"min_support"`
}

// routeLine is the JSON contract of one decision (documented in route --help).
type routeLine struct {
	ID         string      `json:"id"`
	From       string      `json:"from"`
	Value      string      `json:"value"`
	To         string      `json:"to"`
	Mode       string      `json:"mode"`
	Estimate   dist        `json:"estimate"`
	Err        float64     `json:"err"`
	Gain       float64     `json:"gain"`
	Reason     string      `json:"reason"`
	Truncated  bool        `json:"truncated"`
	Cut        []string    `json:"cut,omitempty"`
	Direct     routeDirect `json:"direct"`
	Chain      *routeChain `json:"chain"`
	Generation string      `json:"generation"`
	Arm        string      `json:"arm,omitempty"`
	Propensity *float64    `json:"propensity,omitempty"`
}

type routeError struct {
	ID    *string `json:"id"`
	Error string  `json:"error"`
}

func newRouteLine(q routeQuery, d router.Decision) routeLine {
	l := routeLine{
		ID: q.ID, From: q.From, Value: q.Value, To: q.To,
		Mode:       d.Mode.String(),
		Estimate:   dist{d.Values, d.Estimate},
		Err:        d.Err,
		Gain:       d.Gain,
		Reason:     d.Reason.Code,
		Truncated:  d.Truncated,
		Cut:        d.Cut.Names(),
		Direct:     routeDirect{Estimate: dist{d.Values, d.Direct.Estimate}, Err: d.Direct.Err, Support: d.Direct.Support},
		Generation: fmt.Sprintf("%016x", d.Generation),
		Arm:        d.Arm,
	}
	if d.Arm != "" || d.Propensity != 1 {
		p := d.Propensity
		l.Propensity = &p
	}
	if d.Chain != nil {
		l.Chain = &routeChain{
			Bridges:    d.Chain.Bridges,
			Estimate:   dist{d.Values, d.Chain.Estimate},
			Err:        d.Chain.Err,
			MinSupport: d.Chain.MinSupport,
		}
	}
	return l
}

// batchItem is one input line on its way through the workers.
type batchItem struct {
	line  int
	q     routeQuery
	idSet bool
	err   error // parse error, or the decision error
	out   []byte
}

// parseQueryLine decodes one batch line strictly: unknown fields, missing
// fields and trailing data are errors naming the line and the field.
func parseQueryLine(b []byte, line int) (routeQuery, bool, error) {
	var raw map[string]json.RawMessage
	var q routeQuery
	if err := json.Unmarshal(b, &raw); err != nil {
		return q, false, fmt.Errorf("line %d: not a JSON object: %v", line, err)
	}
	_, idSet := raw["id"]
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&q); err != nil {
		var te *json.UnmarshalTypeError
		if errors.As(err, &te) {
			return q, false, fmt.Errorf("line %d: field %q: want a %s, got %s", line, te.Field, te.Type, te.Value)
		}
		return q, false, fmt.Errorf("line %d: %v", line, err)
	}
	for _, f := range []struct{ name, v string }{{"id", q.ID}, {"from", q.From}, {"value", q.Value}, {"to", q.To}} {
		if _, ok := raw[f.name]; !ok {
			return q, idSet, fmt.Errorf("line %d: missing field %q", line, f.name)
		}
		if f.v == "" && f.name != "id" {
			return q, idSet, fmt.Errorf("line %d: field %q is empty", line, f.name)
		}
	}
	return q, idSet, nil
}

// routeBatch decides every line of in and writes the results in input
// order. It processes chunks of lines with o.workers goroutines so memory
// stays bounded. It returns the number of failed and total lines; err is
// only for fatal I/O errors.
func routeBatch(ctx context.Context, r *router.Router, in io.Reader, name string, out io.Writer, o routeOptions) (failed, total int, err error) {
	br := bufio.NewReaderSize(in, 64<<10)
	const chunk = 1024
	items := make([]batchItem, 0, chunk)
	lineNo := 0
	eof := false
	for !eof {
		items = items[:0]
		for len(items) < chunk {
			b, tooLong, rerr := readLine(br, o.maxLineBytes)
			if rerr == io.EOF && b == nil && !tooLong {
				eof = true
				break
			}
			if rerr != nil && rerr != io.EOF {
				return failed, total, fmt.Errorf("%s: %w", name, rerr)
			}
			lineNo++
			it := batchItem{line: lineNo}
			switch {
			case tooLong:
				it.err = fmt.Errorf("line %d: longer than %d bytes", lineNo, o.maxLineBytes)
			case len(bytes.TrimSpace(b)) == 0:
				it.err = fmt.Errorf("line %d: empty line", lineNo)
			default:
				it.q, it.idSet, it.err = parseQueryLine(b, lineNo)
			}
			items = append(items, it)
			if rerr == io.EOF {
				eof = true
				break
			}
		}
		decideChunk(ctx, r, items, o)
		for i := range items {
			it := &items[i]
			total++
			if it.err != nil {
				failed++
			}
			if _, werr := out.Write(it.out); werr != nil {
				return failed, total, werr
			}
		}
	}
	return failed, total, nil
}

// readLine returns the next line without its newline. A line longer than
// max is consumed and reported as tooLong. At the end it returns io.EOF,
// with the last line's bytes when it had no final newline.
func readLine(br *bufio.Reader, max int) (line []byte, tooLong bool, err error) {
	var buf []byte
	for {
		frag, e := br.ReadSlice('\n')
		if !tooLong {
			if len(buf)+len(frag) > max+1 { // +1: the newline
				tooLong, buf = true, nil
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

// decideChunk decides the items on o.workers goroutines and renders each
// item's output line.
func decideChunk(ctx context.Context, r *router.Router, items []batchItem, o routeOptions) {
	work := func(it *batchItem) {
		if it.err == nil {
			d, err := decideOne(ctx, r, it.q, o.timeout)
			if err != nil {
				it.err = fmt.Errorf("line %d: %w", it.line, err)
			} else if b, err := json.Marshal(newRouteLine(it.q, d)); err != nil {
				it.err = fmt.Errorf("line %d: %w", it.line, err)
			} else {
				it.out = append(b, '\n')
				return
			}
		}
		e := routeError{Error: it.err.Error()}
		if it.idSet {
			id := it.q.ID
			e.ID = &id
		}
		b, _ := json.Marshal(e)
		it.out = append(b, '\n')
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
func explain(w io.Writer, q routeQuery, d router.Decision, cfg router.Config) error {
	var b strings.Builder
	fmtDist := func(p []float64) string {
		if len(p) == 0 {
			return "(none)"
		}
		parts := make([]string, 0, len(p))
		for i, v := range p {
			if i < len(d.Values) {
				parts = append(parts, fmt.Sprintf("%s %.3f", d.Values[i], v))
			}
		}
		return strings.Join(parts, "  ")
	}
	fmt.Fprintf(&b, "query      %s = %s  →  %s\n", q.From, q.Value, q.To)
	mode := d.Mode.String()
	if d.Mode == router.ModeChain && len(d.Bridges) > 0 {
		mode += " via " + strings.Join(d.Bridges, " → ")
	}
	fmt.Fprintf(&b, "decision   %s\n", mode)
	fmt.Fprintf(&b, "reason     %s: %s\n", d.Reason.Code, d.Reason.Text)
	if len(d.Estimate) > 0 {
		fmt.Fprintf(&b, "estimate   P(%s) = %s   (expected error %.4g)\n", q.To, fmtDist(d.Estimate), d.Err)
	}
	if d.Direct.Estimate != nil {
		fmt.Fprintf(&b, "direct     %s   error %.4g, support %d contexts\n", fmtDist(d.Direct.Estimate), d.Direct.Err, d.Direct.Support)
	}
	if d.Chain != nil {
		path := append(append([]string{q.From}, d.Chain.Bridges...), q.To)
		fmt.Fprintf(&b, "chain      %s\n", strings.Join(path, " → "))
		fmt.Fprintf(&b, "           %s   error %.4g, weakest edge %d contexts\n", fmtDist(d.Chain.Estimate), d.Chain.Err, d.Chain.MinSupport)
		rule := fmt.Sprintf("direct error − chain error = %.4g", d.Gain)
		if cfg.UtilityLambda > 0 {
			rule += fmt.Sprintf("; utility = %.4g·gain − %.4g·%d = %.4g", cfg.UtilityLambda, cfg.HopCost, len(d.Chain.Bridges), d.Score)
		}
		fmt.Fprintf(&b, "gain       %s (threshold %.4g)\n", rule, cfg.GainThreshold)
	} else if d.Reason.Code == router.ReasonNoChain {
		fmt.Fprintf(&b, "chain      none within %d bridges\n", cfg.MaxBridges)
	}
	if d.Truncated {
		fmt.Fprintf(&b, "search     truncated by %s (beam %d, candidates %d, budget %d); a better chain may exist\n",
			strings.Join(d.Cut.Names(), ", "), cfg.Beam, cfg.MaxCandidates, cfg.ExpansionBudget)
	} else if d.Reason.Code != router.ReasonUnknownEntityFallback && d.Reason.Code != router.ReasonUnknownValueFallback {
		fmt.Fprintf(&b, "search     complete: no bound was hit\n")
	}
	if d.Arm != "" || d.Propensity != 1 {
		fmt.Fprintf(&b, "policy     arm %q, propensity %.4g, explored %v\n", d.Arm, d.Propensity, d.Explored)
	}
	fmt.Fprintf(&b, "index      generation %016x\n", d.Generation)
	_, err := io.WriteString(w, b.String())
	return err
}
