package eval_test

import (
	"cmp"
	"context"
	"math"
	"slices"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/eval"
	"github.com/hopwise/hopwise/internal/stress"
	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
)

// publishedContexts is the corpus size of the published-network checks: the
// local-geometric contexts of `hopwise eval`, as many as its worlds use.
const publishedContexts = 50000

// publishedSeeds are the corpus seeds of a published-network check: three,
// because one corpus leaves the far pairs' figures at the noise of a single
// sample (each run builds a real index in about 0.2 s).
var publishedSeeds = []int64{1, 2, 3}

// publishedMean runs net with the given pairs held out (never observed
// together): the corpus is sampled as `hopwise eval` samples it
// (local-geometric contexts), the index is built by the real builder, and
// every held-out and supported pair is answered by the real router, against
// exact answers by variable elimination. It returns the mean of the
// held-out, supported and calibration figures over publishedSeeds.
func publishedMean(t *testing.T, net *world.World, heldOut [][2]int, opts ...scorer.Option) (held, sup eval.Scores, rho float64) {
	t.Helper()
	return publishedMeanOver(t, publishedSeeds, net, heldOut, false, opts...)
}

// publishedMeanOver is publishedMean over the given corpus seeds; with keep
// set, the queries of every corpus are kept and a per-query breakdown of the
// held-out error is logged (publishedBreakdown).
func publishedMeanOver(t *testing.T, seeds []int64, net *world.World, heldOut [][2]int, keep bool, opts ...scorer.Option) (held, sup eval.Scores, rho float64) {
	t.Helper()
	w, err := net.WithHeldOut(heldOut)
	if err != nil {
		t.Fatal(err)
	}
	var reps []eval.Report
	for _, seed := range seeds {
		r, err := eval.Run(context.Background(), eval.Config{
			Condition: world.CondLocalGeometric, Seed: seed, Network: w, Contexts: publishedContexts, ModelOptions: opts, KeepQueries: keep,
		})
		if err != nil {
			t.Fatal(err)
		}
		if r.HeldOut.N == 0 || r.Supported.N == 0 {
			t.Fatalf("seed %d: %d held-out and %d supported queries scored", seed, r.HeldOut.N, r.Supported.N)
		}
		reps = append(reps, r)
	}
	if keep {
		publishedBreakdown(t, net, reps)
		runs := make([][]eval.QueryResult, len(reps))
		for i, r := range reps {
			runs[i] = r.Queries
		}
		model, oracle := oracleSpearman(runs)
		t.Logf("  Spearman ρ over %d corpora: model %.3f, leave-one-out oracle of the expected squared error %.3f (TestPublishedOracle)", len(reps), model, oracle)
	}
	m := eval.Summarize(reps).Mean[0]
	return m.HeldOut, m.Supported, m.Calibration.Spearman
}

// publishedMinMI is the least mutual information (nats) of a held-out pair
// in the second regime of TestPublishedNetworks, `hopwise eval`'s own choice
// (world.PickHeldOut): dependent non-adjacent pairs only.
const publishedMinMI = 0.001

// A publishedRegime chooses the held-out pairs of a published network.
type publishedRegime struct {
	name string
	pick func(*world.World) ([][2]int, error)
	// maxMean is the most the mean routed held-out MSE over the networks
	// may be: a ceiling just above today's figure (see publishedNets). The
	// hop prior Dirichlet(1/2) (scorer.DefaultHopAlpha) moved the 3-corpus
	// means 0.002977 → 0.003005 and 0.000878 → 0.0008997 while the 20-corpus
	// ones went 0.003245 → 0.003274 and 0.001113 → 0.00106: three corpora
	// are too few to see a change of that size (docs/QUALITY.md §4f). The
	// inherited separation bias and the scale-free witness gate then moved
	// MI ≥ 0.001 to 0.0008303 (3 corpora) and 0.001008 (20), and the shrink
	// of a chain charged by a witness on the observed side (router's
	// shrink.go) to 0.0007673 and 0.0009808 (ASIA 0.000556 → 0.000449 over
	// the 20).
	maxMean float64
	// maxMeanMany is the same ceiling over the 20 corpora of
	// TestPublishedNetworksCorpora.
	maxMeanMany float64
}

// publishedRegimes are the two held-out choices of TestPublishedNetworks:
// every pair at skeleton distance ≥ 2 (independent pairs included, so no
// table of the corpus shows two causes of a common effect together), and
// `hopwise eval`'s own (world.PickHeldOut: every non-adjacent pair with
// mutual information ≥ publishedMinMI; the other pairs, among them
// independent causes of a common effect, are observed).
var publishedRegimes = []publishedRegime{
	{"distance ≥ 2", func(w *world.World) ([][2]int, error) { return world.PublishedHeldOut(w, 2), nil }, 0.00301, 0.00330},
	{"MI ≥ 0.001", func(w *world.World) ([][2]int, error) {
		return w.PickHeldOut(w.NumVars()*w.NumVars(), publishedMinMI, 1)
	}, 0.00078, 0.00099},
}

// publishedNet is one published network of TestPublishedNetworks with the
// bounds its routed answers must meet, per regime (publishedRegimes).
type publishedNet struct {
	name  string
	build func() (*world.World, error)
	// chainTol is how far above the better of the marginal and the simple
	// count chain the routed held-out MSE may be (1 = not above); minRho
	// is the least Spearman ρ of predicted against realised error (a floor
	// under today's value). See publishedNets for each value's reason.
	chainTol, minRho [2]float64
}

