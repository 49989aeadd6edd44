package eval

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"sync"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
)

// Defaults of Config.
const (
	// DefaultContexts is the corpus size of an eval world.
	DefaultContexts = 50000
	// DefaultCondition is the condition the accuracy figures are measured on.
	DefaultCondition = world.CondLocalGeometric
)

// Names of the query sets and estimators, as they appear in JSON and tables.
const (
	SetHeldOut   = "heldout"
	SetSupported = "supported"

	EstDirect      = "direct"
	EstChain       = "chain"
	EstRouted      = "routed"
	EstIdeal       = "ideal"
	EstNegative    = "negative"
	EstSupportOnly = "support_only"
	EstMarginal    = "marginal"
	EstCountChain  = "count_chain"
)

// Estimators lists the estimator names in report order.
func Estimators() []string {
	return []string{EstDirect, EstChain, EstRouted, EstIdeal, EstNegative, EstSupportOnly, EstMarginal, EstCountChain}
}

// ErrConfig reports an invalid Config (unknown condition, negative sizes,
// seeds shared between fitting and evaluation, ...).
var ErrConfig = errors.New("eval: invalid configuration")

// Config describes one eval world. The zero value of each field selects the
// default named beside it.
type Config struct {
	// Condition is a world condition name (world.ConditionNames; default
	// local-geometric).
	Condition string
	// Seed seeds the network, the held-out choice, the corpus and the
	// negative-control bridges (PCG streams derived from it).
	Seed int64
	// World is the network configuration (default world.EvalConfig(): 100
	// binary variables, 100 edges, 30 held-out pairs).
	World *world.Config
	// Contexts is the corpus size (default DefaultContexts).
	Contexts int
	// Beta is the per-hop squared bias β of the Bayes model used by the
	// router and by every chained estimator (default scorer.DefaultBeta;
	// a negative value is an error).
	Beta *float64
	// ModelOptions are passed to scorer.NewBayes after WithBeta (for
	// example scorer.WithMissingSignal).
	ModelOptions []scorer.Option
	// RouterOptions are passed to router.New after WithModel (bounds,
	// thresholds; not WithBeta/WithAlpha, which conflict with WithModel).
	RouterOptions []router.Option
	// MaxBridges is H for the router and for the support-only search
	// (default router.DefaultMaxBridges).
	MaxBridges int
	// Dir, when set, keeps corpus.jsonl, index.hwx, queries.jsonl and
	// truth.jsonl there (see WriteQueries); otherwise a temporary directory
	// is used and removed.
	Dir string
	// Workers is the number of goroutines answering queries (default
	// GOMAXPROCS). Results do not depend on it.
	Workers int
	// KeepQueries stores every answered query in Report.Queries (for
	// fitting and for cross-checks).
	KeepQueries bool
	// Network, when set, is the world to evaluate (for example
	// world.Greenhouse) instead of one generated from World; Seed then only
	// seeds the corpus and the negative-control bridges.
	Network *world.World
	// BuildOptions are passed to graphidx.Compile (for example
	// graphidx.WithProgress).
	BuildOptions []graphidx.BuildOption
}

func (c Config) withDefaults() (Config, world.Condition, error) {
	if c.Condition == "" {
		c.Condition = DefaultCondition
	}
	cond, err := world.ConditionByName(c.Condition)
	if err != nil {
		return c, cond, fmt.Errorf("%w: condition %q: %v", ErrConfig, c.Condition, err)
	}
	if c.World == nil {
		w := world.EvalConfig()
		c.World = &w
	}
	if c.Contexts == 0 {
		c.Contexts = DefaultContexts
	}
	if c.Contexts < 0 {
		return c, cond, fmt.Errorf("%w: contexts = %d", ErrConfig, c.Contexts)
	}
	if c.Beta == nil {
		b := scorer.DefaultBeta
		c.Beta = &b
	}
	if *c.Beta < 0 || math.IsNaN(*c.Beta) || math.IsInf(*c.Beta, 0) {
		return c, cond, fmt.Errorf("%w: beta = %v", ErrConfig, *c.Beta)
	}
	if c.MaxBridges == 0 {
		c.MaxBridges = router.DefaultMaxBridges
	}
	if c.MaxBridges < 0 || c.MaxBridges > router.MaxBridgesLimit {
		return c, cond, fmt.Errorf("%w: max bridges = %d (0..%d)", ErrConfig, c.MaxBridges, router.MaxBridgesLimit)
	}
	if c.Workers <= 0 {
		c.Workers = runtime.GOMAXPROCS(0)
	}
	return c, cond, nil
}

