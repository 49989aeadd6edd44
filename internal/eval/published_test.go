package eval_test

import (
	"context"
	"math"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/eval"
	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/scorer"
)

// publishedContexts is the corpus size of the published-network checks: the
// local-geometric contexts of `hopwise eval`, as many as its worlds use.
const publishedContexts = 50000

// publishedSeeds are the corpus seeds of a published-network check: three,
// because one corpus leaves the far pairs' figures at the noise of a single
// sample (each run builds a real index in about 0.2 s).
var publishedSeeds = []int64{1, 2, 3}

// publishedMean runs net with every pair at skeleton distance ≥ minDist held
// out (never observed together): the corpus is sampled as `hopwise eval`
// samples it (local-geometric contexts), the index is built by the real
// builder, and every held-out and supported pair is answered by the real
// router, against exact answers by variable elimination. It returns the
// reports of every seed and the mean of the held-out, supported and
// calibration figures over seeds.
func publishedMean(t *testing.T, net *world.World, minDist int, opts ...scorer.Option) (held, sup eval.Scores, rho float64) {
	t.Helper()
	w, err := net.WithHeldOut(world.PublishedHeldOut(net, minDist))
	if err != nil {
		t.Fatal(err)
	}
	var reps []eval.Report
	for _, seed := range publishedSeeds {
		r, err := eval.Run(context.Background(), eval.Config{
			Condition: world.CondLocalGeometric, Seed: seed, Network: w, Contexts: publishedContexts, ModelOptions: opts,
		})
		if err != nil {
			t.Fatal(err)
		}
		if r.HeldOut.N == 0 || r.Supported.N == 0 {
			t.Fatalf("seed %d: %d held-out and %d supported queries scored", seed, r.HeldOut.N, r.Supported.N)
		}
		reps = append(reps, r)
	}
	m := eval.Summarize(reps).Mean[0]
	return m.HeldOut, m.Supported, m.Calibration.Spearman
}