// publishedNets are the networks of TestPublishedNetworks, each typed from
// its publication (see the world constructors for the sources):
//
//   - ASIA, Lauritzen & Spiegelhalter (1988), J. R. Statist. Soc. B 50(2),
//     157–224: 8 binary variables, two common effects (world.Asia).
//   - Survey, Scutari & Denis (2014), "Bayesian Networks with Examples in R",
//     ch. 1: 6 variables of 2 and 3 values, two common effects (world.Survey;
//     probabilities typed from memory).
//   - Cancer, Korb & Nicholson (2004), "Bayesian Artificial Intelligence",
//     §2.2: 5 binary variables, one common effect (world.Cancer;
//     probabilities typed from memory).
//   - Burglary, Russell & Norvig, AIMA 3rd ed. (2010), §14.2: 5 binary
//     variables, one common effect of two rare causes (world.Burglary).
//   - Sprinkler, AIMA 3rd ed. §14.5: 4 binary variables, one common effect
//     with a deterministic zero (world.Sprinkler).
//   - Student, Koller & Friedman (2009), "Probabilistic Graphical Models",
//     Fig. 3.4: 5 variables, Grade with 3 values, one common effect
//     (world.Student; probabilities typed from memory).
//
// None of them was used to fit a constant: the model is fitted on the
// synthetic fit worlds (hopwise eval --fit), so these are held-out checks.
//
// Measured (3 seeds, 50 000 contexts; routed / marginal / count chain, ρ),
// distance ≥ 2: ASIA 0.01123 / 0.02862 / 0.01123, ρ 0.657; Survey 1.628e-5
// / 2.464e-5 / 1.885e-5, ρ 0.357; Cancer 2.528e-5 / 6.86e-5 / 2.424e-5,
// ρ 0.613; Burglary 0.002229 / 0.04892 / 0.002229, ρ 0.837; Sprinkler
// 0.002725 / 0.01496 / 0.01861, ρ 0.647; Student 0.002157 / 0.01784 /
// 0.002157, ρ −0.040; mean 0.003063. MI ≥ 0.001: ASIA 0.0007795 / 0.05707 /
// 0.009198, ρ 0.650 (0.002009 and ρ 0.663 before the route-term and
// prev-side witness changes of docs/QUALITY.md §4d); Burglary 0.0004943 /
// 0.08943 / 0.0004939, ρ 0.885; Sprinkler as above (its two dependent
// non-adjacent pairs are its only ones); Student 2.967e-5 / 0.02624 /
// 2.967e-5, ρ 0.247; mean 0.001007 (0.001315 before); Survey and Cancer
// have no pair that dependent. At distance ≥ 2 those changes move ASIA's ρ
// 0.665 → 0.657 and Survey's routed MSE 1.633e-5 → 1.628e-5 (ρ 0.355 →
// 0.357), nothing else. Before the bound excess
// and the projected reference (scorer.ReferenceProjector) ASIA's routed
// MSE was 0.01153 (1.027 × the count chain) at distance ≥ 2 and 0.002274
// at MI ≥ 0.001: lung = yes → bronc went through the common effect dysp of
// either and bronc (TestCommonEffectBound); before the missing-signal term
// left out the marginal's variance Cancer's was 3.461e-5 (1.43 ×).
//
// ASIA's MI ≥ 0.001 floor is 0.6 again: the scale-free witness gate of
// docs/QUALITY.md §4f admitted bronc, a second cause of dysp, as witness of
// the valid chains dysp → either → tub and → xray, charging them up to
// their squared distance from the marginal (ρ 0.637 → 0.588 on seeds 1–3,
// 0.654 → 0.607 over 20 corpora, for a routed MSE 0.000848 → 0.000570 and
// 0.000765 → 0.000556); such a witness is now refuted where a neighbour of
// the bridge beyond it shows that w does not reach the bridge
// (scorer's prevWitnessRefuted): ρ 0.609 and 0.619, the MSE unchanged.
//
// Tolerances above 1 are where 3 corpora cannot tell near ties apart,
// measured over 20 corpora (seeds 1–20, same regimes): Cancer routed
// 3.061e-5 against the count chain's 3.099e-5 (on seeds 1–3 1.043 ×: the
// three queries from pollution = low, where the marginal and the one-bridge
// chain through "cancer" are both at the noise of the marginal itself and
// the marginal wins over 20 corpora); Burglary equal to 4 digits in both
// regimes (0.004474 and 0.001692; on seeds 1–3 1.00002 × and 1.00089 ×:
// near ties from common values such as Burglary = false at realised errors
// of 1e-7 to 1e-6 per query); ASIA 0.0108 against 0.01081. Student's ρ at
// distance ≥ 2 is that of chains through the common effect Grade
// (Difficulty → Grade → Intelligence), whose causes were never observed
// together: their realised errors (up to 0.017; the count chain takes them
// too) cannot be predicted from pair tables that are all consistent with
// Grade being a mediator, and Difficulty's only neighbour is Grade, so no
// bound from its neighbours binds; the other queries' errors are at the
// noise level. Survey's and Student's MI ≥ 0.001 floors are under what any
// predictor of the expected error reaches when every realised error is
// sampling noise (TestPublishedOracle).
var publishedNets = []publishedNet{
	{"asia", world.Asia, [2]float64{1, 1}, [2]float64{0.6, 0.6}},
	{"survey", world.Survey, [2]float64{1, 1}, [2]float64{0.35, 0}},
	{"cancer", world.Cancer, [2]float64{1.05, 1}, [2]float64{0.6, 0}},
	{"burglary", world.Burglary, [2]float64{1.001, 1.002}, [2]float64{0.8, 0.85}},
	{"sprinkler", world.Sprinkler, [2]float64{1, 1}, [2]float64{0.6, 0.6}},
	{"student", world.Student, [2]float64{1, 1}, [2]float64{-0.1, 0.2}},
}

// TestPublishedNetworks checks routing on the published networks in both
// held-out regimes (publishedRegimes). Held-out pairs: the routed answer
// must be no worse than the target's marginal and within the network's
// tolerance of the better of the marginal and the simple count chain
// (fewest bridges, widest support). Adjacent pairs: within 10 % of direct.
// Calibration: Spearman ρ at least the network's floor. The
// mean routed MSE over the networks is logged per regime. Heavy (3 seeds
// per network and regime): skipped under -short.
func TestPublishedNetworks(t *testing.T) {
	if testing.Short() {
		t.Skip("builds 3 indexes of 50 000 contexts per network and regime")
	}
	t.Parallel()
	checkPublished(t, publishedSeeds, false, func(rg publishedRegime) float64 { return rg.maxMean }, 0)
}

// publishedManySeeds is how many corpora TestPublishedNetworksCorpora
// samples per network and regime (seeds 1 to publishedManySeeds).
const publishedManySeeds = 20

// TestPublishedNetworksCorpora is TestPublishedNetworks over 20 corpora
// (seeds 1–20) instead of 3, with a per-query breakdown of each held-out
// error into the bias and the spread of the routed answers over the
// corpora (publishedBreakdown) and the ρ that the leave-one-out oracle of
// TestPublishedOracle reaches on the same corpora: the 3-corpus figures carry the noise of 3
// samples of rare rows, which can hide or fake a change of a few per cent.
// The checks are TestPublishedNetworks' (the same count-chain tolerances:
// Burglary's near ties stay at 1.00001 and 1.00027 over 20 corpora), with
// each ρ floor lowered by 0.02 (ASIA at distance ≥ 2 is 0.588 over these
// 20 corpora, 0.601 over 60: the floor 0.6 is at its noise) and the mean
// over the networks at most maxMeanMany of its regime. About 15 s:
// HOPWISE_STRESS=1 only.
//
//	HOPWISE_STRESS=1 go test ./internal/eval -run TestPublishedNetworksCorpora -v
func TestPublishedNetworksCorpora(t *testing.T) {
	stress.Require(t, "TestPublishedNetworksCorpora builds 20 indexes per network and regime")
	seeds := make([]int64, publishedManySeeds)
	for i := range seeds {
		seeds[i] = int64(i + 1)
	}
	checkPublished(t, seeds, true, func(rg publishedRegime) float64 { return rg.maxMeanMany }, 0.02)
}

