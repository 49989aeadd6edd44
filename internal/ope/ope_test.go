package ope

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// world is a known logging policy and a known outcome model. Units come in
// two periods: period A (score ~ U(−0.05, 0.10)) traced at ratio 1 and
// period B (score ~ U(0, 0.15)) traced at ratio 0.25, equally many units
// in the population, so unweighted estimates would be biased towards A.
type world struct {
	eps, tau0 float64
}

func (w world) draw(r *rand.Rand, periodB bool) (hasChain bool, score float64, hops int) {
	hasChain = r.Float64() < 0.8
	if periodB {
		score = r.Float64() * 0.15
	} else {
		score = -0.05 + r.Float64()*0.15
	}
	hops = 1 + r.IntN(3)
	return
}

// mu is the true mean reward and cost of mode a.
func mu(a Action, score float64, hops int) (reward, cost float64) {
	if a == Chain {
		return 0.6 + 3*score - 0.02*float64(hops), 0.01 * (100 + 150*float64(hops)) / 100
	}
	return 0.6, 0.01
}

func truth(tau float64, maxHops int) (reward, cost float64) {
	w := world{}
	r := rand.New(rand.NewPCG(99, 99))
	const n = 400000
	for i := range n {
		hasChain, score, hops := w.draw(r, i%2 == 1)
		a := Direct
		if hasChain && score >= tau && hops <= maxHops {
			a = Chain
		}
		mr, mc := mu(a, score, hops)
		reward += mr
		cost += mc
	}
	return reward / n, cost / n
}

func (w world) logs(seed uint64, units int) []Sample {
	r := rand.New(rand.NewPCG(seed, 17))
	var out []Sample
	for i := range units {
		periodB := i%2 == 1
		hasChain, score, hops := w.draw(r, periodB)
		ratio := 1.0
		if periodB {
			ratio = 0.25
		}
		// The logging policy acts on every unit; the trace sampler keeps
		// the decision with probability ratio.
		a, p := Direct, 1.0
		if hasChain {
			if score >= w.tau0 {
				a = Chain
			}
			p = 1 - w.eps
			if r.Float64() < w.eps {
				a ^= 1
				p = w.eps
			}
		}
		mr, mc := mu(a, score, hops)
		reward := 0.0
		if r.Float64() < mr {
			reward = 1
		}
		if r.Float64() >= ratio {
			continue
		}
		out = append(out, Sample{
			ID: "unit", Logged: a, HasChain: hasChain, Score: score, Hops: hops,
			Propensity: p, Weight: 1 / ratio, Reward: reward, Cost: mc,
		})
	}
	return out
}

func TestRecoversKnownPolicyValue(t *testing.T) {
	t.Parallel()
	w := world{eps: 0.2, tau0: 0.02}
	samples := w.logs(1, 60000)
	grid := Grid{Taus: []float64{-1, 0.01, 0.03, 1}, MaxHops: []int{1, 3}}
	res, err := Sweep(samples, grid, WithBootstrap(300, 5))
	if err != nil {
		t.Fatal(err)
	}
	if len(res) != 8 {
		t.Fatalf("%d results", len(res))
	}
	for _, r := range res {
		tr, tc := truth(r.Tau, r.MaxHops)
		if !r.Supported {
			t.Errorf("τ=%v H=%d unsupported: %s", r.Tau, r.MaxHops, r.Reason)
			continue
		}
		for name, e := range map[string]Estimate{"IPS": r.IPS, "SNIPS": r.SNIPS, "DR": r.DR} {
			if !e.Value.Contains(tr) {
				t.Errorf("τ=%v H=%d %s value %v misses the true %.4f", r.Tau, r.MaxHops, name, e.Value, tr)
			}
			if math.Abs(e.Value.Est-tr) > 0.02 {
				t.Errorf("τ=%v H=%d %s value %.4f far from the true %.4f", r.Tau, r.MaxHops, name, e.Value.Est, tr)
			}
			if !(e.Cost.Lo-1e-12 <= tc && tc <= e.Cost.Hi+1e-12) {
				t.Errorf("τ=%v H=%d %s cost %v misses the true %.4f", r.Tau, r.MaxHops, name, e.Cost, tc)
			}
		}
		if r.ESS < 1000 {
			t.Errorf("τ=%v H=%d ESS %v", r.Tau, r.MaxHops, r.ESS)
		}
	}
}