// Scores are the MSEs of every estimator on one query set.
//
// MSE: for a query (s = u → t) with truth p = P(t | s = u) over the K_t
// values of t and an estimate p̂, the query's error is Σ_v (p̂_v − p_v)² / K_t
// (the mean over values; for binary targets it equals (p̂_1 − p_1)²). A
// score is the plain mean of that error over the set's queries.
type Scores struct {
	Direct      float64 `json:"direct"`
	Chain       float64 `json:"chain"`
	Routed      float64 `json:"routed"`
	Ideal       float64 `json:"ideal"`
	Negative    float64 `json:"negative"`
	SupportOnly float64 `json:"support_only"`
	// Marginal answers the target's marginal from the index, smoothed like
	// the model (α = 1), whatever the observed value.
	Marginal float64 `json:"marginal"`
	// CountChain is the simple count chain: fewest bridges, then widest
	// smallest edge support (direct when no chain exists).
	CountChain float64 `json:"count_chain"`
	// N is the number of queries scored.
	N int `json:"n"`
	// Skipped counts queries whose observed value never occurs in the
	// corpus (the index cannot answer them).
	Skipped int `json:"skipped"`
	// ChainShare is the share of scored queries the router answered through
	// a chain.
	ChainShare float64 `json:"chain_share"`
	// ChainFound is the share of scored queries for which the router found
	// any chain.
	ChainFound float64 `json:"chain_found"`
	// IdealHops is the mean number of bridges of the ideal path.
	IdealHops float64 `json:"ideal_hops"`
}

// Get returns the score of the named estimator (NaN for an unknown name).
func (s Scores) Get(est string) float64 {
	switch est {
	case EstDirect:
		return s.Direct
	case EstChain:
		return s.Chain
	case EstRouted:
		return s.Routed
	case EstIdeal:
		return s.Ideal
	case EstNegative:
		return s.Negative
	case EstSupportOnly:
		return s.SupportOnly
	case EstMarginal:
		return s.Marginal
	case EstCountChain:
		return s.CountChain
	}
	return math.NaN()
}

func (s *Scores) set(est string, v float64) {
	switch est {
	case EstDirect:
		s.Direct = v
	case EstChain:
		s.Chain = v
	case EstRouted:
		s.Routed = v
	case EstIdeal:
		s.Ideal = v
	case EstNegative:
		s.Negative = v
	case EstSupportOnly:
		s.SupportOnly = v
	case EstMarginal:
		s.Marginal = v
	case EstCountChain:
		s.CountChain = v
	}
}

// Calibration compares the router's predicted error of the estimate it chose
// (Decision.Err, on the scale Σ_v Var(p̂_v)) with the realised squared error
// Σ_v (p̂_v − p_v)² of that estimate, over all scored queries of a world.
type Calibration struct {
	// Spearman is the rank correlation of predicted and realised errors
	// (Pearson correlation of mid-ranks; Spearman 1904, common practice).
	Spearman float64 `json:"spearman"`
	// MeanRatio is mean(predicted) / mean(realised): 1 is calibrated, above
	// 1 pessimistic, below 1 optimistic.
	MeanRatio float64 `json:"mean_ratio"`
	// N is the number of query pairs used.
	N int `json:"n"`
}

// Report is the result of one world.
type Report struct {
	Condition   string      `json:"condition"`
	Seed        int64       `json:"seed"`
	HeldOut     Scores      `json:"heldout"`
	Supported   Scores      `json:"supported"`
	Calibration Calibration `json:"calibration"`
	// HeldOutPairs and SupportedPairs count the unordered pairs queried
	// (world.PickHeldOut may find fewer qualifying pairs than asked for).
	HeldOutPairs   int `json:"heldout_pairs"`
	SupportedPairs int `json:"supported_pairs"`
	// Beta is the β the world was answered with.
	Beta float64 `json:"beta"`
	// Contexts, Entities and Pairs describe the built index.
	Contexts uint64 `json:"contexts"`
	Entities int    `json:"entities"`
	Pairs    uint64 `json:"pairs"`
	// Timings in seconds.
	BuildSeconds  float64 `json:"build_seconds"`
	AnswerSeconds float64 `json:"answer_seconds"`
	// Queries holds every answered query when Config.KeepQueries is set.
	Queries []QueryResult `json:"-"`
}

