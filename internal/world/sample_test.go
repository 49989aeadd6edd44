package world

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

func TestZipfPMF(t *testing.T) {
	t.Parallel()
	// Harmonic number: H_(10,1) = 7381/2520, so p(1) = 2520/7381 = 0.34142.
	z, err := NewZipf(1, 10)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := z.Harmonic(), 7381.0/2520; math.Abs(got-want) > 1e-12 {
		t.Errorf("H_(10,1) = %v, want %v", got, want)
	}
	if got := z.PMF(1); math.Abs(got-0.34142) > 5e-6 {
		t.Errorf("p(1) = %v, want 0.34142", got)
	}
	// Common practice: H_(N,2) → π²/6 as N → ∞; the tail Σ_(k>N) k^−2 < 1/N.
	z2, err := NewZipf(2, 1000)
	if err != nil {
		t.Fatal(err)
	}
	if d := math.Pi*math.Pi/6 - z2.Harmonic(); d < 0 || d > 1.0/1000 {
		t.Errorf("H_(1000,2) = %v, π²/6 − H = %v", z2.Harmonic(), d)
	}
	s := 0.0
	for k := 0; k <= 1001; k++ {
		s += z2.PMF(k)
	}
	if math.Abs(s-1) > 1e-12 {
		t.Errorf("Zipf pmf sums to %v", s)
	}
	for _, bad := range []struct {
		s float64
		n int
	}{{2, 0}, {-1, 10}, {math.NaN(), 10}, {math.Inf(1), 10}} {
		if _, err := NewZipf(bad.s, bad.n); !errors.Is(err, ErrInvalidConfig) {
			t.Errorf("NewZipf(%v, %d): err = %v", bad.s, bad.n, err)
		}
	}
}

func TestGeometricMean(t *testing.T) {
	t.Parallel()
	// Geometric law: the mean (1−p)/p is 5 at p = 1/6.
	g := Geometric{P: 1.0 / 6}
	if math.Abs(g.Mean()-5) > 1e-12 {
		t.Errorf("mean = %v, want 5", g.Mean())
	}
	// Seeded empirical mean: sd = √(1−p)/p ≈ 5.48, so 200k draws give a
	// standard error of 0.012; allow 5 standard errors.
	r := rand.New(rand.NewPCG(42, 1))
	const n = 200000
	sum := 0.0
	for range n {
		sum += float64(g.Rand(r))
	}
	if m := sum / n; math.Abs(m-5) > 5*math.Sqrt(1-g.P)/g.P/math.Sqrt(n) {
		t.Errorf("empirical mean %v, want 5", m)
	}
	s := 0.0
	for k := range 200 {
		s += g.PMF(k)
	}
	if math.Abs(s-1) > 1e-12 || g.PMF(-1) != 0 {
		t.Errorf("geometric pmf sums to %v", s)
	}
}

// chiSquare returns Pearson's statistic of counts against expected counts
// n·pmf(k) over the bins, pooling everything from tail upwards into the
// last bin. Compared with the 0.999 quantile of χ²(bins−1) from gonum
// (common practice: a seeded test, so it is deterministic).
func chiSquareCheck(t *testing.T, name string, counts map[int]int, pmf func(int) float64, lo, tail, n int) {
	t.Helper()
	stat := 0.0
	bins := 0
	rest := 1.0
	restCount := n
	for k := lo; k < tail; k++ {
		e := float64(n) * pmf(k)
		d := float64(counts[k]) - e
		stat += d * d / e
		rest -= pmf(k)
		restCount -= counts[k]
		bins++
	}
	e := float64(n) * rest
	d := float64(restCount) - e
	stat += d * d / e
	bins++
	crit := distuv.ChiSquared{K: float64(bins - 1)}.Quantile(0.999)
	if stat > crit {
		t.Errorf("%s: χ² = %.2f over %d bins, critical %.2f", name, stat, bins, crit)
	}
}

