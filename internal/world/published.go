package world

import "fmt"

// Published networks: small Bayesian networks from the literature, typed in
// with their source, used as external checks of the scorer and the router
// (their exact answers come from variable elimination like every other
// world). Unlike Generate and Greenhouse they have no random parts; the
// held-out pairs are chosen by the caller (PublishedHeldOut, WithHeldOut).

// Asia returns the chest-clinic network of Lauritzen & Spiegelhalter (1988),
// "Local computations with probabilities on graphical structures and their
// application to expert systems", J. R. Statist. Soc. B 50(2), 157–224,
// Fig. 1 and the probabilities listed with it: 8 binary variables, labels
// "no" < "yes".
//
//	asia    visit to Asia                     P(yes) = 0.01
//	smoke   smoker                            P(yes) = 0.5
//	tub     tuberculosis    ← asia            yes .05, no .01
//	lung    lung cancer     ← smoke           yes .10, no .01
//	bronc   bronchitis      ← smoke           yes .60, no .30
//	either  tub or lung     ← tub, lung       logical or (deterministic)
//	xray    positive X-ray  ← either          yes .98, no .05
//	dysp    dyspnoea        ← either, bronc   (yes,yes) .9, (yes,no) .7, (no,yes) .8, (no,no) .1
//
// "either" is a common effect of tub and lung (explaining away: given
// either, tub and lung are dependent), and dysp one of either and bronc.
func Asia() (*World, error) {
	yn := []string{"no", "yes"}
	pYes := binaryRows
	const (
		asia = iota
		smoke
		tub
		lung
		bronc
		either
		xray
		dysp
	)
	vars := []Variable{
		asia:  {Name: "asia", Labels: yn, CPT: pYes(0.01)},
		smoke: {Name: "smoke", Labels: yn, CPT: pYes(0.5)},
		tub:   {Name: "tub", Labels: yn, Parents: []int{asia}, CPT: pYes(0.01, 0.05)},
		lung:  {Name: "lung", Labels: yn, Parents: []int{smoke}, CPT: pYes(0.01, 0.10)},
		bronc: {Name: "bronc", Labels: yn, Parents: []int{smoke}, CPT: pYes(0.30, 0.60)},
		// (tub, lung): (no,no), (no,yes), (yes,no), (yes,yes).
		either: {Name: "either", Labels: yn, Parents: []int{tub, lung}, CPT: pYes(0, 1, 1, 1)},
		xray:   {Name: "xray", Labels: yn, Parents: []int{either}, CPT: pYes(0.05, 0.98)},
		// (either, bronc): (no,no), (no,yes), (yes,no), (yes,yes).
		dysp: {Name: "dysp", Labels: yn, Parents: []int{either, bronc}, CPT: pYes(0.1, 0.8, 0.7, 0.9)},
	}
	w, err := New(vars)
	if err != nil {
		return nil, fmt.Errorf("asia: %w", err)
	}
	return w, nil
}

// Survey returns the travel survey network of Scutari & Denis (2014),
// "Bayesian Networks with Examples in R", Chapman & Hall/CRC, chapter 1: six
// discrete variables, three of them with more than two values. The
// probabilities below were typed from memory of that chapter's tables (not
// copied from the book at hand), so they may differ from the printed ones in
// the second decimal; the structure is the book's.
//
//	A  age          adult | old | young      young .3, adult .5, old .2
//	S  sex          F | M                     M .6, F .4
//	E  education    high | uni     ← A, S
//	O  occupation   emp | self     ← E
//	R  residence    big | small    ← E
//	T  transport    car | other | train  ← O, R
//
// E is a common effect of A and S and T one of O and R, so the network has
// two colliders; labels are in ascending byte order as New requires (the
// book lists young, adult, old and car, train, other).
func Survey() (*World, error) {
	const (
		a = iota
		s
		e
		o
		r
		t
	)
	// E | A, S with A in label order (adult, old, young) and S (F, M);
	// each row is P(high), P(uni).
	eCPT := []float64{
		0.70, 0.30, // adult, F
		0.72, 0.28, // adult, M
		0.90, 0.10, // old, F
		0.88, 0.12, // old, M
		0.64, 0.36, // young, F
		0.75, 0.25, // young, M
	}
	// T | O, R with O (emp, self) and R (big, small); each row is P(car),
	// P(other), P(train).
	tCPT := []float64{
		0.58, 0.18, 0.24, // emp, big
		0.48, 0.10, 0.42, // emp, small
		0.70, 0.09, 0.21, // self, big
		0.56, 0.08, 0.36, // self, small
	}
	vars := []Variable{
		a: {Name: "age", Labels: []string{"adult", "old", "young"}, CPT: []float64{0.5, 0.2, 0.3}},
		s: {Name: "sex", Labels: []string{"F", "M"}, CPT: []float64{0.4, 0.6}},
		e: {Name: "education", Labels: []string{"high", "uni"}, Parents: []int{a, s}, CPT: eCPT},
		// rows: high, uni; P(emp), P(self).
		o: {Name: "occupation", Labels: []string{"emp", "self"}, Parents: []int{e}, CPT: []float64{0.96, 0.04, 0.92, 0.08}},
		// rows: high, uni; P(big), P(small).
		r: {Name: "residence", Labels: []string{"big", "small"}, Parents: []int{e}, CPT: []float64{0.75, 0.25, 0.80, 0.20}},
		t: {Name: "transport", Labels: []string{"car", "other", "train"}, Parents: []int{o, r}, CPT: tCPT},
	}
	w, err := New(vars)
	if err != nil {
		return nil, fmt.Errorf("survey: %w", err)
	}
	return w, nil
}