// QueryResult is one answered query with every estimate, over the world's
// value indexes of the target.
type QueryResult struct {
	Set       string
	From, To  int // world variable indexes
	Value     int // observed value (world index)
	Truth     []float64
	Est       map[string][]float64
	Mode      router.Mode
	RoutedErr float64 // Decision.Err
	DirectErr float64
	DirectSup uint64
	// FromShare is the observed value's smoothed share among the observed
	// entity's contexts, (c_u + 1)/(Σ c + K) from the index's marginal.
	FromShare    float64
	ChainErr     float64  // best chain's Err (0 without a chain)
	ChainSups    []uint64 // edge supports of the best chain (nil without)
	ChainBridges int
	// ChainSignal is the best chain's signal L = Π_k SignalBound(edge k)
	// (0 without a chain).
	ChainSignal float64
	// ChainPath is the best chain's path in index ids, observed entity,
	// bridges, target (nil without a chain).
	ChainPath []graphidx.EntityID
	// ChainParallel reports that the best chain is a parallel answer
	// (router.ChainResult.Parallel): ChainPath is then s, b1, b2, t, and
	// ChainSups the supports of (s, b1), (b1, t), (s, b2), (b2, t);
	// ChainSignal is the larger of the two routes' signals.
	ChainParallel bool
	IdealBridges  int
}

// SqErr returns Σ_v (p̂_v − p_v)² of the named estimate.
func (q *QueryResult) SqErr(est string) float64 { return sqErr(q.Est[est], q.Truth) }

func sqErr(p, truth []float64) float64 {
	s := 0.0
	for v := range truth {
		d := p[v] - truth[v]
		s += d * d
	}
	return s
}

// Run generates the world of cfg, writes its corpus, builds and opens the
// index with the real builder, and answers every held-out and supported query
// (see the package documentation). It is Prepare, Answer and Close.
func Run(ctx context.Context, cfg Config) (Report, error) {
	b, err := Prepare(ctx, cfg)
	if err != nil {
		return Report{}, err
	}
	defer b.Close()
	return b.Answer(ctx, cfg.Beta, cfg.RouterOptions...)
}

// Bench is a prepared eval world: the network, its built and opened index,
// and the queries. Answer may be called several times (for example with
// different β while fitting). A Bench is safe for concurrent Answer calls.
type Bench struct {
	cfg      Config
	World    *world.World
	Index    *graphidx.Index
	dir      string
	rmDir    bool
	queries  []query
	adj      [][]nb // index adjacency with supports, by index id
	ids      []graphidx.EntityID
	build    time.Duration
	contexts uint64
}

type nb struct {
	id  graphidx.EntityID
	sup uint64
}

type query struct {
	set      string
	from, to int
	value    int
}