// checkPublished runs every network of publishedNets in every regime of
// publishedRegimes over the given corpus seeds and checks the figures of
// TestPublishedNetworks against the mean ceiling maxMean(regime), each
// network's count-chain tolerance and its ρ floor lowered by rhoSlack.
func checkPublished(t *testing.T, seeds []int64, keep bool, maxMean func(publishedRegime) float64, rhoSlack float64) {
	t.Helper()
	for ri, rg := range publishedRegimes {
		mean, nets := 0.0, 0
		for _, n := range publishedNets {
			net, err := n.build()
			if err != nil {
				t.Fatal(err)
			}
			pairs, err := rg.pick(net)
			if err != nil {
				t.Fatal(err)
			}
			if len(pairs) == 0 {
				t.Logf("%s, %s: no pair qualifies", n.name, rg.name)
				continue
			}
			held, sup, rho := publishedMeanOver(t, seeds, net, pairs, keep)
			mean += held.Routed
			nets++
			best := min(held.Marginal, held.CountChain)
			t.Logf("%s, %s (%d pairs): routed %.4g, marginal %.4g, count chain %.4g (routed/best %.5f); supported routed %.4g, direct %.4g; ρ %.3f",
				n.name, rg.name, len(pairs), held.Routed, held.Marginal, held.CountChain, held.Routed/best, sup.Routed, sup.Direct, rho)
			if held.Routed > held.Marginal {
				t.Errorf("%s, %s: routed MSE %.4g above the marginal's %.4g", n.name, rg.name, held.Routed, held.Marginal)
			}
			// 1e-9: the router's and the count chain's estimates of the same
			// chain are computed by different code paths (last-bit rounding).
			if held.Routed > n.chainTol[ri]*best*(1+1e-9) {
				t.Errorf("%s, %s: routed MSE %.4g above %g × the better of marginal and count chain, %.4g", n.name, rg.name, held.Routed, n.chainTol[ri], best)
			}
			if sup.Routed > 1.1*sup.Direct {
				t.Errorf("%s, %s: adjacent pairs: routed MSE %.4g above 1.1 × direct %.4g", n.name, rg.name, sup.Routed, sup.Direct)
			}
			if rho < n.minRho[ri]-rhoSlack {
				t.Errorf("%s, %s: Spearman ρ %.3f of predicted against realised error, want ≥ %.2f", n.name, rg.name, rho, n.minRho[ri]-rhoSlack)
			}
		}
		t.Logf("%s: mean routed held-out MSE over %d networks: %.4g", rg.name, nets, mean/float64(nets))
		if m := maxMean(rg); mean/float64(nets) > m {
			t.Errorf("%s: mean routed held-out MSE over %d networks %.4g, above %.4g", rg.name, nets, mean/float64(nets), m)
		}
	}
}

// publishedBreakdown logs, for the held-out queries of reps (one report per
// corpus, queries kept), the queries that carry most of the routed MSE:
// each query's mean error over the corpora (per value, Σ_v/K as in the
// MSE) split into the squared bias of the mean routed answer and the
// spread of the answers around it (MSE = bias² + variance, exactly, over
// the corpora that asked the query), beside the marginal's and the count
// chain's mean errors and how often the router chained.
func publishedBreakdown(t *testing.T, net *world.World, reps []eval.Report) {
	t.Helper()
	type key struct{ from, value, to int }
	type acc struct {
		n                        int
		truth, sum               []float64
		sq, marg, count, chained float64
		ests                     [][]float64
	}
	accs := map[key]*acc{}
	var keys []key
	total := 0.0
	for _, r := range reps {
		for _, q := range r.Queries {
			if q.Set != eval.SetHeldOut {
				continue
			}
			k := key{q.From, q.Value, q.To}
			a := accs[k]
			if a == nil {
				a = &acc{truth: q.Truth, sum: make([]float64, len(q.Truth))}
				accs[k] = a
				keys = append(keys, k)
			}
			kk := float64(len(q.Truth))
			a.n++
			est := q.Est[eval.EstRouted]
			for v := range est {
				a.sum[v] += est[v]
			}
			a.ests = append(a.ests, est)
			a.sq += q.SqErr(eval.EstRouted) / kk
			a.marg += q.SqErr(eval.EstMarginal) / kk
			a.count += q.SqErr(eval.EstCountChain) / kk
			if q.Mode == router.ModeChain {
				a.chained++
			}
		}
	}
	for _, a := range accs {
		total += a.sq
	}
	slices.SortFunc(keys, func(x, y key) int { return cmp.Compare(accs[y].sq, accs[x].sq) })
	for i, k := range keys {
		if i == 6 {
			break
		}
		a := accs[k]
		n, kk := float64(a.n), float64(len(a.truth))
		bias, spread := 0.0, 0.0
		for v := range a.truth {
			m := a.sum[v] / n
			bias += (m - a.truth[v]) * (m - a.truth[v]) / kk
			for _, e := range a.ests {
				spread += (e[v] - m) * (e[v] - m) / kk / n
			}
		}
		t.Logf("  %s = %s → %s (%d corpora, %.0f%% of the held-out sum): routed %.3g = bias² %.3g + variance %.3g; marginal %.3g, count chain %.3g; chained %.0f%%",
			net.Name(k.from), net.Labels(k.from)[k.value], net.Name(k.to), a.n, 100*a.sq/total, a.sq/n, bias, spread, a.marg/n, a.count/n, 100*a.chained/n)
	}
}

// TestPublishedAsiaFar checks the far pairs of ASIA (skeleton distance ≥ 3,
// 9 pairs, Lauritzen & Spiegelhalter 1988): the routed answers must be no
// worse than the target's marginal, and no worse with the separation check
// than without it. Their best chains run through a common effect (tub →
// either ← lung ← smoke, tub → either → dysp ← bronc), and the pairs start
// from the rare values asia = yes and tub = yes, which move their own
// neighbours strongly while the far targets are independent of them: the
// marginal's error is bounded by the influence bound, whose common-effect
// test (tub and lung independent, both dependent on either) stops it from
// passing tub's change of either on to lung's side. Measured (3 seeds):
// routed 0.00267 before that test (0.00546 without the separation check),
// 0.000318 with it (0.00546 without the check; 0.000315 before the
// one-bridge route terms), 0.000280 with the bound excess (0.000752
// without the check: the bound excess catches most of what it catches);
// marginal 0.00123. See docs/QUALITY.md. Heavy: skipped under -short.
func TestPublishedAsiaFar(t *testing.T) {
	if testing.Short() {
		t.Skip("builds 6 indexes of 50 000 contexts")
	}
	t.Parallel()
	asia, err := world.Asia()
	if err != nil {
		t.Fatal(err)
	}
	far, _, _ := publishedMean(t, asia, world.PublishedHeldOut(asia, 3))
	off, _, _ := publishedMean(t, asia, world.PublishedHeldOut(asia, 3), scorer.WithSeparation(0))
	t.Logf("distance ≥ 3: routed %.4g (without the separation check %.4g), marginal %.4g", far.Routed, off.Routed, far.Marginal)
	if far.Routed > far.Marginal {
		t.Errorf("far pairs: routed MSE %.4g above the marginal's %.4g", far.Routed, far.Marginal)
	}
	if far.Routed > off.Routed {
		t.Errorf("far pairs: routed MSE %.4g with the separation check, %.4g without", far.Routed, off.Routed)
	}
}