// Over many seeded data sets the 95% intervals cover the truth in most of
// them (a loose bound, as the bootstrap is approximate).
func TestIntervalCoverage(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("coverage study")
	}
	w := world{eps: 0.25, tau0: 0.02}
	tr, _ := truth(0.01, 3)
	const sets = 60
	cover := map[string]int{}
	for s := range sets {
		samples := w.logs(uint64(100+s), 6000)
		r, err := Evaluate(samples, 0.01, 3, WithBootstrap(200, uint64(s)))
		if err != nil {
			t.Fatal(err)
		}
		if r.IPS.Value.Contains(tr) {
			cover["IPS"]++
		}
		if r.SNIPS.Value.Contains(tr) {
			cover["SNIPS"]++
		}
		if r.DR.Value.Contains(tr) {
			cover["DR"]++
		}
	}
	for _, name := range []string{"IPS", "SNIPS", "DR"} {
		c := float64(cover[name]) / sets
		t.Logf("%s 95%% interval coverage %.2f over %d data sets", name, c, sets)
		if c < 0.85 {
			t.Errorf("%s coverage %.2f over %d data sets", name, c, sets)
		}
	}
}

// The bucketed sweep must equal a direct per-policy computation.
func TestSweepMatchesNaive(t *testing.T) {
	t.Parallel()
	w := world{eps: 0.3, tau0: 0.0}
	samples := w.logs(7, 3000)
	taus := []float64{0.05, -0.01, 0.02, 0.2}
	hopsGrid := []int{3, 1, 2}
	res, err := Sweep(samples, Grid{Taus: taus, MaxHops: hopsGrid}, WithBootstrap(0, 0), WithMinESS(1))
	if err != nil {
		t.Fatal(err)
	}
	// The naive computation cross-fits by hand: the model of sample i is
	// fitted on the samples j with j mod 5 ≠ i mod 5.
	var folds [DefaultFolds]*Binned
	for f := range folds {
		var train []Sample
		for j := range samples {
			if j%DefaultFolds != f {
				train = append(train, samples[j])
			}
		}
		folds[f] = FitBinned(train, 10)
	}
	k := 0
	for _, tau := range taus {
		for _, H := range hopsGrid {
			var sw, ips, den, dr, v, v2 float64
			for i := range samples {
				s := &samples[i]
				tgt := Direct
				if s.HasChain && s.Score >= tau && s.Hops <= H {
					tgt = Chain
				}
				sw += s.Weight
				model := folds[i%DefaultFolds]
				q, _ := model.Predict(s, tgt)
				dr += s.Weight * q
				if tgt == s.Logged {
					lq, _ := model.Predict(s, s.Logged)
					ips += s.Weight * s.Reward / s.Propensity
					den += s.Weight / s.Propensity
					dr += s.Weight * (s.Reward - lq) / s.Propensity
					x := s.Weight / s.Propensity
					v += x
					v2 += x * x
				}
			}
			r := res[k]
			k++
			if r.Tau != tau || r.MaxHops != H {
				t.Fatalf("order: got (%v,%d) want (%v,%d)", r.Tau, r.MaxHops, tau, H)
			}
			check := func(name string, got, want float64) {
				if math.Abs(got-want) > 1e-9*math.Max(1, math.Abs(want)) {
					t.Errorf("τ=%v H=%d %s = %v, naive %v", tau, H, name, got, want)
				}
			}
			check("IPS", r.IPS.Value.Est, ips/sw)
			check("SNIPS", r.SNIPS.Value.Est, ips/den)
			check("DR", r.DR.Value.Est, dr/sw)
			check("ESS", r.ESS, v*v/v2)
		}
	}
}