// Prepare generates the world, writes the corpus (world.WriteCorpus) to
// Dir/corpus.jsonl, reads it back with corpus.Open (strict), compiles
// and writes the index (graphidx.Compile, graphidx.WriteFile) and opens it
// (graphidx.Open). The caller must Close the Bench.
func Prepare(ctx context.Context, cfg Config) (*Bench, error) {
	cfg, cond, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	start := time.Now()
	w := cfg.Network
	if w == nil {
		if w, err = world.Generate(*cfg.World, cfg.Seed); err != nil {
			return nil, fmt.Errorf("eval: generate world (seed %d): %w", cfg.Seed, err)
		}
	}
	b := &Bench{cfg: cfg, World: w, dir: cfg.Dir}
	if b.dir == "" {
		if b.dir, err = os.MkdirTemp("", "hopwise-eval-"); err != nil {
			return nil, fmt.Errorf("eval: %w", err)
		}
		b.rmDir = true
	} else if err := os.MkdirAll(b.dir, 0o755); err != nil {
		return nil, fmt.Errorf("eval: %w", err)
	}
	ok := false
	defer func() {
		if !ok {
			b.Close()
		}
	}()
	corpus := filepath.Join(b.dir, "corpus.jsonl")
	if err := writeCorpus(ctx, w, corpus, cfg.Contexts, cond, cfg.Seed); err != nil {
		return nil, err
	}
	idxPath := filepath.Join(b.dir, "index.hwx")
	if err := buildIndex(ctx, corpus, idxPath, cfg.BuildOptions...); err != nil {
		return nil, err
	}
	if b.Index, err = graphidx.Open(idxPath); err != nil {
		return nil, fmt.Errorf("eval: open index %s: %w", idxPath, err)
	}
	b.build = time.Since(start)
	b.contexts = b.Index.NumContexts()
	if err := b.mapEntities(); err != nil {
		return nil, err
	}
	b.queries = makeQueries(w)
	if cfg.Dir != "" {
		if err := b.WriteQueries(cfg.Dir); err != nil {
			return nil, err
		}
	}
	ok = true
	return b, nil
}