// TestExplainingAwayChain: in ASIA, tub → either ← lung ← smoke, so
// P(smoke | tub = yes) = P(smoke) = 0.5 exactly, while the chain
// tub → either → lung → smoke, which crosses the common effect "either",
// answers about 0.84 (explaining away: given either, tub and lung are
// dependent). The bias must be in the chain's error: with the separation
// check the predicted error must reach 75 % of the realised squared error,
// and without it and the influence bound (whose bound excess also sees
// this chain: 0.173 of its 0.387) it stays below 25 % (the failure the
// check fixes). A chain
// whose bridges do separate (smoke → lung → either → xray) must be charged
// less than 1 % of the invalid chain's charge.
func TestExplainingAwayChain(t *testing.T) {
	t.Parallel()
	asia, err := world.Asia()
	if err != nil {
		t.Fatal(err)
	}
	w, err := asia.WithHeldOut(world.PublishedHeldOut(asia, 3))
	if err != nil {
		t.Fatal(err)
	}
	b, err := eval.Prepare(context.Background(), eval.Config{Condition: world.CondLocalGeometric, Seed: 1, Network: w, Contexts: publishedContexts})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	ix := b.Index
	id := func(name string) graphidx.EntityID {
		x, ok := ix.Lookup(name)
		if !ok {
			t.Fatalf("%s not in the index", name)
		}
		return x
	}
	yes := 1 // labels "no" < "yes"
	on, err := scorer.NewBayes()
	if err != nil {
		t.Fatal(err)
	}
	off, err := scorer.NewBayes(scorer.WithSeparation(0))
	if err != nil {
		t.Fatal(err)
	}
	tub, either, lung, smoke, xray := id("tub"), id("either"), id("lung"), id("smoke"), id("xray")
	dir, err := on.Direct(nil, ix, tub, yes, smoke)
	if err != nil {
		t.Fatal(err)
	}
	bad := []graphidx.EntityID{either, lung}
	cOn, err := on.Chain(nil, ix, tub, yes, bad, smoke)
	if err != nil {
		t.Fatal(err)
	}
	cOff, err := off.Chain(nil, ix, tub, yes, bad, smoke)
	if err != nil {
		t.Fatal(err)
	}
	truth, err := asia.TrueConditional(2, yes, 1) // P(smoke | tub = yes)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("P(smoke=yes | tub=yes): exact %.3f, direct %.3f (err %.4f), chain %.3f (err %.4f with the check, %.4f without)",
		truth[yes], dir.Dist[yes], dir.Err, cOn.Dist[yes], cOn.Err, cOff.Err)
	if math.Abs(truth[yes]-0.5) > 1e-12 {
		t.Fatalf("exact P(smoke=yes | tub=yes) = %v, want 0.5 (tub and smoke are d-separated)", truth[yes])
	}
	if math.Abs(cOn.Dist[yes]-0.5) < 0.2 {
		t.Fatalf("the chain through the common effect answers %.3f; the test needs it biased", cOn.Dist[yes])
	}
	// The marginal is right here, and its predicted error must say so: the
	// influence bound's common-effect test (tub and lung independent, both
	// dependent on either) blocks tub's change of either from reaching
	// lung's side. Before that test it was 0.33, the fitted prior of a rare
	// observed value, above the invalid chain's own error.
	if dir.Err > 0.01 || dir.Err >= cOn.Err {
		t.Errorf("the marginal's predicted error %.4g for P(smoke | tub = yes): want ≤ 0.01 and below the invalid chain's %.4g", dir.Err, cOn.Err)
	}
	realised := 0.0
	for v := range truth {
		d := cOn.Dist[v] - truth[v]
		realised += d * d
	}
	if cOn.Err < 0.75*realised {
		t.Errorf("with the separation check the invalid chain's error %.4g is below 75%% of its realised squared error %.4g", cOn.Err, realised)
	}
	// Without the check the bias can still show through the bound excess
	// (the chain lies outside the influence bound's ball around the
	// marginal); with neither, the chain's error misses it.
	bare, err := scorer.NewBayes(scorer.WithSeparation(0), scorer.WithInfluence(0))
	if err != nil {
		t.Fatal(err)
	}
	cBare, err := bare.Chain(nil, ix, tub, yes, bad, smoke)
	if err != nil {
		t.Fatal(err)
	}
	if cBare.Err >= 0.25*realised {
		t.Errorf("without the check and the bound the invalid chain's error %.4g should be below 25%% of the realised %.4g (else this test shows nothing)", cBare.Err, realised)
	}
	good := []graphidx.EntityID{lung, either}
	gOn, err := on.Chain(nil, ix, smoke, yes, good, xray)
	if err != nil {
		t.Fatal(err)
	}
	gOff, err := off.Chain(nil, ix, smoke, yes, good, xray)
	if err != nil {
		t.Fatal(err)
	}
	// Both bridges' chain neighbours were observed together, so each hop is
	// tested against its own table (0 charged here). Other witnesses,
	// read only when that table is missing, can charge a valid chain a
	// little: a bridge need not separate the start from a witness that
	// reaches the next node by another path.
	extra, invalid := gOn.Err-gOff.Err, cOn.Err-cOff.Err
	t.Logf("separation charge: valid chain %.3g, invalid chain %.3g", extra, invalid)
	if extra > 0.01*invalid {
		t.Errorf("valid chain smoke → lung → either → xray charged %.3g for separation, more than 1%% of the invalid chain's %.3g", extra, invalid)
	}
	// tub → lung → smoke is valid too (given lung, tub and smoke are
	// separated), but lung's witness "either" is a common effect of tub and
	// lung, so it fails the witness test. The charge is at most the chain's
	// squared distance from the target's marginal (tub and lung are
	// independent, so that distance is tiny), not the 0.21 the witness
	// alone gives.
	lOn, err := on.Chain(nil, ix, tub, yes, []graphidx.EntityID{lung}, smoke)
	if err != nil {
		t.Fatal(err)
	}
	lOff, err := off.Chain(nil, ix, tub, yes, []graphidx.EntityID{lung}, smoke)
	if err != nil {
		t.Fatal(err)
	}
	m := ix.Marginal(smoke)
	d2 := 0.0
	for v := range lOn.Dist {
		d := lOn.Dist[v] - (float64(m[v])+1)/(float64(m[0]+m[1])+2)
		d2 += d * d
	}
	t.Logf("tub → lung → smoke: answers %.3f, separation charge %.3g, squared distance from the marginal %.3g", lOn.Dist[yes], lOn.Err-lOff.Err, d2)
	if got := lOn.Err - lOff.Err; got > d2+1e-12 || got > 0.01*invalid {
		t.Errorf("valid chain tub → lung → smoke charged %.3g for separation: above its squared distance %.3g from the marginal or 1%% of the invalid chain's %.3g", got, d2, invalid)
	}
}

// oracleSeeds is how many corpora TestPublishedOracle samples per network.
const oracleSeeds = 20

