package router

import (
	"context"
	"fmt"
	"io"
	"runtime"
	"sync"
	"sync/atomic"
	"unsafe"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// Router answers Decide calls against the current index. It owns the graphs
// it is given: a graph replaced by Swap, or current at Close, is retired —
// its Close method (when it implements io.Closer) runs exactly once, after
// the last in-flight decision that uses it has finished.
type Router struct {
	cur    atomic.Pointer[handle]
	cfg    atomic.Pointer[settings]
	cache  *decisionCache // nil when disabled
	seq    atomic.Uint64
	mu     sync.Mutex // serialises Swap, Reconfigure and Close (writers only)
	closed atomic.Bool
	pool   sync.Pool
	retire func(old Graph, closeErr error)
}

// handle is one index generation held by the router, reference counted.
// refs counts the router's own reference plus in-flight decisions; when it
// reaches zero it can never be acquired again.
type handle struct {
	g    Graph
	pb   PairBatcher           // g's batch look-up, or nil
	hp   HintedPairBatcher     // g's hinted batch look-up, or nil
	rb   RankedPairBatcher     // g's ranked batch look-up, or nil
	rpf  RankedPrefetcher      // g's ranked-list prefetch, or nil
	rtp  RankedTablePrefetcher // g's table-reference prefetch, or nil
	epf  EntityPrefetcher      // g's entity-record prefetch, or nil
	big  bool                  // g has at least touchMinEntities entities (its records are not all in cache)
	l2   TwoLookuper           // g's two-name look-up, or nil
	na   NameAppender          // g's name append, or nil
	rp   int                   // g's RankPrefix, or 0
	seq  uint64
	gen  uint64
	refs atomic.Int64
	once sync.Once
	r    *Router

	// presence: g is presence-only (scorer.PresenceOnly); see modelFor.
	presence bool
}

// tryAcquire takes a reference unless the handle is already dead.
func (h *handle) tryAcquire() bool {
	for {
		n := h.refs.Load()
		if n <= 0 {
			return false
		}
		if h.refs.CompareAndSwap(n, n+1) {
			return true
		}
	}
}

func (h *handle) release() {
	if h.refs.Add(-1) == 0 {
		h.once.Do(func() {
			var err error
			if c, ok := h.g.(io.Closer); ok {
				err = c.Close()
			}
			if h.r.retire != nil {
				h.r.retire(h.g, err)
			}
		})
	}
}

// New returns a router over g. Options are validated; a bad option returns
// an error wrapping ErrBadOption.
func New(g Graph, opts ...Option) (*Router, error) {
	if g == nil {
		return nil, fmt.Errorf("%w: nil graph", ErrBadOption)
	}
	st, err := buildSettings(defaultSettings(), opts)
	if err != nil {
		return nil, err
	}
	st.gen = 1
	r := &Router{}
	r.pool.New = func() any { return newScratch() }
	if st.cacheSize > 0 {
		r.cache, err = newDecisionCache(st.cacheSize, runtime.GOMAXPROCS(0))
		if err != nil {
			return nil, fmt.Errorf("%w: cache: %v", ErrBadOption, err)
		}
	}
	r.cfg.Store(&st)
	r.cur.Store(r.newHandle(g))
	return r, nil
}

// NewWithRetireHook is New with a callback run once per retired graph,
// after its Close (if any) with that error. The hook runs outside the
// router's locks, on the goroutine that released the last reference.
func NewWithRetireHook(g Graph, hook func(old Graph, closeErr error), opts ...Option) (*Router, error) {
	r, err := New(g, opts...)
	if err != nil {
		return nil, err
	}
	r.retire = hook
	return r, nil
}

func (r *Router) newHandle(g Graph) *handle {
	h := &handle{g: g, seq: r.seq.Add(1), gen: g.Generation(), r: r}
	h.pb, _ = g.(PairBatcher)
	h.hp, _ = g.(HintedPairBatcher)
	h.rb, _ = g.(RankedPairBatcher)
	h.rpf, _ = g.(RankedPrefetcher)
	h.epf, _ = g.(EntityPrefetcher)
	h.big = g.NumEntities() >= touchMinEntities
	h.rtp, _ = g.(RankedTablePrefetcher)
	h.l2, _ = g.(TwoLookuper)
	h.na, _ = g.(NameAppender)
	h.presence = scorer.PresenceOnly(g)
	if p, ok := g.(interface{ RankPrefix() int }); ok {
		h.rp = p.RankPrefix()
	}
	h.refs.Store(1)
	return h
}

// Swap atomically replaces the index. Decisions that already hold the old
// index finish on it; it is retired (closed) when the last of them returns.
// Cached decisions of the old index are never served again. O(1) plus a
// cache purge.
func (r *Router) Swap(g Graph) error {
	if g == nil {
		return fmt.Errorf("%w: Swap: nil graph", ErrBadOption)
	}
	r.mu.Lock()
	if r.closed.Load() {
		r.mu.Unlock()
		return ErrClosed
	}
	if cur := r.cur.Load(); cur != nil && sameGraph(cur.g, g) {
		r.mu.Unlock()
		return fmt.Errorf("%w: Swap: the graph is already current (retiring it would close it)", ErrBadOption)
	}
	old := r.cur.Swap(r.newHandle(g))
	r.mu.Unlock()
	if r.cache != nil {
		r.cache.purge()
	}
	old.release()
	return nil
}

// sameGraph reports a == b without panicking on non-comparable dynamic
// types (which are then treated as different).
func sameGraph(a, b Graph) (same bool) {
	defer func() {
		if recover() != nil {
			same = false
		}
	}()
	return a == b
}

// Reconfigure applies opts over the current configuration and starts a new
// configuration generation (cached decisions of the old one are not served).
// The cache size is fixed at New; WithCacheSize here is an error.
func (r *Router) Reconfigure(opts ...Option) error {
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.closed.Load() {
		return ErrClosed
	}
	base := r.cfg.Load()
	st, err := buildSettings(*base, opts)
	if err != nil {
		return err
	}
	if st.cacheSize != base.cacheSize {
		return fmt.Errorf("%w: WithCacheSize: the cache size is fixed at New", ErrBadOption)
	}
	st.gen = base.gen + 1
	r.cfg.Store(&st)
	return nil
}

// Close stops the router: later Decide calls return ErrClosed and the
// current graph is retired once in-flight decisions finish. Close is
// idempotent and returns nil.
func (r *Router) Close() error {
	r.mu.Lock()
	if r.closed.Swap(true) {
		r.mu.Unlock()
		return nil
	}
	old := r.cur.Swap(nil)
	r.mu.Unlock()
	if r.cache != nil {
		r.cache.purge()
	}
	if old != nil {
		old.release()
	}
	return nil
}

// Generation returns the current index generation (0 after Close).
func (r *Router) Generation() uint64 {
	if h := r.cur.Load(); h != nil {
		return h.gen
	}
	return 0
}

// CacheLen returns the number of cached decisions.
func (r *Router) CacheLen() int {
	if r.cache == nil {
		return 0
	}
	return r.cache.len()
}

// Decide routes one query. It is safe for concurrent use and never blocks
// on Swap or Reconfigure.
//
// Errors wrap ErrSameEntity (From == To, always an error), ErrUnknownEntity
// or ErrUnknownValue (unless a fallback is configured, see WithFallback: then
// a Decision with Mode = the fallback mode, Reason unknown-entity-fallback or
// unknown-value-fallback, no estimate and Values set when To is known is
// returned with a nil error), ErrClosed, the context's error when ctx is
// done before the search starts, and scorer errors for inconsistent
// statistics. A deadline reached during the search is not an error: the
// decision is returned with Truncated set (and is not cached).
//
// Cost: a cache hit is O(len(names)) with no allocation; a miss is the
// search cost documented in search.go, and allocates only the result: two
// blocks (three with more than eight labels and bridges; see resultBlock)
// plus whatever Graph.Name allocates per bridge (*graphidx.Index: one copy).
func (r *Router) Decide(ctx context.Context, q Query) (Decision, error) {
	st := r.cfg.Load()
	h := r.cur.Load()
	if h == nil {
		return Decision{}, ErrClosed
	}
	if q.From == q.To {
		return Decision{}, fmt.Errorf("%w: %q", ErrSameEntity, q.From)
	}
	if r.cache != nil {
		k := cacheKey{from: q.From, value: q.Value, to: q.To, seq: h.seq, gen: h.gen, cfg: st.gen}
		if c, ok := r.cache.get(&k); ok {
			return st.finish(&c, &q, true), nil
		}
	}
	if err := ctx.Err(); err != nil {
		return Decision{}, err
	}
	for !h.tryAcquire() {
		h = r.cur.Load()
		if h == nil {
			return Decision{}, ErrClosed
		}
	}
	defer h.release()
	c, cacheable, fb, err := r.compute(ctx, h, st, &q)
	if err != nil {
		return Decision{}, err
	}
	if fb != nil {
		return *fb, nil
	}
	if cacheable && r.cache != nil {
		k := cacheKey{from: q.From, value: q.Value, to: q.To, seq: h.seq, gen: h.gen, cfg: st.gen}
		r.cache.add(&k, c)
	}
	return st.finish(&c, &q, false), nil
}

// compute resolves the query and runs the search on the acquired handle.
func (r *Router) compute(ctx context.Context, h *handle, st *settings, q *Query) (core, bool, *Decision, error) {
	g := h.g
	var s, t graphidx.EntityID
	var okS, okT bool
	if h.l2 != nil {
		s, okS, t, okT = h.l2.LookupTwo(q.From, q.To)
	} else {
		s, okS = g.Lookup(q.From)
		t, okT = g.Lookup(q.To)
	}
	if !okS || !okT {
		name := q.From
		if okS {
			name = q.To
		}
		err := fmt.Errorf("%w: %q", ErrUnknownEntity, name)
		if st.fallback == FallbackError {
			return core{}, false, nil, err
		}
		return core{}, false, r.fallback(st, g, h, q, t, okT, ReasonUnknownEntityFallback), nil
	}
	if s == t {
		return core{}, false, nil, fmt.Errorf("%w: %q and %q resolve to one entity", ErrSameEntity, q.From, q.To)
	}
	if h.epf != nil && h.big && (st.hooks == nil || !st.hooks.alt) {
		// The endpoints' records load while the value is looked up and
		// the scratch set up (EntityPrefetcher).
		h.epf.PrefetchEntity(s, endPrefetch)
		h.epf.PrefetchEntity(t, endPrefetch)
	}
	u, okU := g.ValueIndex(s, q.Value)
	if !okU {
		if st.fallback == FallbackError {
			return core{}, false, nil, fmt.Errorf("%w: %q for entity %q", ErrUnknownValue, q.Value, q.From)
		}
		return core{}, false, r.fallback(st, g, h, q, t, true, ReasonUnknownValueFallback), nil
	}

	sc := r.pool.Get().(*scratch)
	defer func() { sc.reset(); r.pool.Put(sc) }()
	model := st.modelFor(h)
	sc.g, sc.model, sc.st, sc.s, sc.t, sc.pb, sc.hp, sc.rb, sc.rankPrefix = g, model, st, s, t, h.pb, h.hp, h.rb, h.rp
	sc.hb = model.HopBias()
	sc.bayes, _ = model.(*scorer.Bayes)
	sc.alt = st.hooks != nil && st.hooks.alt
	sc.rpf, sc.rtp = h.rpf, h.rtp
	if sc.alt { // the eleventh round's A/B: without the table-reference and table prefetches
		sc.rtp = nil
	}
	sc.bud = budget{left: st.budget, nextCheck: deadlinePoll, done: ctx.Done()}
	sc.u = u
	sc.endLists()
	sc.prefetchLayerOffsets()

	dir, err := model.Direct(sc.ws, sc, s, u, t)
	if err != nil {
		return core{}, false, nil, fmt.Errorf("router: direct estimate %q=%q → %q: %w", q.From, q.Value, q.To, err)
	}
	// dir.Dist is borrowed from sc.ws (newScratch): copy it before the
	// next model call.
	sc.ddist = append(sc.ddist[:0], dir.Dist...)
	sc.dirErr = dir.Err
	if dir.Support > 0 {
		// The pair's own counts carry no screening-off bias.
		sc.ref, sc.refVar = sc.ddist, dir.Var
	}
	res := sc.generate()

	// Stage 2: exact scores of the k proxy-best candidates, shortest first,
	// starting from the incumbent: the one-bridge chain scored during
	// generation, or, without direct support, the reference chain (the
	// proxy-cheapest candidate, scored with bias 0). Every other chain's Err
	// adds its squared distance from the reference (search.go). A chain of m
	// bridges has Err ≥ β·m (β = HopBias, charged per bridge; variance and
	// bias are ≥ 0), so its score is at most sc.bound(m); a candidate whose
	// bound cannot beat the best so far is skipped without scoring (exact:
	// ties never replace the best).
	if sc.err == nil && sc.ref == nil {
		if ri := sc.refCand(); ri >= 0 {
			sc.scoreIncumbent(sc.heap[ri])
		}
	}
	if sc.err != nil {
		return core{}, false, nil, fmt.Errorf("router: chain estimate %q → %q: %w", q.From, q.To, sc.err)
	}
	sc.sortCands()
	var bestC cand
	var bestEst struct {
		ok    bool
		err   float64
		score float64
	}
	if sc.inc.ok {
		bestC = sc.inc.c
		bestEst.ok, bestEst.err, bestEst.score = true, sc.inc.err, sc.inc.score
		sc.bestSep = sc.inc.sep
		sc.dist = append(sc.dist[:0], sc.incDist...)
		if st.cfg.ParallelBridges {
			sc.bestWit = append(sc.bestWit[:0], sc.incWit...)
		}
	}
	// The deadline is polled every scorePoll exact scores, so a large
	// candidate limit k cannot outlast it: the chains left unscored are
	// reported as a deadline cut, and the best scored so far stands.
	scored := 0
	for i := range sc.heap {
		cd := &sc.heap[i]
		if bestEst.ok && (sc.bound(int(cd.m)) <= bestEst.score || (sc.inc.ok && cd.m == sc.inc.c.m && cd.b == sc.inc.c.b)) {
			continue
		}
		if scored%scorePoll == scorePoll-1 && ctxDone(ctx) {
			res.truncated, res.deadline = true, true
			res.cut |= CutDeadline
			break
		}
		scored++
		sc.path = append(sc.path[:0], cd.b[:cd.m]...)
		est, err := model.Chain(sc.ws, sc, s, u, sc.path, t)
		if err != nil {
			return core{}, false, nil, fmt.Errorf("router: chain estimate %q → %q: %w", q.From, q.To, err)
		}
		// est.Dist is borrowed from sc.ws until the next model call.
		var beat *float64
		if bestEst.ok {
			beat = &bestEst.score
		}
		e, score, err := sc.chainScore(est, int(cd.m), beat)
		if err != nil {
			return core{}, false, nil, fmt.Errorf("router: chain estimate %q → %q: %w", q.From, q.To, err)
		}
		if !bestEst.ok || score > bestEst.score {
			bestC = *cd
			bestEst.ok, bestEst.err, bestEst.score = true, e, score
			sc.bestSep = sc.lastSep
			sc.dist = append(sc.dist[:0], est.Dist...)
			if st.cfg.ParallelBridges {
				sc.bestWit = append(sc.bestWit[:0], sc.ws.SeparationWitnesses()...)
			}
		}
	}

	// The parallel answer through the two strongest one-bridge candidates
	// (parallel.go) competes with the best chain on the same score.
	par := false
	if bestEst.ok {
		p, e, score, err := sc.parallel(bestEst.score, bestEst.err, bestC, sc.dist)
		if err != nil {
			return core{}, false, nil, fmt.Errorf("router: parallel estimate %q → %q: %w", q.From, q.To, err)
		}
		if p {
			par = true
			bestC = sc.parCand
			bestEst.err, bestEst.score = e, score
			sc.dist = append(sc.dist[:0], sc.parDist...)
		}
	}
	if bestEst.ok && !par {
		// A chain charged by a witness on the observed side (shrink.go).
		sc.shrink(dir.Support)
	}

	// Candidates left out of the k scored are a cut only when one could
	// have won (search.go).
	if sc.candidatesCut(bestEst.ok, bestEst.score) {
		res.truncated = true
		res.cut |= CutCandidates
	}

	// Build the owned result (see resultBlock): the estimates and the
	// label and name bytes in one block, the string headers (and the
	// ChainResult) in another.
	var names []graphidx.EntityID
	if bestEst.ok {
		names = bestC.b[:bestC.m]
	}
	var chainDist []float64
	if bestEst.ok {
		chainDist = sc.dist
	}
	rb := newResultBlock(g, h.na, &sc.names, g.Values(t), names, sc.ddist, chainDist, bestEst.ok)
	c := core{
		values:     rb.values,
		direct:     DirectResult{Estimate: rb.direct, Err: dir.Err, Support: dir.Support},
		truncated:  res.truncated,
		cut:        res.cut,
		generation: h.gen,
	}
	if bestEst.ok {
		minSup := sc.parSup
		if !par {
			minSup = ^uint64(0)
			prev := s
			for i := 0; i <= int(bestC.m); i++ {
				b := t
				if i < int(bestC.m) {
					b = bestC.b[i]
				}
				ps, ok := sc.pairStats(prev, b)
				if !ok {
					minSup = 0
				} else if sp := ps.Support(); sp < minSup {
					minSup = sp
				}
				prev = b
			}
		}
		*rb.chain = ChainResult{
			Bridges:    rb.bridges,
			Estimate:   rb.chainEst,
			Err:        bestEst.err,
			MinSupport: minSup,
			Parallel:   par,
			Midpoint:   par && sc.parMid,
		}
		c.chain = rb.chain
		c.gain = dir.Err - bestEst.err
		c.score = bestEst.score
	}
	return c, !res.deadline, nil, nil
}

// scorePoll is how many exact chain scores stage 2 runs between two polls
// of the context (one score is O(m·K³), about a microsecond).
const scorePoll = 16

// ctxDone reports whether ctx is done, without blocking.
func ctxDone(ctx context.Context) bool {
	select {
	case <-ctx.Done():
		return true
	default:
		return false
	}
}

// resultBlock is the memory a decision owns, in at most two heap blocks
// (plus the names that Graph.Name allocates, e.g. *graphidx.Index's
// copies):
//
//   - one pointer-free block of float64 words: the direct estimate, the
//     chain estimate, then the bytes of the value labels and the bridge
//     names (the strings point into it, past the end of both estimate
//     slices, whose capacities stop at their lengths);
//   - one block of string headers (labels, then bridges), which for up to
//     chainBlockSmall strings also holds the ChainResult.
//
// So a decision never points into index memory, and an uncached decision
// allocates two objects beside the names. O(K + Σ len(labels) + Σ
// len(names)).
type resultBlock struct {
	values, bridges  []string
	direct, chainEst []float64
	chain            *ChainResult // nil unless chained
}

// chainBlockSmall is the largest number of strings (value labels plus
// bridge names) that share one allocation with the ChainResult.
const chainBlockSmall = 8

// chainWith allocates a ChainResult and n ≤ len(A) string headers in one
// block (A is [N]string). The block has exactly the size of the two it
// replaces (64 + 16·N bytes), so it saves an object without wasting
// bytes when N = n. O(N).
func chainWith[A any](n int) (*ChainResult, []string) {
	blk := new(struct {
		cr   ChainResult
		strs A
	})
	return &blk.cr, unsafe.Slice((*string)(unsafe.Pointer(&blk.strs)), n)[:0]
}

// newChainBlock returns a ChainResult and room for n string headers, in one
// block when n ≤ chainBlockSmall.
func newChainBlock(n int) (*ChainResult, []string) {
	switch {
	case n <= 2:
		return chainWith[[2]string](n)
	case n == 3:
		return chainWith[[3]string](n)
	case n == 4:
		return chainWith[[4]string](n)
	case n == 5:
		return chainWith[[5]string](n)
	case n == 6:
		return chainWith[[6]string](n)
	case n == 7:
		return chainWith[[7]string](n)
	case n == chainBlockSmall:
		return chainWith[[chainBlockSmall]string](n)
	}
	return new(ChainResult), make([]string, 0, n)
}

// newResultBlock copies direct and, when chained, chainDist and the names of
// ids into fresh memory laid out as resultBlock describes. Each name is read
// once: with na (the graph's NameAppender, or nil) into the scratch buffer
// *tmp, else by g.Name (which for an Index allocates a copy).
func newResultBlock(g Graph, na NameAppender, tmp *[]byte, values []string, ids []graphidx.EntityID, direct, chainDist []float64, chained bool) resultBlock {
	var names [MaxBridgesLimit]string
	nb := 0
	for _, v := range values {
		nb += len(v)
	}
	if na != nil && len(ids) > 0 {
		var end [MaxBridgesLimit]int
		b := (*tmp)[:0]
		for i, id := range ids {
			b = na.AppendName(b, id)
			end[i] = len(b)
		}
		*tmp = b
		// Views of the scratch bytes, copied into the block below before
		// the scratch is reused.
		start := 0
		for i := range ids {
			if end[i] > start {
				names[i] = unsafe.String(&b[start], end[i]-start)
				nb += len(names[i])
			}
			start = end[i]
		}
	} else {
		for i, id := range ids {
			names[i] = g.Name(id)
			nb += len(names[i])
		}
	}
	k, nf := len(direct), len(direct)+len(chainDist)
	fl := make([]float64, nf+(nb+7)/8)
	copy(fl, direct)
	copy(fl[k:], chainDist)
	var buf []byte
	if nb > 0 {
		// A view of the words past the estimates as bytes: float64 is
		// larger than and at least as aligned as byte, and the block has no
		// pointers, so the garbage collector keeps it alive through the
		// strings' interior pointers.
		buf = unsafe.Slice((*byte)(unsafe.Pointer(&fl[nf])), nb)[:0]
	}
	ns := len(values) + len(ids)
	rb := resultBlock{direct: fl[:k:k]}
	var strs []string
	if chained {
		rb.chain, strs = newChainBlock(ns)
	} else {
		strs = make([]string, 0, ns)
	}
	strs = appendStrings(strs, buf, values, names[:len(ids)])
	rb.values = strs[:len(values):len(values)]
	if chained {
		rb.bridges = strs[len(values):]
		rb.chainEst = fl[k:nf:nf]
	}
	return rb
}

// cloneLabels copies value labels into one heap buffer so that the result
// never points into index memory. O(Σ len).
func cloneLabels(values []string) []string {
	n := 0
	for _, v := range values {
		n += len(v)
	}
	return appendStrings(make([]string, 0, len(values)), make([]byte, 0, n), values, nil)
}

// appendStrings appends to out copies of values and then of names, whose
// bytes go to buf; buf must have room for all of them (it never grows, so
// the strings stay where they were written). O(Σ len).
func appendStrings(out []string, buf []byte, values, names []string) []string {
	add := func(s string) {
		if len(s) == 0 {
			out = append(out, "")
			return
		}
		start := len(buf)
		buf = append(buf, s...)
		out = append(out, unsafe.String(&buf[start], len(s)))
	}
	for _, v := range values {
		add(v)
	}
	for _, n := range names {
		add(n)
	}
	return out
}

// fallback builds the Decision returned for an unknown endpoint or value
// when a fallback mode is configured.
func (r *Router) fallback(st *settings, g Graph, h *handle, q *Query, t graphidx.EntityID, okT bool, code string) *Decision {
	d := Decision{
		Mode:       ModeDirect,
		Reason:     reason(code),
		Generation: h.gen,
		Propensity: 1,
		Key:        q.Key,
	}
	if st.fallback == FallbackChain {
		d.Mode = ModeChain
	}
	if okT {
		d.Values = cloneLabels(g.Values(t))
	}
	if i := st.assignArm(q); i >= 0 {
		d.Arm = st.arms[i].name
	}
	return &d
}