func TestRefusals(t *testing.T) {
	t.Parallel()
	w := world{eps: 0.2, tau0: 0.02}
	samples := w.logs(3, 2000)

	missing := append([]Sample(nil), samples...)
	missing[5].Propensity = 0
	missing[5].ID = "day2.jsonl:6"
	_, err := Evaluate(missing, 0.01, 3)
	if !errors.Is(err, ErrMissingPropensity) || !strings.Contains(err.Error(), "day2.jsonl:6") {
		t.Errorf("missing propensity: %v", err)
	}

	// A deterministic logger (no exploration) supports only itself.
	det := world{eps: 0, tau0: 0.02}.logs(4, 2000)
	for i := range det {
		det[i].Propensity = 1
	}
	res, err := Sweep(det, Grid{Taus: []float64{0.02, 0.05}, MaxHops: []int{3}}, WithBootstrap(50, 1))
	if err != nil {
		t.Fatal(err)
	}
	if !res[0].Supported {
		t.Errorf("the logging policy itself must be supported: %s", res[0].Reason)
	}
	if res[1].Supported || res[1].Unsupported == 0 || !strings.Contains(res[1].Reason, "probability <") {
		t.Errorf("other policy under a deterministic logger: %+v", res[1])
	}

	// Too small an effective sample.
	r, err := Evaluate(samples[:40], 1, 3, WithMinESS(100))
	if err != nil {
		t.Fatal(err)
	}
	if r.Supported || !strings.Contains(r.Reason, "effective sample size") {
		t.Errorf("low ESS: %+v", r)
	}

	bad := append([]Sample(nil), samples...)
	bad[0].Weight = 0
	if _, err := Evaluate(bad, 0, 3); !errors.Is(err, ErrBadSample) {
		t.Errorf("zero weight: %v", err)
	}
	if _, err := Evaluate(nil, 0, 3); !errors.Is(err, ErrNoData) {
		t.Errorf("no data: %v", err)
	}
	if _, err := Evaluate(samples, 0, 3, WithPropensityFloor(0)); !errors.Is(err, ErrBadOption) {
		t.Errorf("bad floor: %v", err)
	}
}

func TestBootstrapSeeded(t *testing.T) {
	t.Parallel()
	samples := world{eps: 0.2, tau0: 0.02}.logs(8, 3000)
	a, _ := Evaluate(samples, 0.01, 2, WithBootstrap(100, 42))
	b, _ := Evaluate(samples, 0.01, 2, WithBootstrap(100, 42))
	c, _ := Evaluate(samples, 0.01, 2, WithBootstrap(100, 43))
	if a != b {
		t.Error("same seed, different result")
	}
	if a.DR.Value == c.DR.Value {
		t.Error("different seeds, identical intervals")
	}
}

func BenchmarkSweep(b *testing.B) {
	samples := world{eps: 0.2, tau0: 0.02}.logs(1, 50000)
	taus := make([]float64, 25)
	for i := range taus {
		taus[i] = -0.02 + 0.005*float64(i)
	}
	grid := Grid{Taus: taus, MaxHops: []int{1, 2, 3}}
	b.ReportAllocs()
	for b.Loop() {
		res, err := Sweep(samples, grid, WithBootstrap(200, 1))
		if err != nil || len(res) != 75 {
			b.Fatal(err)
		}
	}
}

// TestCrossFitExcludesOwnFold: with one bin per group, the model of fold f
// predicts the weighted mean reward of the samples outside fold f, which
// differs from the in-sample mean whenever fold f's rewards do.
func TestCrossFitExcludesOwnFold(t *testing.T) {
	t.Parallel()
	const n, k = 103, 5
	samples := make([]Sample, n)
	for i := range samples {
		samples[i] = Sample{Logged: Chain, Propensity: 0.5, Weight: 1, HasChain: true, Hops: 1, Score: 0.1, Reward: float64(i * i % 17), Cost: float64(i % 3)}
	}
	models := fitFolds(samples, 1, k)
	if len(models) != k {
		t.Fatalf("%d models, want %d", len(models), k)
	}
	all := FitBinned(samples, 1)
	for f := range k {
		var sr, sc, w float64
		for i, s := range samples {
			if i%k != f {
				sr, sc, w = sr+s.Reward, sc+s.Cost, w+1
			}
		}
		r, c := models[f].Predict(&samples[f], Chain)
		if math.Abs(r-sr/w) > 1e-12 || math.Abs(c-sc/w) > 1e-12 {
			t.Errorf("fold %d: predicted (%v, %v), want the out-of-fold means (%v, %v)", f, r, c, sr/w, sc/w)
		}
		if ra, _ := all.Predict(&samples[f], Chain); ra == r {
			t.Errorf("fold %d: the cross-fitted prediction equals the in-sample one (%v)", f, r)
		}
	}
	if got := fitFolds(samples[:3], 1, k); len(got) != 1 {
		t.Errorf("fewer samples than folds: %d models, want one in-sample model", len(got))
	}
	if _, err := Sweep(samples, Grid{Taus: []float64{0}, MaxHops: []int{3}}, WithCrossFit(0)); !errors.Is(err, ErrBadOption) {
		t.Errorf("WithCrossFit(0): err %v, want ErrBadOption", err)
	}
}