// TestPublishedOracle measures how high Spearman's ρ of predicted against
// realised error can go on each published network. Realised squared errors
// are single draws around their expectation (for a binary target the
// variance part is a scaled χ²₁, whose spread spans orders of magnitude),
// so even the exact expected squared error ranks them imperfectly. The
// oracle's prediction for a query in corpus i is the mean realised error
// of the router's answer to the same query over the other oracleSeeds − 1
// corpora (leave-one-out: the expected squared error at this corpus size,
// estimated without corpus i's own noise). It is logged beside the
// model's ρ over the same corpora; the model's must not be above the
// oracle's by more than 0.05 (else the oracle is too noisy to serve as the
// reference). Measured with 20 corpora (seeds 1–20): ASIA model 0.599,
// oracle 0.826; Survey 0.435 and 0.440; Cancer 0.606 and 0.631 (before the
// bound excess and the missing-signal ratio without Var(m̂): 0.602 and
// 0.837, 0.441 and 0.438, 0.635 and 0.638; with 60
// corpora: 0.601 / 0.826, 0.465 / 0.478, 0.583 / 0.606). On Survey and
// Cancer the model ranks about as well as the expected error itself, and
// a ρ floor of 0.6 is out of reach of any predictor of the expected error
// on Survey (one that reads the corpus could in principle follow part of
// its noise). The later networks, measured once with this test run over
// them (20 corpora, distance ≥ 2): Burglary model 0.889, oracle 0.909;
// Sprinkler 0.476 and 0.533; Student −0.012 and 0.601
// (chains through the common effect Grade whose causes were never observed
// together: see publishedNets). Heavy (60 indexes): skipped under -short.
func TestPublishedOracle(t *testing.T) {
	if testing.Short() {
		t.Skip("builds 60 indexes of 50 000 contexts")
	}
	t.Parallel()
	// The first three networks, whose ρ floors the oracle explains; the
	// others were measured once with this test over all six (see above),
	// and are left out to keep it at 60 indexes.
	for _, n := range publishedNets[:3] {
		net, err := n.build()
		if err != nil {
			t.Fatal(err)
		}
		w, err := net.WithHeldOut(world.PublishedHeldOut(net, 2))
		if err != nil {
			t.Fatal(err)
		}
		runs := make([][]eval.QueryResult, oracleSeeds)
		for i := range runs {
			r, err := eval.Run(context.Background(), eval.Config{
				Condition: world.CondLocalGeometric, Seed: int64(i + 1), Network: w, Contexts: publishedContexts, KeepQueries: true,
			})
			if err != nil {
				t.Fatal(err)
			}
			runs[i] = r.Queries
		}
		model, oracle := oracleSpearman(runs)
		t.Logf("%s: Spearman ρ over %d corpora: model %.3f, oracle of the expected squared error %.3f", n.name, oracleSeeds, model, oracle)
		if math.IsNaN(model) || math.IsNaN(oracle) {
			t.Fatalf("%s: ρ model %v, oracle %v", n.name, model, oracle)
		}
		if model > oracle+0.05 {
			t.Errorf("%s: model ρ %.3f above the oracle's %.3f by more than 0.05", n.name, model, oracle)
		}
	}
}

// TestCommonEffectBound: in ASIA (Lauritzen & Spiegelhalter 1988) with
// every pair at distance ≥ 2 held out, the best-signal chain for
// P(bronc | lung = yes) is lung → either → dysp → bronc, through the common
// effect dysp of either and bronc, which were never observed together, so
// neither its hop tables nor the separation check can show its invented
// dependence (it answers P(bronc = yes) ≈ 0.73; exact 0.57). The influence
// bound read from lung's neighbours can: the estimate lies farther from
// the marginal than the bound allows, and the excess is charged (bound
// excess), and as the router's reference it is projected onto the bound's
// ball, where it no longer charges the valid chain through smoke for
// disagreeing with it. Before: the router answered through either and
// dysp, realised squared error 0.049 on this corpus; now through smoke.
func TestCommonEffectBound(t *testing.T) {
	t.Parallel()
	asia, r := publishedQueries(t, world.Asia)
	lung, _ := asia.Index("lung")
	bronc, _ := asia.Index("bronc")
	found := false
	for _, q := range r.Queries {
		if q.From != lung || q.To != bronc || q.Value != 1 {
			continue
		}
		found = true
		got := q.SqErr(eval.EstRouted)
		t.Logf("P(bronc | lung = yes): exact %.3f, routed %.3f through %d bridge(s), squared error %.3g (predicted %.3g)",
			q.Truth[1], q.Est[eval.EstRouted][1], q.ChainBridges, got, q.RoutedErr)
		if q.ChainBridges != 1 || got > 0.001 {
			t.Errorf("P(bronc | lung = yes): routed through %d bridges with squared error %.3g, want the one-bridge chain through smoke (≤ 0.001)", q.ChainBridges, got)
		}
	}
	if !found {
		t.Fatal("query lung = yes → bronc not answered")
	}
}

// TestSprinklerZeroEndToEnd: the sprinkler network (AIMA 3rd ed. §14.5) has
// the deterministic zero P(WetGrass | ¬Sprinkler, ¬Rain) = 0. Its corpus
// must build into an index whose every query (held-out pairs at distance
// ≥ 2 and adjacent pairs, every value) the router answers with a
// distribution (finite, in [0, 1], summing to 1) and a finite, non-negative
// predicted error, and none is skipped.
func TestSprinklerZeroEndToEnd(t *testing.T) {
	t.Parallel()
	_, r := publishedQueries(t, world.Sprinkler)
	if r.HeldOut.Skipped+r.Supported.Skipped != 0 || len(r.Queries) != 2*2*(2+4) {
		t.Fatalf("%d queries answered, %d + %d skipped; want 24 and none", len(r.Queries), r.HeldOut.Skipped, r.Supported.Skipped)
	}
	for _, q := range r.Queries {
		for _, est := range eval.Estimators() {
			p := q.Est[est]
			sum := 0.0
			for _, x := range p {
				if !(x >= 0 && x <= 1) {
					t.Fatalf("%s %d=%d → %d: %s estimate %v", q.Set, q.From, q.Value, q.To, est, p)
				}
				sum += x
			}
			if math.Abs(sum-1) > 1e-9 {
				t.Errorf("%s %d=%d → %d: %s estimate %v sums to %v", q.Set, q.From, q.Value, q.To, est, p, sum)
			}
		}
		if !(q.RoutedErr >= 0) || math.IsInf(q.RoutedErr, 0) {
			t.Errorf("%s %d=%d → %d: predicted error %v", q.Set, q.From, q.Value, q.To, q.RoutedErr)
		}
	}
}

// publishedQueries builds the network, holds out every pair at skeleton
// distance ≥ 2 and runs one corpus (seed 1) with every answered query kept.
func publishedQueries(t *testing.T, build func() (*world.World, error)) (*world.World, eval.Report) {
	t.Helper()
	net, err := build()
	if err != nil {
		t.Fatal(err)
	}
	return net, heldOutQueries(t, net, world.PublishedHeldOut(net, 2), 1)
}