// PublishedHeldOut returns every pair of w at skeleton distance ≥ minDist,
// sorted, for use as held-out (never observed together) pairs with
// WithHeldOut. Pairs that are far apart are the ones a chain must answer;
// unlike PickHeldOut it keeps pairs of any mutual information, including
// independent ones, whose right answer is the target's marginal. O(N·(N+E)).
func PublishedHeldOut(w *World, minDist int) [][2]int {
	n := w.NumVars()
	var out [][2]int
	for a := range n {
		dist, _ := bfs(w.adj, a)
		for b := a + 1; b < n; b++ {
			if dist[b] >= minDist {
				out = append(out, [2]int{a, b})
			}
		}
	}
	return out
}

// Cancer returns the lung-cancer network of Korb & Nicholson (2004),
// "Bayesian Artificial Intelligence", Chapman & Hall/CRC, §2.2 (Fig. 2.1 and
// its tables): five binary variables, one common effect. The probabilities
// below were typed from memory of that example (not copied from the book
// at hand); the structure is the book's.
//
//	pollution   high | low                  P(low) = 0.9
//	smoker      no | yes                    P(yes) = 0.3
//	cancer      no | yes    ← pollution, smoker
//	            (high,yes) .05, (high,no) .02, (low,yes) .03, (low,no) .001
//	xray        negative | positive  ← cancer   yes .9, no .2
//	dysp        no | yes    ← cancer            yes .65, no .3
//
// cancer is a common effect of pollution and smoker, which are independent;
// every non-adjacent pair is two hops apart through cancer.
func Cancer() (*World, error) {
	const (
		pollution = iota
		smoker
		cancer
		xray
		dysp
	)
	yn := []string{"no", "yes"}
	vars := []Variable{
		pollution: {Name: "pollution", Labels: []string{"high", "low"}, CPT: []float64{0.1, 0.9}},
		smoker:    {Name: "smoker", Labels: yn, CPT: []float64{0.7, 0.3}},
		// (pollution, smoker): (high,no), (high,yes), (low,no), (low,yes).
		cancer: {Name: "cancer", Labels: yn, Parents: []int{pollution, smoker}, CPT: []float64{
			0.98, 0.02, 0.95, 0.05, 0.999, 0.001, 0.97, 0.03}},
		xray: {Name: "xray", Labels: []string{"negative", "positive"}, Parents: []int{cancer}, CPT: []float64{0.8, 0.2, 0.1, 0.9}},
		dysp: {Name: "dysp", Labels: yn, Parents: []int{cancer}, CPT: []float64{0.7, 0.3, 0.35, 0.65}},
	}
	w, err := New(vars)
	if err != nil {
		return nil, fmt.Errorf("cancer: %w", err)
	}
	return w, nil
}

// binaryRows builds the CPT of a binary variable from P(second label |
// configuration), one probability per parent configuration in
// configuration order (first parent most significant, each parent's labels
// in ascending order).
func binaryRows(ps ...float64) []float64 {
	out := make([]float64, 0, 2*len(ps))
	for _, p := range ps {
		out = append(out, 1-p, p)
	}
	return out
}

// falseTrue are the labels of the two AIMA networks, in ascending byte
// order: value 0 is "false", value 1 "true".
var falseTrue = []string{"false", "true"}

// Burglary returns the burglary-alarm network of Russell & Norvig,
// "Artificial Intelligence: A Modern Approach", 3rd ed. (2010), §14.2,
// Fig. 14.2: five binary variables in this order (value 1 = "true").
//
//	Burglary                          P(true) = .001
//	Earthquake                        P(true) = .002
//	Alarm      ← Burglary, Earthquake (t,t) .95, (t,f) .94, (f,t) .29, (f,f) .001
//	JohnCalls  ← Alarm                t .90, f .05
//	MaryCalls  ← Alarm                t .70, f .01
//
// Alarm is a common effect of two independent causes; the book's results
// P(Burglary | JohnCalls, MaryCalls) = ⟨0.284, 0.716⟩ (§14.4.1) and
// P(j, m, a, ¬b, ¬e) = 0.000628 (§14.2.1) are checked in the tests.
func Burglary() (*World, error) {
	const (
		b = iota
		e
		a
	)
	vars := []Variable{
		{Name: "Burglary", Labels: falseTrue, CPT: binaryRows(0.001)},
		{Name: "Earthquake", Labels: falseTrue, CPT: binaryRows(0.002)},
		// (B, E): (f,f), (f,t), (t,f), (t,t).
		{Name: "Alarm", Labels: falseTrue, Parents: []int{b, e}, CPT: binaryRows(0.001, 0.29, 0.94, 0.95)},
		{Name: "JohnCalls", Labels: falseTrue, Parents: []int{a}, CPT: binaryRows(0.05, 0.90)},
		{Name: "MaryCalls", Labels: falseTrue, Parents: []int{a}, CPT: binaryRows(0.01, 0.70)},
	}
	w, err := New(vars)
	if err != nil {
		return nil, fmt.Errorf("burglary: %w", err)
	}
	return w, nil
}