func TestSamplerFrequencies(t *testing.T) {
	t.Parallel()
	r := rand.New(rand.NewPCG(3, 4))
	const n = 100000
	z, _ := NewZipf(2, 10)
	zc := map[int]int{}
	g := Geometric{P: 0.5}
	gc := map[int]int{}
	for range n {
		zc[z.Rand(r)]++
		gc[g.Rand(r)]++
	}
	chiSquareCheck(t, "zipf(2,10)", zc, z.PMF, 1, 8, n)
	chiSquareCheck(t, "geometric(0.5)", gc, g.PMF, 0, 7, n)
}

func testWorld(t testing.TB, seed int64) *World {
	t.Helper()
	w, err := Generate(Config{Vars: 60, Edges: 70, HeldOut: 12}, seed)
	if err != nil {
		t.Fatal(err)
	}
	if len(w.HeldOut()) == 0 {
		t.Fatal("no held-out pairs")
	}
	return w
}

// TestSamplerLocality checks the condition semantics on every context:
// centre kept, every observed variable within the drawn radius (of the true
// skeleton for local, of the other graph for wrong), held-out pairs apart.
func TestSamplerLocality(t *testing.T) {
	t.Parallel()
	w := testWorld(t, 1)
	n := w.NumVars()
	for _, name := range ConditionNames() {
		cond, err := ConditionByName(name)
		if err != nil {
			t.Fatal(err)
		}
		s, err := w.NewSampler(cond, 9)
		if err != nil {
			t.Fatal(err)
		}
		adj := w.adj
		if cond.Locality == Wrong {
			adj = s.wrong
			if s.WrongNeighbors(0) == nil && len(adj[0]) > 0 {
				t.Error("WrongNeighbors is nil")
			}
		}
		radii := map[int]int{}
		const contexts = 4000
		for range contexts {
			c := s.Next()
			if !slices.Contains(c.Vars, c.Centre) {
				t.Fatalf("%s: centre %d not observed in %v", name, c.Centre, c.Vars)
			}
			dist, _ := bfs(adj, c.Centre)
			for i, v := range c.Vars {
				if cond.Locality != Full && (dist[v] < 0 || dist[v] > c.Radius) {
					t.Fatalf("%s: %s at distance %d outside radius %d", name, w.Name(v), dist[v], c.Radius)
				}
				if i > 0 && w.Name(c.Vars[i-1]) >= w.Name(v) {
					t.Fatalf("%s: vars not sorted by name", name)
				}
				for _, u := range c.Vars {
					if w.IsHeldOut(u, v) {
						t.Fatalf("%s: held-out pair %s, %s observed together", name, w.Name(u), w.Name(v))
					}
				}
			}
			if cond.Locality == Full && len(c.Vars) < n-len(w.HeldOut()) {
				t.Fatalf("full: %d of %d observed", len(c.Vars), n)
			}
			radii[c.Radius]++
		}
		st := s.Stats()
		if st.Contexts != contexts || st.HeldOutDrops == 0 {
			t.Errorf("%s: stats %+v", name, st)
		}
		if cond.Locality == Full && st.Dropped != 0 {
			t.Errorf("full: %d dropped", st.Dropped)
		}
		if cond.Radius == RadiusGeometric && cond.Locality != Full {
			// Radius is 1 + Geometric(0.5).
			g := Geometric{P: 0.5}
			chiSquareCheck(t, name+" radius", radii, func(k int) float64 { return g.PMF(k - 1) }, 1, 6, contexts)
		}
		if cond.Locality == Local && cond.Radius == RadiusZipf {
			z, _ := NewZipf(2, n)
			chiSquareCheck(t, name+" radius", radii, z.PMF, 1, 5, contexts)
		}
	}
}

