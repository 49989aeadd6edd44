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
	"runtime"
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
            "weakest_link_support":n}|null,
   "generation":"<hex>"}
with "cut":["beam"|"candidates"|"budget"|"deadline",...] added when truncated.
sq_error_sum is the expected squared error summed over the target's values.
On a presence-only index there is no distribution: "estimate" is absent and
the figures are "error_proxy" (error_measure "support-proxy"), the support
model's v0/(support+n0) summed over links plus β per bridge, which ranks
answers by co-occurrence evidence and is not an error of any probability.
Estimates cover every value of the target, in the index's value order; a
decision from a configured --fallback has neither estimate nor error figure.
A text line gives {"id","text","presence_only","mentions":[...],
"decisions":[{<view>,"plan":{...},"prompt":"..."}],"dropped":n}. A bad line
gives {"id":...,"error":"line N: ..."} and the batch goes on. Decisions run on
--workers goroutines; output order is always input order.

Settings come from --config FILE.json (the router.Config format, also
written by "hopwise tune") and are overridden by the flags given explicitly.
Exit status: 0 when every query was answered, 2 when some failed, 1 on a
fatal error (index, config, flags, I/O).`,
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
	f.IntVar(&o.workers, "workers", runtime.GOMAXPROCS(0), "batch: goroutines deciding in parallel")
	f.DurationVar(&o.timeout, "timeout", 0, "deadline per decision (0: none); a cut search is reported as truncated")
	f.Float64Var(&o.gainThreshold, "gain-threshold", def.GainThreshold, "τ_gain: route chain when gain ≥ τ")
	f.IntVar(&o.maxBridges, "max-bridges", def.MaxBridges, "H: most bridges in a chain (0-3)")
	f.IntVar(&o.beam, "beam", def.Beam, "B: beam width of each search layer")
	f.IntVar(&o.maxCandidates, "max-candidates", def.MaxCandidates, "k: chains scored exactly")
	f.Float64Var(&o.alpha, "alpha", def.Alpha, "Dirichlet pseudo-count α")
	f.Float64Var(&o.beta, "beta", def.Beta, "per-hop squared bias β")
	f.StringVar(&o.fallback, "fallback", def.Fallback, "unknown endpoints: error, direct or chain")
	f.IntVar(&o.budget, "budget", def.ExpansionBudget, "expansion budget per search")
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
	set("fallback", func() { c.Fallback = o.fallback })
	set("budget", func() { c.ExpansionBudget = o.budget })
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
	if o.workers < 1 {
		return fmt.Errorf("route: --workers must be ≥ 1, got %d", o.workers)
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
	if o.lexicon != "" {
		if o.tp, err = newTextPlanner(o.lexicon, o.chainTemplate, o.directTemplate, cfg); err != nil {
			return err
		}
	}
	ix, err := graphidx.Open(o.index)
	if err != nil {
		return err
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

	if text {
		return o.tp.runSingle(ctx, r, out, o)
	}
	if single {
		q := routeQuery{ID: "", From: o.from, Value: o.value, To: o.to, Key: o.key}
		d, err := decideSingle(ctx, r, &q, o.timeout)
		if err != nil {
			if o.json {
				line, _ := json.Marshal(routeError{ID: nil, Error: err.Error()})
				out.Write(append(line, '\n'))
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
				it.q, it.idSet, it.err = parseRouteLine(b, lineNo)
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
		if it.err == nil && it.q.Text != "" {
			if it.out, it.err = o.tp.batchLine(ctx, r, it.q, it.line, o); it.out != nil {
				return
			}
			it.err = fmt.Errorf("line %d: %w", it.line, it.err)
		}
		if it.err == nil {
			d, err := decideOne(ctx, r, it.q, o.timeout)
			if err != nil {
				it.err = fmt.Errorf("line %d: %w", it.line, err)
			} else if b, err := json.Marshal(newRouteLine(it.q, d, r.ErrorMeasure())); err != nil {
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
func explain(w io.Writer, q routeQuery, d router.Decision, cfg router.Config, m router.ErrorMeasure) error {
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
		path := append(append([]string{q.From}, d.Chain.Bridges...), q.To)
		fmt.Fprintf(&b, "chain      %s\n", strings.Join(path, " → "))
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