// Sprinkler returns the sprinkler network of Russell & Norvig, "Artificial
// Intelligence: A Modern Approach", 3rd ed. (2010), §14.5, Fig. 14.12(a):
// four binary variables in this order (value 1 = "true").
//
//	Cloudy                           P(true) = .5
//	Sprinkler  ← Cloudy              t .10, f .50
//	Rain       ← Cloudy              t .80, f .20
//	WetGrass   ← Sprinkler, Rain     (t,t) .99, (t,f) .90, (f,t) .90, (f,f) 0
//
// WetGrass is a common effect of Sprinkler and Rain, which depend on each
// other only through Cloudy. P(WetGrass | ¬Sprinkler, ¬Rain) = 0 is a
// deterministic zero: the configuration (¬s, ¬r, w) never occurs, so a
// context can never show it. The book's P(Rain | Sprinkler = true) =
// ⟨0.3, 0.7⟩ (§14.5.1) is checked in the tests.
func Sprinkler() (*World, error) {
	const (
		c = iota
		s
		r
	)
	vars := []Variable{
		{Name: "Cloudy", Labels: falseTrue, CPT: binaryRows(0.5)},
		{Name: "Sprinkler", Labels: falseTrue, Parents: []int{c}, CPT: binaryRows(0.5, 0.1)},
		{Name: "Rain", Labels: falseTrue, Parents: []int{c}, CPT: binaryRows(0.2, 0.8)},
		// (S, R): (f,f), (f,t), (t,f), (t,t).
		{Name: "WetGrass", Labels: falseTrue, Parents: []int{s, r}, CPT: binaryRows(0, 0.90, 0.90, 0.99)},
	}
	w, err := New(vars)
	if err != nil {
		return nil, fmt.Errorf("sprinkler: %w", err)
	}
	return w, nil
}

// Student returns the student network of Koller & Friedman (2009),
// "Probabilistic Graphical Models: Principles and Techniques", MIT Press,
// Fig. 3.4: five variables, Grade with three values. The probabilities
// below were typed from memory of that figure (not copied from the book at
// hand); the tests check them against the posteriors the book's §3.2.1
// quotes (also from memory), which they reproduce to the printed digits.
//
//	Difficulty    d0 | d1                       d0 .6, d1 .4
//	Intelligence  i0 | i1                       i0 .7, i1 .3
//	Grade         g1 | g2 | g3  ← Intelligence, Difficulty
//	              (i0,d0) .3 .4 .3, (i0,d1) .05 .25 .7,
//	              (i1,d0) .9 .08 .02, (i1,d1) .5 .3 .2
//	SAT           s0 | s1       ← Intelligence  i0 .95 .05, i1 .2 .8
//	Letter        l0 | l1       ← Grade         g1 .1 .9, g2 .4 .6, g3 .99 .01
//
// Grade is a common effect of Difficulty and Intelligence (g1 is the best
// grade); the labels are the book's and already in ascending byte order.
func Student() (*World, error) {
	const (
		d = iota
		i
		g
	)
	vars := []Variable{
		{Name: "Difficulty", Labels: []string{"d0", "d1"}, CPT: []float64{0.6, 0.4}},
		{Name: "Intelligence", Labels: []string{"i0", "i1"}, CPT: []float64{0.7, 0.3}},
		// (I, D): (i0,d0), (i0,d1), (i1,d0), (i1,d1); each row g1, g2, g3.
		{Name: "Grade", Labels: []string{"g1", "g2", "g3"}, Parents: []int{i, d}, CPT: []float64{
			0.3, 0.4, 0.3,
			0.05, 0.25, 0.7,
			0.9, 0.08, 0.02,
			0.5, 0.3, 0.2,
		}},
		{Name: "SAT", Labels: []string{"s0", "s1"}, Parents: []int{i}, CPT: []float64{0.95, 0.05, 0.2, 0.8}},
		{Name: "Letter", Labels: []string{"l0", "l1"}, Parents: []int{g}, CPT: []float64{0.1, 0.9, 0.4, 0.6, 0.99, 0.01}},
	}
	w, err := New(vars)
	if err != nil {
		return nil, fmt.Errorf("student: %w", err)
	}
	return w, nil
}