// TestSamplerMarginals checks ancestral sampling against exact marginals
// (common practice): full contexts without held-out enforcement observe a
// plain joint sample, so each frequency is within 5 standard errors of
// P(X_v = 1).
func TestSamplerMarginals(t *testing.T) {
	t.Parallel()
	w, err := Generate(Config{Vars: 30, Edges: 40}, 5)
	if err != nil {
		t.Fatal(err)
	}
	const n = 20000
	ones := make([]int, w.NumVars())
	_, err = w.Sample(context.Background(), n, Condition{Locality: Full, KeepHeldOut: true}, 2, func(c Context) error {
		for i, v := range c.Vars {
			ones[v] += c.Values[i]
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	for v := range w.NumVars() {
		p, err := w.Posterior(v, nil)
		if err != nil {
			t.Fatal(err)
		}
		se := math.Sqrt(p[1] * (1 - p[1]) / n)
		if f := float64(ones[v]) / n; math.Abs(f-p[1]) > 5*se+1e-12 {
			t.Errorf("%s: frequency %v, exact %v (se %v)", w.Name(v), f, p[1], se)
		}
	}
}

func TestCorpusJSONL(t *testing.T) {
	t.Parallel()
	w := testWorld(t, 2)
	cond, _ := ConditionByName(CondLocalGeometric)
	var a, b bytes.Buffer
	sa, err := w.WriteCorpus(context.Background(), &a, 500, cond, 7)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := w.WriteCorpus(context.Background(), &b, 500, cond, 7); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a.Bytes(), b.Bytes()) {
		t.Fatal("same seed gave different bytes")
	}
	var c bytes.Buffer
	if _, err := w.WriteCorpus(context.Background(), &c, 500, cond, 8); err != nil {
		t.Fatal(err)
	}
	if bytes.Equal(a.Bytes(), c.Bytes()) {
		t.Fatal("different seeds gave the same corpus")
	}
	sc := bufio.NewScanner(&a)
	lines, obs := 0, 0
	for sc.Scan() {
		lines++
		var rec struct {
			ID  string            `json:"id"`
			Obs map[string]string `json:"obs"`
		}
		dec := json.NewDecoder(bytes.NewReader(sc.Bytes()))
		dec.DisallowUnknownFields()
		if err := dec.Decode(&rec); err != nil {
			t.Fatalf("line %d: %v", lines, err)
		}
		if want := "c" + strconv.Itoa(lines); rec.ID != want {
			t.Fatalf("line %d: id %q, want %q", lines, rec.ID, want)
		}
		// Keys appear in ascending order in the raw bytes.
		var keys []string
		for k, v := range rec.Obs {
			keys = append(keys, k)
			x, ok := w.Index(k)
			if !ok || !slices.Contains(w.Labels(x), v) {
				t.Fatalf("line %d: unknown %q=%q", lines, k, v)
			}
		}
		slices.Sort(keys)
		last := -1
		for _, k := range keys {
			i := strings.Index(sc.Text(), `"`+k+`":`)
			if i <= last {
				t.Fatalf("line %d: keys out of order", lines)
			}
			last = i
		}
		obs += len(rec.Obs)
	}
	if lines != 500 || obs != sa.Observations {
		t.Errorf("lines %d, observations %d, stats %+v", lines, obs, sa)
	}
}

func TestWriteJSONLEscapes(t *testing.T) {
	t.Parallel()
	odd := []string{`quote"d`, `back\slash`, "tab\there", "ctl\x01", "ünï/cödé"}
	vars := make([]Variable, len(odd))
	for i, name := range odd {
		vars[i] = Variable{Name: name, Labels: []string{"a\"", "b\n"}, CPT: []float64{0.5, 0.5}}
	}
	w, err := New(vars)
	if err != nil {
		t.Fatal(err)
	}
	var ctxs []Context
	if _, err := w.Sample(context.Background(), 5, Condition{Locality: Full}, 1, func(c Context) error {
		ctxs = append(ctxs, c)
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := WriteJSONL(&buf, ctxs); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(&buf)
	i := 0
	for sc.Scan() {
		var rec struct {
			ID  string            `json:"id"`
			Obs map[string]string `json:"obs"`
		}
		if err := json.Unmarshal(sc.Bytes(), &rec); err != nil {
			t.Fatalf("line %d: %v: %s", i+1, err, sc.Text())
		}
		for j := range ctxs[i].Vars {
			if rec.Obs[ctxs[i].Entity(j)] != ctxs[i].Label(j) {
				t.Fatalf("line %d: %q round-tripped to %q", i+1, ctxs[i].Label(j), rec.Obs[ctxs[i].Entity(j)])
			}
		}
		if len(rec.Obs) != len(odd) {
			t.Fatalf("line %d: %d keys", i+1, len(rec.Obs))
		}
		i++
	}
	if i != 5 {
		t.Fatalf("%d lines", i)
	}
	if err := WriteJSONL(&buf, []Context{{ID: "x"}}); !errors.Is(err, ErrInvalidConfig) {
		t.Errorf("foreign context: err = %v", err)
	}
}

func TestSampleStopsOnErrorAndCancel(t *testing.T) {
	t.Parallel()
	w := testWorld(t, 3)
	stop := errors.New("stop")
	st, err := w.Sample(context.Background(), 100, Condition{Locality: Full}, 1, func(c Context) error {
		if c.ID == "c10" {
			return stop
		}
		return nil
	})
	if !errors.Is(err, stop) || st.Contexts != 10 {
		t.Errorf("err %v, stats %+v", err, st)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := w.Sample(ctx, 100, Condition{Locality: Full}, 1, func(Context) error { return nil }); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: err = %v", err)
	}
	for _, bad := range []Condition{{Drop: 1}, {Drop: -0.1}, {GeometricP: 2}, {Radius: RadiusZipf, ZipfS: -1}, {Locality: 7}, {Radius: 9}} {
		if _, err := w.NewSampler(bad, 1); !errors.Is(err, ErrInvalidConfig) {
			t.Errorf("NewSampler(%+v): err = %v", bad, err)
		}
	}
	if _, err := ConditionByName("nearby"); !errors.Is(err, ErrInvalidConfig) {
		t.Errorf("unknown condition: err = %v", err)
	}
}

// TestHeldOutProperties checks the testbed (docs/DESIGN.md, Testbed): held-out pairs are connected,
// non-adjacent, dependent (MI ≥ the threshold) and never co-observed, while
// supported pairs are the edges and do co-occur.
func TestHeldOutProperties(t *testing.T) {
	t.Parallel()
	w := testWorld(t, 4)
	for _, p := range w.HeldOut() {
		d := w.Distance(p[0], p[1])
		if d < 2 {
			t.Errorf("held-out %v at distance %d", p, d)
		}
		mi, err := w.MutualInformation(p[0], p[1])
		if err != nil {
			t.Fatal(err)
		}
		if mi < 0.01 {
			t.Errorf("held-out %v has MI %v", p, mi)
		}
	}
	sup := w.Supported()
	if len(sup) != len(w.Edges()) {
		t.Errorf("%d supported pairs, %d edges", len(sup), len(w.Edges()))
	}
	cond, _ := ConditionByName(CondLocalGeometric)
	co := map[[2]int]int{}
	if _, err := w.Sample(context.Background(), 5000, cond, 1, func(c Context) error {
		for i, a := range c.Vars {
			for _, b := range c.Vars[i+1:] {
				co[unordered(a, b)]++
			}
		}
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	for _, p := range w.HeldOut() {
		if co[unordered(p[0], p[1])] != 0 {
			t.Errorf("held-out %v co-observed %d times", p, co[unordered(p[0], p[1])])
		}
	}
	for _, e := range sup {
		if co[unordered(e[0], e[1])] == 0 {
			t.Errorf("supported %v never co-observed", e)
		}
	}
	// Determinism and independence of streams: more held-out pairs leave the
	// network unchanged.
	w2, err := Generate(Config{Vars: 60, Edges: 70, HeldOut: 3}, 4)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(w.CPT(10), w2.CPT(10)) || !slices.EqualFunc(w.Edges(), w2.Edges(), func(a, b [2]int) bool { return a == b }) {
		t.Error("held-out count changed the network")
	}
	if _, err := w.WithHeldOut([][2]int{{1, 1}}); !errors.Is(err, ErrInvalidConfig) {
		t.Errorf("self pair: err = %v", err)
	}
	if _, err := w.WithHeldOut([][2]int{{1, 99}}); !errors.Is(err, ErrVariableRange) {
		t.Errorf("range: err = %v", err)
	}
}