// heldOutQueries holds out pairs of net and runs one corpus (of the seed) with
// every answered query kept.
func heldOutQueries(t *testing.T, net *world.World, pairs [][2]int, seed int64) eval.Report {
	t.Helper()
	w, err := net.WithHeldOut(pairs)
	if err != nil {
		t.Fatal(err)
	}
	r, err := eval.Run(context.Background(), eval.Config{
		Condition: world.CondLocalGeometric, Seed: seed, Network: w, Contexts: publishedContexts, KeepQueries: true,
	})
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// TestUnseenRoutesAsia: ASIA (Lauritzen & Spiegelhalter 1988) with
// `hopwise eval`'s own held-out pairs (MI ≥ 0.001 nats), one corpus
// (seed 1). Before the changes of docs/QUALITY.md §4d:
//
//   - P(smoke | xray = yes) was answered by the marginal with predicted
//     error 1e-4 (realised 0.071, summed over values): xray's neighbours
//     observed with smoke (asia, bronc) are unmoved or carry nothing to it,
//     and their route terms B_t ≈ 0 were taken as the bound, though xray =
//     yes moves "either", whose route to smoke (through lung) was never
//     observed with smoke. P(xray | smoke) likewise (0.0034 each way).
//   - P(bronc | either = yes) went through the common effect dysp of
//     either and bronc with predicted error 0.0023 against a realised
//     0.065: no table showed the invented dependence, until xray, a child
//     of either observed with bronc, was read as a witness.
//
// Now the first three are answered through either and lung (squared error
// ≤ 0.001 required), and the chain through dysp, where the router still
// takes it on this corpus, must be predicted at least a quarter of its
// realised error. Each fails without its change.
func TestUnseenRoutesAsia(t *testing.T) {
	t.Parallel()
	asia, err := world.Asia()
	if err != nil {
		t.Fatal(err)
	}
	pairs, err := publishedRegimes[1].pick(asia)
	if err != nil {
		t.Fatal(err)
	}
	r := heldOutQueries(t, asia, pairs, 1)
	idx := func(name string) int {
		i, ok := asia.Index(name)
		if !ok {
			t.Fatalf("no variable %q", name)
		}
		return i
	}
	xray, smoke, either, bronc := idx("xray"), idx("smoke"), idx("either"), idx("bronc")
	found := 0
	for _, q := range r.Queries {
		label := asia.Labels(q.From)[q.Value]
		got := q.SqErr(eval.EstRouted)
		switch {
		case q.From == xray && q.To == smoke && label == "yes", q.From == smoke && q.To == xray:
			found++
			t.Logf("P(%s | %s = %s): routed %s through %d bridge(s), squared error %.3g (predicted %.3g; marginal %.3g)",
				asia.Name(q.To), asia.Name(q.From), label, q.Mode, q.ChainBridges, got, q.RoutedErr, q.SqErr(eval.EstMarginal))
			if got > 0.001 {
				t.Errorf("P(%s | %s = %s): squared error %.3g, want ≤ 0.001 (the chain through either and lung)", asia.Name(q.To), asia.Name(q.From), label, got)
			}
		case q.From == either && q.To == bronc && label == "yes":
			found++
			t.Logf("P(bronc | either = yes): routed %s through %d bridge(s), squared error %.3g, predicted %.3g", q.Mode, q.ChainBridges, got, q.RoutedErr)
			if q.RoutedErr < got/4 {
				t.Errorf("P(bronc | either = yes): predicted %.3g, below a quarter of the realised %.3g", q.RoutedErr, got)
			}
		}
	}
	if found != 4 {
		t.Fatalf("%d of the 4 queries answered", found)
	}
}

// sprinklerWorld returns the Sprinkler network (AIMA 3rd ed. §14.5) and its
// Cloudy, Sprinkler, Rain and WetGrass variables.
func sprinklerWorld(t *testing.T) (w *world.World, c, sp, r, g int) {
	t.Helper()
	w, err := world.Sprinkler()
	if err != nil {
		t.Fatal(err)
	}
	c, _ = w.Index("Cloudy")
	sp, _ = w.Index("Sprinkler")
	r, _ = w.Index("Rain")
	g, _ = w.Index("WetGrass")
	return w, c, sp, r, g
}

// betterOneBridge is how far from exact, P(tv = true | s = u), the better
// of the exact one-bridge chains s → b → tv through the given bridges is.
func betterOneBridge(t *testing.T, w *world.World, s, u, tv int, exact float64, bridges ...int) float64 {
	t.Helper()
	best := math.Inf(1)
	for _, br := range bridges {
		ch, err := w.TrueChain(s, u, []int{br}, tv)
		if err != nil {
			t.Fatal(err)
		}
		best = min(best, math.Abs(ch[1]-exact))
	}
	return best
}

// TestSprinklerNeedsTwoBridges backs what docs/QUALITY.md §7 says is left
// on Sprinkler (AIMA 3rd ed. §14.5), from the network's exact tables, no
// corpus: with Cloudy–WetGrass and Sprinkler–Rain never observed together
// (`hopwise eval`'s held-out choice), every chain between Cloudy and
// WetGrass has one bridge, Sprinkler or Rain, and neither separates them,
// so even exact tables leave each such chain off by more than 0.05 on at
// least one query. The separator is the pair {Sprinkler, Rain}: a
// first-order (additive) model of the target on the two bridges,
// t ≈ m_t + a·(b1 − b̄1) + b·(b2 − b̄2), whose a and b follow from the two
// pair tables (b_i, t) and the dependence of the bridges through their
// separator (Cloudy in both directions: P(b2 | b1) = Σ_c P(c | b1) P(b2 | c)),
// lands within 0.025 of the exact answer on all four queries, where the
// router's one-bridge answers realise 0.0025–0.009 per query. This is the
// measure of what the parallel answer (router option WithParallelBridges,
// docs/QUALITY.md §4e; TestParallelBridgesExact) gains on this pair.
func TestSprinklerNeedsTwoBridges(t *testing.T) {
	t.Parallel()
	w, c, sp, r, g := sprinklerWorld(t)
	p1 := func(q int, ev map[int]int) float64 { // P(q = true | ev)
		t.Helper()
		p, err := w.Posterior(q, ev)
		if err != nil {
			t.Fatal(err)
		}
		return p[1]
	}
	// E[b2 = true | b1 = v] through the separator sep.
	via := func(b1, v, b2, sep int) float64 {
		x := 0.0
		for cv := range 2 {
			pc := p1(sep, map[int]int{b1: v})
			if cv == 0 {
				pc = 1 - pc
			}
			x += pc * p1(b2, map[int]int{sep: cv})
		}
		return x
	}
	worstChain, worstTwo := 0.0, 0.0
	for _, q := range []struct{ s, t int }{{c, g}, {g, c}} {
		mt := p1(q.t, nil)
		d1 := p1(q.t, map[int]int{sp: 1}) - p1(q.t, map[int]int{sp: 0})
		d2 := p1(q.t, map[int]int{r: 1}) - p1(q.t, map[int]int{r: 0})
		r12 := via(sp, 1, r, c) - via(sp, 0, r, c)
		r21 := via(r, 1, sp, c) - via(r, 0, sp, c)
		det := 1 - r12*r21
		a, b := (d1-r12*d2)/det, (d2-r21*d1)/det
		for u := range 2 {
			exact := p1(q.t, map[int]int{q.s: u})
			two := mt + a*(p1(sp, map[int]int{q.s: u})-p1(sp, nil)) + b*(p1(r, map[int]int{q.s: u})-p1(r, nil))
			best := betterOneBridge(t, w, q.s, u, q.t, exact, sp, r)
			t.Logf("P(%s | %s = %s) = %.4f: better one-bridge chain off by %.4f, two-bridge additive estimate %.4f (off by %.4f)",
				w.Name(q.t), w.Name(q.s), w.Labels(q.s)[u], exact, best, two, math.Abs(two-exact))
			worstChain = max(worstChain, best)
			worstTwo = max(worstTwo, math.Abs(two-exact))
		}
	}
	if worstChain < 0.05 {
		t.Errorf("the better one-bridge chain is off by at most %.4f: the claim of docs/QUALITY.md §7 no longer holds", worstChain)
	}
	if worstTwo > 0.025 {
		t.Errorf("the two-bridge additive estimate is off by %.4f, want ≤ 0.025", worstTwo)
	}
}

// exactStats is a scorer.Stats whose pair tables are a network's exact
// joint marginals scaled to n contexts (rounded counts), with the pairs
// in skip left out as never observed together.
type exactStats struct {
	w    *world.World
	n    float64
	skip map[[2]int]bool
}

func (e exactStats) NumValues(id graphidx.EntityID) int { return e.w.Card(int(id)) }

func (e exactStats) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	if a == b || e.skip[[2]int{int(a), int(b)}] || e.skip[[2]int{int(b), int(a)}] {
		return graphidx.PairStats{}, false
	}
	j, err := e.w.JointMarginal(int(a), int(b))
	if err != nil {
		return graphidx.PairStats{}, false
	}
	c := make([]uint32, len(j))
	for i, p := range j {
		c[i] = uint32(math.Round(p * e.n))
	}
	return graphidx.NewPairStats(a, b, e.w.Card(int(a)), e.w.Card(int(b)), c), true
}