// publishedNet is one published network of TestPublishedNetworks with the
// bounds its routed answers must meet.
type publishedNet struct {
	name  string
	build func() (*world.World, error)
	// chainTol is how far above the simple count chain the routed held-out
	// MSE may be (1 = not above); minRho is the least Spearman ρ of
	// predicted against realised error (a floor under today's value).
	chainTol, minRho float64
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
//
// None of them was used to fit a constant: the model is fitted on the
// synthetic fit worlds (hopwise eval --fit), so these are held-out checks.
//
// Measured (3 seeds, 50 000 contexts; routed / marginal / count chain, ρ):
// ASIA 0.01153 / 0.02862 / 0.01123, ρ 0.662; Survey 1.613e-5 / 2.464e-5 /
// 1.885e-5, ρ 0.377; Cancer 3.461e-5 / 6.86e-5 / 2.424e-5, ρ 0.638. Before
// the influence bound ρ was 0.403, 0.055 and 0.146; before the range bound
// (Bayes' rule: a target value of small marginal cannot move far unless the
// observed value is rare) ASIA's was 0.473, with the same routed answers;
// before the one-bridge route terms (a chain s → w → t misses only the
// routes of the influence bound not through w) Cancer's was 0.578. Survey's
// floor is under what any predictor of the expected squared error reaches
// there, and Cancer's at that level (TestPublishedOracle). The chain tolerances
// are today's shortfalls, not targets: in ASIA the router and the count
// chain take the same chains through the common effect "either" (tub →
// either → lung), whose bias no table of a distance-2 corpus can show, and
// the router's own choices differ on one query (lung → bronc); in Cancer
// the gap (1.1e-5) is below the error of the marginal itself under local
// sampling (up to 5e-4 per query), where near ties between the marginal
// and the one-bridge chain through "cancer" fall either way.
var publishedNets = []publishedNet{
	{"asia", world.Asia, 1.1, 0.6},
	{"survey", world.Survey, 1.0, 0.35},
	{"cancer", world.Cancer, 1.6, 0.6},
}

// TestPublishedNetworks checks routing on the published networks: every
// non-adjacent pair (skeleton distance ≥ 2) is held out. Held-out pairs: the
// routed answer must be no worse than the target's marginal and within the
// network's tolerance of the simple count chain (fewest bridges, widest
// support). Adjacent pairs: within 10 % of direct. Calibration: Spearman ρ at
// least the network's floor. The mean routed MSE over the networks is
// logged. Heavy (3 seeds per network): skipped under -short.
func TestPublishedNetworks(t *testing.T) {
	if testing.Short() {
		t.Skip("builds 9 indexes of 50 000 contexts")
	}
	t.Parallel()
	mean := 0.0
	for _, n := range publishedNets {
		net, err := n.build()
		if err != nil {
			t.Fatal(err)
		}
		held, sup, rho := publishedMean(t, net, 2)
		mean += held.Routed / float64(len(publishedNets))
		t.Logf("%s, distance ≥ 2: routed %.4g, marginal %.4g, count chain %.4g; supported routed %.4g, direct %.4g; ρ %.3f",
			n.name, held.Routed, held.Marginal, held.CountChain, sup.Routed, sup.Direct, rho)
		if held.Routed > held.Marginal {
			t.Errorf("%s: non-adjacent pairs: routed MSE %.4g above the marginal's %.4g", n.name, held.Routed, held.Marginal)
		}
		if held.Routed > n.chainTol*held.CountChain {
			t.Errorf("%s: non-adjacent pairs: routed MSE %.4g above %g × the count chain's %.4g", n.name, held.Routed, n.chainTol, held.CountChain)
		}
		if sup.Routed > 1.1*sup.Direct {
			t.Errorf("%s: adjacent pairs: routed MSE %.4g above 1.1 × direct %.4g", n.name, sup.Routed, sup.Direct)
		}
		if rho < n.minRho {
			t.Errorf("%s: Spearman ρ %.3f of predicted against realised error, want ≥ %.2f", n.name, rho, n.minRho)
		}
	}
	t.Logf("mean routed held-out MSE over %d networks: %.4g", len(publishedNets), mean)
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
// one-bridge route terms); marginal 0.00123. See
// docs/QUALITY.md. Heavy: skipped under -short.
func TestPublishedAsiaFar(t *testing.T) {
	if testing.Short() {
		t.Skip("builds 6 indexes of 50 000 contexts")
	}
	t.Parallel()
	asia, err := world.Asia()
	if err != nil {
		t.Fatal(err)
	}
	far, _, _ := publishedMean(t, asia, 3)
	off, _, _ := publishedMean(t, asia, 3, scorer.WithSeparation(0))
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
// and without it it stays below 25 % (the failure the check fixes). A chain
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
	if cOff.Err >= 0.25*realised {
		t.Errorf("without the check the invalid chain's error %.4g should be below 25%% of the realised %.4g (else this test shows nothing)", cOff.Err, realised)
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
// reference). Measured with 20 corpora (seeds 1–20): ASIA model 0.602,
// oracle 0.837; Survey 0.441 and 0.438; Cancer 0.635 and 0.638 (with 60
// corpora: 0.601 / 0.826, 0.465 / 0.478, 0.583 / 0.606). On Survey and
// Cancer the model ranks about as well as the expected error itself, and
// a ρ floor of 0.6 is out of reach of any predictor of the expected error
// on Survey (one that reads the corpus could in principle follow part of
// its noise). Heavy (60 indexes): skipped under -short.
func TestPublishedOracle(t *testing.T) {
	if testing.Short() {
		t.Skip("builds 60 indexes of 50 000 contexts")
	}
	t.Parallel()
	type key struct {
		set             string
		from, to, value int
	}
	for _, n := range publishedNets {
		net, err := n.build()
		if err != nil {
			t.Fatal(err)
		}
		w, err := net.WithHeldOut(world.PublishedHeldOut(net, 2))
		if err != nil {
			t.Fatal(err)
		}
		runs := make([][]eval.QueryResult, oracleSeeds)
		real := map[key][]float64{} // realised error per corpus, NaN when not asked
		for i := range runs {
			r, err := eval.Run(context.Background(), eval.Config{
				Condition: world.CondLocalGeometric, Seed: int64(i + 1), Network: w, Contexts: publishedContexts, KeepQueries: true,
			})
			if err != nil {
				t.Fatal(err)
			}
			runs[i] = r.Queries
			for _, q := range r.Queries {
				k := key{q.Set, q.From, q.To, q.Value}
				if real[k] == nil {
					real[k] = make([]float64, oracleSeeds)
					for j := range real[k] {
						real[k][j] = math.NaN()
					}
				}
				real[k][i] = q.SqErr(eval.EstRouted)
			}
		}
		var model, oracle float64
		for i, qs := range runs {
			var pred, orc, got []float64
			for _, q := range qs {
				sum, cnt := 0.0, 0
				for j, x := range real[key{q.Set, q.From, q.To, q.Value}] {
					if j != i && !math.IsNaN(x) {
						sum += x
						cnt++
					}
				}
				if cnt < oracleSeeds/2 {
					continue // asked in too few other corpora to estimate its expectation
				}
				pred = append(pred, q.RoutedErr)
				orc = append(orc, sum/float64(cnt))
				got = append(got, q.SqErr(eval.EstRouted))
			}
			model += eval.Spearman(pred, got) / oracleSeeds
			oracle += eval.Spearman(orc, got) / oracleSeeds
		}
		t.Logf("%s: Spearman ρ over %d corpora: model %.3f, oracle of the expected squared error %.3f", n.name, oracleSeeds, model, oracle)
		if math.IsNaN(model) || math.IsNaN(oracle) {
			t.Fatalf("%s: ρ model %v, oracle %v", n.name, model, oracle)
		}
		if model > oracle+0.05 {
			t.Errorf("%s: model ρ %.3f above the oracle's %.3f by more than 0.05", n.name, model, oracle)
		}
	}
}