func writeCorpus(ctx context.Context, w *world.World, path string, n int, cond world.Condition, seed int64) error {
	f, err := os.Create(path)
	if err != nil {
		return fmt.Errorf("eval: %w", err)
	}
	bw := bufio.NewWriterSize(f, 1<<16)
	// The corpus stream gets its own seed, distinct from the network's.
	if _, err := w.WriteCorpus(ctx, bw, n, cond, seed^0x5eed_c0de); err != nil {
		f.Close()
		return fmt.Errorf("eval: write corpus %s: %w", path, err)
	}
	if err := bw.Flush(); err != nil {
		f.Close()
		return fmt.Errorf("eval: write corpus %s: %w", path, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("eval: write corpus %s: %w", path, err)
	}
	return nil
}

func buildIndex(ctx context.Context, corpusPath, out string, opts ...graphidx.BuildOption) error {
	r, closer, err := corpus.Open(corpusPath, corpus.FormatJSONL, "", graphidx.WithPolicy(graphidx.Strict))
	if err != nil {
		return fmt.Errorf("eval: open corpus: %w", err)
	}
	defer closer.Close()
	comp, _, err := graphidx.Compile(ctx, r, opts...)
	if err != nil {
		return fmt.Errorf("eval: compile %s: %w", corpusPath, err)
	}
	defer comp.Close()
	if err := graphidx.WriteFile(out, comp); err != nil {
		return fmt.Errorf("eval: write index %s: %w", out, err)
	}
	return nil
}

// mapEntities resolves world variables to index ids and loads the adjacency
// with supports.
func (b *Bench) mapEntities() error {
	n := b.World.NumVars()
	b.ids = make([]graphidx.EntityID, n)
	for v := range n {
		id, ok := b.Index.Lookup(b.World.Name(v))
		if !ok {
			return fmt.Errorf("eval: variable %s never observed in the corpus (seed %d)", b.World.Name(v), b.cfg.Seed)
		}
		b.ids[v] = id
	}
	ne := b.Index.NumEntities()
	b.adj = make([][]nb, ne)
	for a := range ne {
		id := graphidx.EntityID(a)
		for _, c := range b.Index.Neighbors(id) {
			ps, ok := b.Index.Pair(id, c)
			if !ok {
				continue
			}
			b.adj[a] = append(b.adj[a], nb{c, ps.Support()})
		}
	}
	return nil
}

// makeQueries lists the held-out pairs, then the supported pairs, each in both
// directions and for every value of the observed endpoint.
func makeQueries(w *world.World) []query {
	var qs []query
	add := func(set string, pairs [][2]int) {
		for _, p := range pairs {
			for _, d := range [][2]int{{p[0], p[1]}, {p[1], p[0]}} {
				for u := range w.Card(d[0]) {
					qs = append(qs, query{set: set, from: d[0], to: d[1], value: u})
				}
			}
		}
	}
	add(SetHeldOut, w.HeldOut())
	add(SetSupported, w.Supported())
	return qs
}

// Close closes the index and removes the temporary directory (a Config.Dir is
// kept).
func (b *Bench) Close() error {
	var err error
	if b.Index != nil {
		err = b.Index.Close()
		b.Index = nil
	}
	if b.rmDir {
		if e := os.RemoveAll(b.dir); e != nil && err == nil {
			err = e
		}
		b.rmDir = false
	}
	return err
}

// Dir returns the directory holding corpus.jsonl and index.hwx.
func (b *Bench) Dir() string { return b.dir }

// Answer answers every query with β (nil: the Config's β) and the given
// router options over the prepared index, and scores the estimators.
func (b *Bench) Answer(ctx context.Context, beta *float64, ropts ...router.Option) (Report, error) {
	bt := *b.cfg.Beta
	if beta != nil {
		bt = *beta
	}
	model, err := scorer.NewBayes(append([]scorer.Option{scorer.WithBeta(bt)}, b.cfg.ModelOptions...)...)
	if err != nil {
		return Report{}, fmt.Errorf("eval: %w", err)
	}
	return b.AnswerModel(ctx, model, ropts...)
}

// AnswerModel is Answer with the given Bayes model (its β is reported).
func (b *Bench) AnswerModel(ctx context.Context, model *scorer.Bayes, ropts ...router.Option) (Report, error) {
	start := time.Now()
	bt := model.HopBias()
	opts := append([]router.Option{router.WithModel(model), router.WithMaxBridges(b.cfg.MaxBridges)}, ropts...)
	// The router owns the graph it is given and closes it on Close; the
	// wrapper hides Close so that the Bench keeps ownership of the index.
	rt, err := router.New(borrowed{b.Index}, opts...)
	if err != nil {
		return Report{}, fmt.Errorf("eval: router: %w", err)
	}
	defer rt.Close()

	res := make([]QueryResult, len(b.queries))
	skip := make([]bool, len(b.queries))
	errs := make([]error, b.cfg.Workers)
	var next int
	var mu sync.Mutex
	var wg sync.WaitGroup
	for wk := range b.cfg.Workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			ws := scorer.NewWorkspace()
			for {
				mu.Lock()
				i := next
				next++
				mu.Unlock()
				if i >= len(b.queries) {
					return
				}
				if err := ctx.Err(); err != nil {
					errs[wk] = err
					return
				}
				q := b.queries[i]
				// The negative control draws from a stream of its own per
				// query, so results do not depend on the worker schedule.
				rng := rand.New(rand.NewPCG(uint64(b.cfg.Seed), 0x6e65_6700_0000+uint64(i)))
				r, ok, err := b.answer(ctx, rt, model, ws, rng, q)
				if err != nil {
					errs[wk] = err
					return
				}
				res[i], skip[i] = r, !ok
			}
		}()
	}
	wg.Wait()
	if err := errors.Join(errs...); err != nil {
		return Report{}, err
	}
	rep := Report{
		Condition: b.cfg.Condition, Seed: b.cfg.Seed, Beta: bt,
		Contexts: b.contexts, Entities: b.Index.NumEntities(), Pairs: b.Index.NumPairs(),
		BuildSeconds: b.build.Seconds(),
		HeldOutPairs: len(b.World.HeldOut()), SupportedPairs: len(b.World.Supported()),
	}
	var kept []QueryResult
	for i := range res {
		if skip[i] {
			if b.queries[i].set == SetHeldOut {
				rep.HeldOut.Skipped++
			} else {
				rep.Supported.Skipped++
			}
			continue
		}
		kept = append(kept, res[i])
	}
	rep.HeldOut = score(kept, SetHeldOut, rep.HeldOut.Skipped)
	rep.Supported = score(kept, SetSupported, rep.Supported.Skipped)
	rep.Calibration = calibrate(kept)
	rep.AnswerSeconds = time.Since(start).Seconds()
	if b.cfg.KeepQueries {
		rep.Queries = kept
	}
	return rep, nil
}