// TestParallelBridgesExact checks the parallel estimate (scorer.Bayes.Parallel,
// docs/QUALITY.md §4e) on Sprinkler's exact tables (10⁷ contexts; AIMA 3rd
// ed. §14.5) against variable elimination, with Cloudy–WetGrass and
// Sprinkler–Rain never observed together: within 0.02 of the exact answer
// on all four queries, where the better one-bridge chain is off by more
// than 0.045 on each, and its variance at the level of 10⁷ contexts.
func TestParallelBridgesExact(t *testing.T) {
	t.Parallel()
	w, c, sp, r, g := sprinklerWorld(t)
	st := exactStats{w: w, n: 1e7, skip: map[[2]int]bool{{c, g}: true, {sp, r}: true}}
	m, err := scorer.NewBayes()
	if err != nil {
		t.Fatal(err)
	}
	id := func(x int) graphidx.EntityID { return graphidx.EntityID(x) }
	for _, q := range []struct{ s, t int }{{c, g}, {g, c}} {
		for u := range 2 {
			exact, err := w.TrueConditional(q.s, u, q.t)
			if err != nil {
				t.Fatal(err)
			}
			est, ok, err := m.Parallel(nil, st, id(q.s), u, id(sp), id(r), id(q.t))
			if err != nil || !ok {
				t.Fatalf("P(%s | %s = %d): ok %v, %v", w.Name(q.t), w.Name(q.s), u, ok, err)
			}
			best := betterOneBridge(t, w, q.s, u, q.t, exact[1], sp, r)
			off := math.Abs(est.Dist[1] - exact[1])
			t.Logf("P(%s | %s = %d) = %.4f: parallel %.4f (off by %.4f; Err %.3g, Var %.3g, realised Σ_v %.3g), better one-bridge chain off by %.4f",
				w.Name(q.t), w.Name(q.s), u, exact[1], est.Dist[1], off, est.Err, est.Var, 2*off*off, best)
			if off > 0.02 {
				t.Errorf("P(%s | %s = %d): parallel estimate off by %.4f, want ≤ 0.02", w.Name(q.t), w.Name(q.s), u, off)
			}
			if best < 0.045 {
				t.Errorf("P(%s | %s = %d): the better one-bridge chain is off by only %.4f", w.Name(q.t), w.Name(q.s), u, best)
			}
			if est.Var > 1e-5 {
				t.Errorf("P(%s | %s = %d): variance %.3g on 10⁷ contexts", w.Name(q.t), w.Name(q.s), u, est.Var)
			}
			if s := est.Dist[0] + est.Dist[1]; math.Abs(s-1) > 1e-12 || est.Dist[0] < 0 || est.Dist[1] < 0 {
				t.Errorf("P(%s | %s = %d): estimate %v is not a distribution", w.Name(q.t), w.Name(q.s), u, est.Dist)
			}
		}
	}
}

// TestParallelBridgesSprinkler runs the parallel answer (router option
// WithParallelBridges, docs/QUALITY.md §4e) on Sprinkler's sampled corpora
// (seeds 1–3, `hopwise eval`'s held-out pairs Cloudy–WetGrass and
// Sprinkler–Rain) against the router without it. On the four
// Cloudy ↔ WetGrass queries, whose separator is the pair {Sprinkler, Rain},
// the parallel answer must be chosen and realise less than a fifth of the
// one-bridge chains' squared error. On the Sprinkler ↔ Rain queries the
// pair {Cloudy, WetGrass} does not separate (WetGrass is their common
// effect) and the chain through Cloudy alone is right: the four pair
// tables of the cycle cannot tell the two diagonals apart (§4e), so on both
// the router answers the midpoint of the parallel answer and the chain,
// which costs Sprinkler ↔ Rain some of what Cloudy ↔ WetGrass gains. The
// test records both.
func TestParallelBridgesSprinkler(t *testing.T) {
	if testing.Short() {
		t.Skip("builds 6 indexes of 50 000 contexts")
	}
	t.Parallel()
	net, err := world.Sprinkler()
	if err != nil {
		t.Fatal(err)
	}
	pairs, err := publishedRegimes[1].pick(net)
	if err != nil {
		t.Fatal(err)
	}
	w, err := net.WithHeldOut(pairs)
	if err != nil {
		t.Fatal(err)
	}
	c, _ := net.Index("Cloudy")
	g, _ := net.Index("WetGrass")
	type sums struct{ cw, sr, cwN, parN int }
	var errs [2][2]float64 // [off, on][Cloudy–WetGrass, Sprinkler–Rain]
	for oi, on := range []bool{false, true} {
		var n sums
		for _, seed := range publishedSeeds {
			r, err := eval.Run(context.Background(), eval.Config{
				Condition: world.CondLocalGeometric, Seed: seed, Network: w, Contexts: publishedContexts, KeepQueries: true,
				RouterOptions: []router.Option{router.WithParallelBridges(on)},
			})
			if err != nil {
				t.Fatal(err)
			}
			for _, q := range r.Queries {
				if q.Set != eval.SetHeldOut {
					continue
				}
				e := q.SqErr(eval.EstRouted) / float64(len(q.Truth))
				if (q.From == c && q.To == g) || (q.From == g && q.To == c) {
					errs[oi][0] += e
					n.cw++
					if on && q.ChainParallel && q.Mode == router.ModeChain {
						n.parN++
					}
				} else {
					errs[oi][1] += e
					n.sr++
				}
			}
		}
		errs[oi][0] /= float64(n.cw)
		errs[oi][1] /= float64(n.sr)
		t.Logf("parallel %v: Cloudy ↔ WetGrass routed MSE %.4g (%d queries), Sprinkler ↔ Rain %.4g (%d queries)", on, errs[oi][0], n.cw, errs[oi][1], n.sr)
		if on && n.parN != n.cw {
			t.Errorf("%d of %d Cloudy ↔ WetGrass queries answered in parallel", n.parN, n.cw)
		}
	}
	if errs[1][0] > errs[0][0]/5 {
		t.Errorf("Cloudy ↔ WetGrass: routed MSE %.4g with the parallel answer, want below a fifth of %.4g without", errs[1][0], errs[0][0])
	}
}

