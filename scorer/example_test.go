package scorer_test

import (
	"fmt"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// Greenhouse entities for the examples. Value indexes follow the ascending
// order of the labels: vent {open, shut}, humidity {high, low},
// mildew {absent, present}.
const (
	vent graphidx.EntityID = iota + 1
	humidity
	mildew
	pump
)

// greenhouse returns in-memory statistics (memStats, a small scorer.Stats
// defined in fake_test.go; a real program passes a *graphidx.Index).
// vent–humidity and humidity–mildew are seen together often; vent and
// mildew only in a few contexts.
func greenhouse() scorer.Stats {
	return newMemStats().entity(vent, 2).entity(humidity, 2).entity(mildew, 2).entity(pump, 2).
		pair(vent, humidity, [][]uint32{{40, 160}, {150, 50}}).   // rows: vent open, shut
		pair(humidity, mildew, [][]uint32{{120, 70}, {190, 20}}). // rows: humidity high, low
		pair(vent, mildew, [][]uint32{{3, 1}, {2, 2}}).
		pair(vent, pump, [][]uint32{{90, 110}, {100, 100}}).
		pair(pump, mildew, [][]uint32{{150, 40}, {160, 60}})
}

func ExampleBayes_Direct() {
	m, err := scorer.NewBayes()
	if err != nil {
		panic(err)
	}
	st := greenhouse()
	// P(humidity | vent = open): posterior mean (40+1)/(200+2), (160+1)/(200+2).
	est, err := m.Direct(nil, st, vent, 0, humidity)
	if err != nil {
		panic(err)
	}
	fmt.Printf("P(humidity=high|vent=open) = %.4f  err %.6f  support %d\n", est.Dist[0], est.Err, est.Support)
	// Output:
	// P(humidity=high|vent=open) = 0.2030  err 0.001594  support 400
}

func ExampleBayes_Chain() {
	m, err := scorer.NewBayes(scorer.WithBeta(0.001))
	if err != nil {
		panic(err)
	}
	st := greenhouse()
	ws := scorer.NewWorkspace() // reuse across calls on one goroutine
	direct, err := m.Direct(ws, st, vent, 0, mildew)
	if err != nil {
		panic(err)
	}
	chain, err := m.Chain(ws, st, vent, 0, []graphidx.EntityID{humidity}, mildew)
	if err != nil {
		panic(err)
	}
	fmt.Printf("direct: P(mildew=present|vent=open) = %.4f  err %.4f  support %d\n", direct.Dist[1], direct.Err, direct.Support)
	fmt.Printf("chain:  P(mildew=present|vent=open) = %.4f  err %.4f  support %d\n", chain.Dist[1], chain.Err, chain.Support)
	fmt.Printf("gain %.4f\n", direct.Err-chain.Err)
	// Output:
	// direct: P(mildew=present|vent=open) = 0.3333  err 0.0635  support 8
	// chain:  P(mildew=present|vent=open) = 0.1520  err 0.0056  support 400
	// gain 0.0579
}

func ExampleCombine() {
	// β is pinned here. The pump chain keeps no detectable signal (both of
	// its edges are close to independent), so its error carries the
	// missing-signal bias γ·δ² of the default model and Combine all but
	// ignores it.
	m, err := scorer.NewBayes(scorer.WithBeta(0.001))
	if err != nil {
		panic(err)
	}
	st := greenhouse()
	ws := scorer.NewWorkspace()
	a, err := m.Chain(ws, st, vent, 0, []graphidx.EntityID{humidity}, mildew)
	if err != nil {
		panic(err)
	}
	b, err := m.Chain(ws, st, vent, 0, []graphidx.EntityID{pump}, mildew)
	if err != nil {
		panic(err)
	}
	c, err := scorer.Combine([]scorer.Estimate{a, b})
	if err != nil {
		panic(err)
	}
	fmt.Printf("via humidity %.4f (err %.5f), via pump %.4f (err %.5f)\n", a.Dist[1], a.Err, b.Dist[1], b.Err)
	fmt.Printf("combined     %.4f (err %.5f)\n", c.Dist[1], c.Err)
	// Output:
	// via humidity 0.1520 (err 0.00561), via pump 0.2460 (err 0.09379)
	// combined     0.1573 (err 0.00530)
}

func ExampleSupport() {
	// Presence-only: a lexicon matched in greenhouse log paragraphs.
	st := newMemStats().entity(vent, 1).entity(humidity, 1).entity(mildew, 1).
		pair(vent, humidity, [][]uint32{{38}}).pair(humidity, mildew, [][]uint32{{18}})
	m, err := scorer.NewSupport(scorer.WithV0(0.25), scorer.WithN0(2), scorer.WithBeta(0.01))
	if err != nil {
		panic(err)
	}
	direct, _ := m.Direct(nil, st, vent, 0, mildew)
	chain, _ := m.Chain(nil, st, vent, 0, []graphidx.EntityID{humidity}, mildew)
	// direct: 0.25/(0+2); chain: 0.25/(38+2) + 0.25/(18+2) + 0.01.
	fmt.Printf("direct err %.4f, chain err %.4f\n", direct.Err, chain.Err)
	// Output:
	// direct err 0.1250, chain err 0.0288
}

func ExampleWorkspace_BorrowDist() {
	m, err := scorer.NewBayes(scorer.WithBeta(0.001))
	if err != nil {
		panic(err)
	}
	st := greenhouse()
	ws := scorer.NewWorkspace()
	ws.BorrowDist(true) // Dist now lives in ws until the next call
	best := []float64{}
	bestErr := 0.0
	for _, bridge := range []graphidx.EntityID{humidity, pump} {
		est, err := m.Chain(ws, st, vent, 0, []graphidx.EntityID{bridge}, mildew)
		if err != nil {
			panic(err)
		}
		if len(best) == 0 || est.Err < bestErr {
			best = append(best[:0], est.Dist...) // copy what is kept
			bestErr = est.Err
		}
	}
	fmt.Printf("best chain: P(mildew=present|vent=open) = %.4f  err %.5f\n", best[1], bestErr)
	// Output:
	// best chain: P(mildew=present|vent=open) = 0.1520  err 0.00561
}

// ExampleNew builds a model from its serialisable description: start from
// the defaults, change a constant, and let New validate and construct it.
func ExampleNew() {
	cfg := scorer.DefaultModelConfig()
	cfg.Bayes.NoiseK = 2
	m, err := scorer.New(cfg)
	fmt.Println(m.Name(), m.(*scorer.Bayes).NoiseK(), err)

	cfg.Bayes.MissingDelta = 1.5
	_, err = scorer.New(cfg)
	fmt.Println(err)

	cfg = scorer.DefaultModelConfig()
	cfg.Name = scorer.ModelSupport
	m, err = scorer.New(cfg)
	fmt.Println(m.Name(), m.HopBias() == scorer.DefaultSupportBeta, err)
	// Output:
	// bayes 2 <nil>
	// scorer: bad option: MissingDelta: δ must be in [0, 1], got 1.5
	// support true <nil>
}