// answer runs one query through the router and the scorer. ok is false when
// the observed value never occurs in the corpus.
func (b *Bench) answer(ctx context.Context, rt *router.Router, model scorer.Model, ws *scorer.Workspace, rng *rand.Rand, q query) (QueryResult, bool, error) {
	w := b.World
	s, t := b.ids[q.from], b.ids[q.to]
	label := w.Labels(q.from)[q.value]
	u, ok := b.Index.ValueIndex(s, label)
	if !ok {
		return QueryResult{}, false, nil
	}
	truth, err := w.TrueConditional(q.from, q.value, q.to)
	if err != nil {
		if errors.Is(err, world.ErrImpossibleEvidence) {
			return QueryResult{}, false, nil
		}
		return QueryResult{}, false, fmt.Errorf("eval: truth %s=%s → %s: %w", w.Name(q.from), label, w.Name(q.to), err)
	}
	d, err := rt.Decide(ctx, router.Query{From: w.Name(q.from), Value: label, To: w.Name(q.to)})
	if err != nil {
		return QueryResult{}, false, fmt.Errorf("eval: route %s=%s → %s: %w", w.Name(q.from), label, w.Name(q.to), err)
	}
	// Map the index's value order of the target onto the world's.
	tl := w.Labels(q.to)
	conv := func(p []float64, labels []string) []float64 {
		out := make([]float64, len(tl))
		for i, l := range labels {
			for j := range tl {
				if tl[j] == l && i < len(p) {
					out[j] = p[i]
				}
			}
		}
		return out
	}
	idxLabels := b.Index.Values(t)
	r := QueryResult{
		Set: q.set, From: q.from, To: q.to, Value: q.value, Truth: truth,
		Est:       make(map[string][]float64, 6),
		Mode:      d.Mode,
		RoutedErr: d.Err, DirectErr: d.Direct.Err, DirectSup: d.Direct.Support,
	}
	r.FromShare = smoothedMarginal(b.Index.Marginal(s))[u]
	r.Est[EstDirect] = conv(d.Direct.Estimate, d.Values)
	r.Est[EstRouted] = conv(d.Estimate, d.Values)
	if d.Chain != nil {
		r.Est[EstChain] = conv(d.Chain.Estimate, d.Values)
		r.ChainErr = d.Chain.Err
		r.ChainBridges = len(d.Chain.Bridges)
		path := make([]graphidx.EntityID, 0, len(d.Chain.Bridges)+2)
		path = append(path, s)
		for _, name := range d.Chain.Bridges {
			id, ok := b.Index.Lookup(name)
			if !ok {
				return r, false, fmt.Errorf("eval: router bridge %q not in the index", name)
			}
			path = append(path, id)
		}
		path = append(path, t)
		r.ChainPath = path
		r.ChainParallel = d.Chain.Parallel
		if d.Chain.Parallel && len(path) == 4 {
			b1, b2 := path[1], path[2]
			r.ChainSups = []uint64{b.support(s, b1), b.support(b1, t), b.support(s, b2), b.support(b2, t)}
			if bm, ok := model.(*scorer.Bayes); ok {
				for _, br := range path[1:3] {
					r.ChainSignal = max(r.ChainSignal, b.pathSignal(bm, []graphidx.EntityID{s, br, t}))
				}
			}
		} else {
			r.ChainSups = b.pathSupports(path)
			if bm, ok := model.(*scorer.Bayes); ok {
				r.ChainSignal = b.pathSignal(bm, path)
			}
		}
	} else {
		r.Est[EstChain] = r.Est[EstDirect]
	}

	chain := func(bridges []int) ([]float64, error) {
		ids := make([]graphidx.EntityID, len(bridges))
		for i, v := range bridges {
			ids[i] = b.ids[v]
		}
		e, err := model.Chain(ws, b.Index, s, u, ids, t)
		if err != nil {
			return nil, err
		}
		return conv(e.Dist, idxLabels), nil
	}
	ideal, err := w.MinimalSeparatorPath(q.from, q.to)
	if err != nil {
		return r, false, fmt.Errorf("eval: ideal path %s → %s: %w", w.Name(q.from), w.Name(q.to), err)
	}
	r.IdealBridges = len(ideal)
	if r.Est[EstIdeal], err = chain(ideal); err != nil {
		return r, false, fmt.Errorf("eval: ideal chain %s → %s: %w", w.Name(q.from), w.Name(q.to), err)
	}
	if rng == nil {
		rng = rand.New(rand.NewPCG(1, 2))
	}
	neg, err := w.RandomBridges(rng, max(1, len(ideal)), q.from, q.to)
	if err != nil {
		return r, false, fmt.Errorf("eval: negative bridges: %w", err)
	}
	if r.Est[EstNegative], err = chain(neg); err != nil {
		return r, false, fmt.Errorf("eval: negative chain: %w", err)
	}
	for _, c := range []struct {
		est    string
		fewest bool
	}{{EstSupportOnly, false}, {EstCountChain, true}} {
		so := b.widestChain(s, t, b.cfg.MaxBridges, c.fewest)
		if so == nil {
			r.Est[c.est] = r.Est[EstDirect]
			continue
		}
		e, err := model.Chain(ws, b.Index, s, u, so, t)
		if err != nil {
			return r, false, fmt.Errorf("eval: %s chain: %w", c.est, err)
		}
		r.Est[c.est] = conv(e.Dist, idxLabels)
	}
	r.Est[EstMarginal] = conv(smoothedMarginal(b.Index.Marginal(t)), idxLabels)
	return r, true, nil
}

