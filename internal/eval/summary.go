package eval

import (
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"
)

// Summary is the JSON document of `hopwise eval`: every world, and per
// condition the mean over its worlds.
//
//	{"worlds":[{"condition":…,"seed":…,"heldout":{"direct":x,…,"n":k},
//	            "supported":{…},"calibration":{"spearman":x,"mean_ratio":x},…}],
//	 "mean":[{"condition":…,"seeds":[…],"heldout":{…},"supported":{…},"calibration":{…}}],
//	 "mse":"…definition…"}
type Summary struct {
	Worlds []Report `json:"worlds"`
	Mean   []Mean   `json:"mean"`
	// MSE states the error definition the numbers use.
	MSE string `json:"mse"`
	// CalibrationDef states how calibration is measured.
	CalibrationDef string `json:"calibration_def"`
	// Title, when set, replaces the per-condition plot title of WritePlot.
	Title string `json:"-"`
}

// Mean averages the reports of one condition: every score and calibration
// figure is the plain mean over worlds (not over pooled queries), and n is the
// total number of queries.
type Mean struct {
	Condition   string      `json:"condition"`
	Seeds       []int64     `json:"seeds"`
	HeldOut     Scores      `json:"heldout"`
	Supported   Scores      `json:"supported"`
	Calibration Calibration `json:"calibration"`
}

// MSEDefinition and CalibrationDefinition are the texts stored in Summary.
const (
	MSEDefinition = "per query: sum over the target's K values of (estimate - exact P(to | from=value))^2, divided by K; " +
		"per set: plain mean over queries; held-out and supported pairs are queried in both directions for every value of the observed endpoint"
	CalibrationDefinition = "predicted = router Decision.Err of the chosen estimate; realised = sum over values of squared error of that estimate; " +
		"spearman = rank correlation over all scored queries of a world; mean_ratio = mean(predicted)/mean(realised)"
)

// Summarize groups reports by condition, in the order conditions first appear.
func Summarize(reports []Report) Summary {
	s := Summary{Worlds: reports, MSE: MSEDefinition, CalibrationDef: CalibrationDefinition}
	var order []string
	groups := map[string][]Report{}
	for _, r := range reports {
		if _, ok := groups[r.Condition]; !ok {
			order = append(order, r.Condition)
		}
		groups[r.Condition] = append(groups[r.Condition], r)
	}
	for _, c := range order {
		g := groups[c]
		m := Mean{Condition: c}
		for _, r := range g {
			m.Seeds = append(m.Seeds, r.Seed)
		}
		m.HeldOut = meanScores(g, func(r Report) Scores { return r.HeldOut })
		m.Supported = meanScores(g, func(r Report) Scores { return r.Supported })
		n := float64(len(g))
		for _, r := range g {
			m.Calibration.Spearman += r.Calibration.Spearman / n
			m.Calibration.MeanRatio += r.Calibration.MeanRatio / n
			m.Calibration.N += r.Calibration.N
		}
		s.Mean = append(s.Mean, m)
	}
	return s
}

func meanScores(g []Report, get func(Report) Scores) Scores {
	var m Scores
	n := float64(len(g))
	for _, r := range g {
		s := get(r)
		for _, e := range Estimators() {
			m.set(e, m.Get(e)+s.Get(e)/n)
		}
		m.N += s.N
		m.Skipped += s.Skipped
		m.ChainShare += s.ChainShare / n
		m.ChainFound += s.ChainFound / n
		m.IdealHops += s.IdealHops / n
	}
	return m
}

// WriteTable writes the summary as an aligned text table: one row per world
// and set, then the per-condition means, then calibration.
func (s Summary) WriteTable(w io.Writer) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	head := []string{"condition", "seed", "set"}
	for _, e := range Estimators() {
		head = append(head, e)
	}
	head = append(head, "n", "chain%", "spearman", "mean_ratio")
	fmt.Fprintln(tw, strings.Join(head, "\t")+"\t")
	row := func(cond, seed, set string, sc Scores, cal *Calibration) {
		cells := []string{cond, seed, set}
		for _, e := range Estimators() {
			cells = append(cells, num(sc.Get(e)))
		}
		cells = append(cells, fmt.Sprint(sc.N), fmt.Sprintf("%.1f", 100*sc.ChainShare))
		if cal != nil {
			cells = append(cells, num(cal.Spearman), num(cal.MeanRatio))
		} else {
			cells = append(cells, "", "")
		}
		fmt.Fprintln(tw, strings.Join(cells, "\t")+"\t")
	}
	for _, r := range s.Worlds {
		row(r.Condition, fmt.Sprint(r.Seed), SetHeldOut, r.HeldOut, &r.Calibration)
		row("", "", SetSupported, r.Supported, nil)
	}
	for _, m := range s.Mean {
		row(m.Condition, fmt.Sprintf("mean(%d)", len(m.Seeds)), SetHeldOut, m.HeldOut, &m.Calibration)
		row("", "", SetSupported, m.Supported, nil)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	_, err := fmt.Fprintf(w, "\nMSE: %s.\nCalibration: %s.\n", MSEDefinition, CalibrationDefinition)
	return err
}

func num(x float64) string {
	if math.IsNaN(x) {
		return "—"
	}
	if x != 0 && math.Abs(x) < 1e-3 {
		return fmt.Sprintf("%.2e", x)
	}
	return fmt.Sprintf("%.5f", x)
}