// asiaMIRun runs ASIA (Lauritzen & Spiegelhalter 1988) with `hopwise
// eval`'s own held-out pairs (every non-adjacent pair with MI ≥
// publishedMinMI) on the corpus of the given seed, keeping every query.
func asiaMIRun(t *testing.T, seed int64) (*world.World, eval.Report) {
	t.Helper()
	asia, err := world.Asia()
	if err != nil {
		t.Fatal(err)
	}
	pairs, err := asia.PickHeldOut(asia.NumVars()*asia.NumVars(), publishedMinMI, 1)
	if err != nil {
		t.Fatal(err)
	}
	return asia, heldOutQueries(t, asia, pairs, seed)
}

// queriesOf returns the held-out queries of r from the variable named
// from to the one named to, for the observed value value (every value when
// value < 0).
func queriesOf(t *testing.T, w *world.World, r eval.Report, from, to string, value int) []eval.QueryResult {
	t.Helper()
	f, okF := w.Index(from)
	g, okG := w.Index(to)
	if !okF || !okG {
		t.Fatalf("no variable %q or %q", from, to)
	}
	var qs []eval.QueryResult
	for _, q := range r.Queries {
		if q.From == f && q.To == g && q.Set == eval.SetHeldOut && (value < 0 || q.Value == value) {
			qs = append(qs, q)
		}
	}
	return qs
}

// TestInheritedWitnessAsia: ASIA (Lauritzen & Spiegelhalter 1988) with
// `hopwise eval`'s own held-out pairs, corpus seed 2. P(bronc | either = yes)
// (exact 0.553) has the one-bridge chain through the common effect dysp
// (answer 0.74). Before docs/QUALITY.md §4f its separation check read no
// witness that could show it (tub, which either = yes implies, was gated
// out because P(tub | either = yes) is small), and once tub's test charged
// it, the parallel answer through dysp and xray, which carries the same
// invented route, took its place (0.735). With the witness gate asking
// whether tub = yes itself moves either, and the parallel answer charged the
// separation bias of its bridges' chains, the router answers through the
// valid chain either → lung → smoke → bronc (realised 8e-7).
func TestInheritedWitnessAsia(t *testing.T) {
	t.Parallel()
	asia, r := asiaMIRun(t, 2)
	qs := queriesOf(t, asia, r, "either", "bronc", 1)
	for _, q := range qs {
		got := q.SqErr(eval.EstRouted)
		t.Logf("P(bronc | either = yes): exact %.3f, routed %.3f through %d bridge(s) (parallel %v), squared error %.3g (predicted %.3g)",
			q.Truth[1], q.Est[eval.EstRouted][1], q.ChainBridges, q.ChainParallel, got, q.RoutedErr)
		if got > 0.005 {
			t.Errorf("P(bronc | either = yes): squared error %.3g, want ≤ 0.005 (the chain through dysp realises 0.067)", got)
		}
	}
	if len(qs) == 0 {
		t.Fatal("query either = yes → bronc not answered")
	}
}

// TestRefutedWitnessAsia checks the refutation of a prev-side witness
// (scorer's prevWitnessRefuted, docs/QUALITY.md §4f) on ASIA (Lauritzen &
// Spiegelhalter 1988) with the MI ≥ 0.001 pairs held out, corpus seed 3:
// the valid chain dysp → either → xray has the witness bronc, a second
// cause of the common effect dysp whose table with either is held out. The
// route bronc → dysp → either → tub claims a shift of tub that the table
// (bronc, tub) does not show, so bronc is refuted and the chain keeps its
// own error: predicted 4.3e-4 for dysp = yes (5.6e-3 with bronc's charge,
// realised 1.3e-4). The witness tub of either → dysp → bronc has no such
// neighbour and still charges that chain (TestInheritedWitnessAsia).
func TestRefutedWitnessAsia(t *testing.T) {
	t.Parallel()
	asia, r := asiaMIRun(t, 3)
	qs := queriesOf(t, asia, r, "dysp", "xray", -1)
	for _, q := range qs {
		got := q.SqErr(eval.EstRouted)
		t.Logf("P(xray | dysp = %d): exact %.3f, routed %.3f through %d bridge(s), squared error %.3g, predicted %.3g",
			q.Value, q.Truth[1], q.Est[eval.EstRouted][1], q.ChainBridges, got, q.RoutedErr)
		if q.RoutedErr > 0.002 {
			t.Errorf("P(xray | dysp = %d): predicted error %.3g, want ≤ 0.002 (realised %.3g; bronc's charge gave 0.003–0.006)", q.Value, q.RoutedErr, got)
		}
	}
	if len(qs) != 2 {
		t.Fatalf("%d queries dysp → xray answered, want 2", len(qs))
	}
}

// TestShrunkChargedChainAsia checks the shrink of a chain charged by a
// witness on the observed side (router/shrink.go, docs/QUALITY.md §4g) on
// ASIA (Lauritzen & Spiegelhalter 1988) with the MI ≥ 0.001 pairs held
// out, corpus seed 1: P(bronc | either = yes) (exact 0.553) is answered
// through the common effect dysp (0.738, squared error Σ_v 0.069 before
// the shrink), which the witness tub = yes charges; the answer moves
// the measured bias toward bronc's marginal (0.445) and must land nearer the
// truth than the chain and than the marginal, its predicted error still
// covering the realised one.
func TestShrunkChargedChainAsia(t *testing.T) {
	t.Parallel()
	asia, r := asiaMIRun(t, 1)
	qs := queriesOf(t, asia, r, "either", "bronc", 1)
	for _, q := range qs {
		got, marg := q.SqErr(eval.EstRouted), q.SqErr(eval.EstMarginal)
		t.Logf("P(bronc | either = yes): exact %.3f, routed %.3f through %d bridge(s), squared error Σ_v %.3g (predicted %.3g), marginal %.3f (%.3g)",
			q.Truth[1], q.Est[eval.EstRouted][1], q.ChainBridges, got, q.RoutedErr, q.Est[eval.EstMarginal][1], marg)
		if q.ChainBridges != 1 || q.ChainParallel {
			t.Fatalf("answered through %d bridge(s) (parallel %v), want the one-bridge chain through dysp", q.ChainBridges, q.ChainParallel)
		}
		if got > 0.02 || got > marg {
			t.Errorf("P(bronc | either = yes): squared error %.3g, want ≤ 0.02 and ≤ the marginal's %.3g (the chain through dysp realises 0.069)", got, marg)
		}
		if q.RoutedErr < got {
			t.Errorf("predicted error %.3g below the realised %.3g", q.RoutedErr, got)
		}
	}
	if len(qs) == 0 {
		t.Fatal("query either = yes → bronc not answered")
	}
}