// smoothedMarginal returns (c_v + 1)/(Σ c + K), the marginal the Bayes
// model's empirical-Bayes prior is centred on (α = 1).
func smoothedMarginal(c []uint64) []float64 {
	out := make([]float64, len(c))
	tot := float64(len(c))
	for _, x := range c {
		tot += float64(x)
	}
	for v, x := range c {
		out[v] = (float64(x) + 1) / tot
	}
	return out
}

// borrowed lends the index to a router without its Close method. It
// forwards the optional methods the router uses (marginals for the direct
// estimate's prior, batched pair look-ups, the ranked prefix).
type borrowed struct{ *graphidx.Index }

// Close shadows the index's Close so that the router never closes the
// Bench's index (without an error result it is not an io.Closer, which is
// what the router retires).
func (borrowed) Close() {}

func (b *Bench) support(a, c graphidx.EntityID) uint64 {
	l := b.adj[a]
	lo, hi := 0, len(l)
	for lo < hi {
		m := (lo + hi) / 2
		if l[m].id < c {
			lo = m + 1
		} else {
			hi = m
		}
	}
	if lo < len(l) && l[lo].id == c {
		return l[lo].sup
	}
	return 0
}

// pathSignal is the product of the model's signal bounds along path's
// edges (bm.SignalBound), 0 when an edge was never observed.
func (b *Bench) pathSignal(bm *scorer.Bayes, path []graphidx.EntityID) float64 {
	sig := 1.0
	for i := 0; i+1 < len(path); i++ {
		ps, ok := b.Index.Pair(path[i], path[i+1])
		if !ok {
			return 0
		}
		sig *= bm.SignalBound(ps)
	}
	return sig
}

func (b *Bench) pathSupports(path []graphidx.EntityID) []uint64 {
	out := make([]uint64, len(path)-1)
	for i := range out {
		out[i] = b.support(path[i], path[i+1])
	}
	return out
}

func score(qs []QueryResult, set string, skipped int) Scores {
	var s Scores
	s.Skipped = skipped
	sums := make(map[string]float64)
	for i := range qs {
		q := &qs[i]
		if q.Set != set {
			continue
		}
		s.N++
		k := float64(len(q.Truth))
		for _, e := range Estimators() {
			sums[e] += q.SqErr(e) / k
		}
		if q.Mode == router.ModeChain {
			s.ChainShare++
		}
		if q.ChainSups != nil {
			s.ChainFound++
		}
		s.IdealHops += float64(q.IdealBridges)
	}
	if s.N == 0 {
		for _, e := range Estimators() {
			s.set(e, math.NaN())
		}
		return s
	}
	n := float64(s.N)
	for _, e := range Estimators() {
		s.set(e, sums[e]/n)
	}
	s.ChainShare /= n
	s.ChainFound /= n
	s.IdealHops /= n
	return s
}

func calibrate(qs []QueryResult) Calibration {
	pred := make([]float64, len(qs))
	real := make([]float64, len(qs))
	for i := range qs {
		pred[i] = qs[i].RoutedErr
		real[i] = qs[i].SqErr(EstRouted)
	}
	return Calibration{Spearman: Spearman(pred, real), MeanRatio: meanRatio(pred, real), N: len(qs)}
}
