package tuner

import (
	"errors"
	"fmt"
	"image/color"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/plotutil"
	"gonum.org/v1/plot/vg"
)

// WritePlots writes value.png (estimated value by τ, one series per H,
// with intervals) and calibration.png (the router's expected error against
// the realised error) into dir, creating it, and returns their paths.
func WritePlots(dir string, rep *Report) ([]string, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	vp := filepath.Join(dir, "value.png")
	if err := plotValue(vp, rep); err != nil {
		return nil, err
	}
	cp := filepath.Join(dir, "calibration.png")
	if err := plotCalibration(cp, rep.Calibration); err != nil {
		return nil, err
	}
	return []string{vp, cp}, nil
}

func plotValue(path string, rep *Report) error {
	p := plot.New()
	p.Title.Text = fmt.Sprintf("estimated policy value (%s, %s) by threshold τ", strings.ToUpper(rep.Estimator), rep.Objective)
	p.X.Label.Text = "τ (routing score threshold; grid points evenly spaced)"
	p.Y.Label.Text = "estimated value with bootstrap interval"
	// The automatic grid follows the quantiles of the logged scores, which
	// bunch up, so points are placed by their rank in the τ grid and the
	// ticks carry the τ values.
	var taus []float64
	for _, pol := range rep.Policies {
		taus = append(taus, pol.Tau)
	}
	slices.Sort(taus)
	taus = slices.Compact(taus)
	rank := func(tau float64) float64 { i, _ := slices.BinarySearch(taus, tau); return float64(i) }
	var ticks []plot.Tick
	step := max(1, (len(taus)+7)/8)
	labels := FormatTaus(taus)
	for i := range taus {
		t := plot.Tick{Value: float64(i)}
		if i%step == 0 || i == len(taus)-1 {
			t.Label = labels[i]
		}
		ticks = append(ticks, t)
	}
	p.X.Tick.Marker = plot.ConstantTicks(ticks)
	byH := map[int][]Policy{}
	var hs []int
	for _, pol := range rep.Policies {
		if !pol.Supported {
			continue
		}
		if _, ok := byH[pol.MaxHops]; !ok {
			hs = append(hs, pol.MaxHops)
		}
		byH[pol.MaxHops] = append(byH[pol.MaxHops], pol)
	}
	slices.Sort(hs)
	if len(hs) == 0 {
		return errors.New("plot: no supported policy to draw")
	}
	for k, h := range hs {
		pts := byH[h]
		slices.SortFunc(pts, func(a, b Policy) int { return cmpFloat(a.Tau, b.Tau) })
		xys := make(plotter.XYs, len(pts))
		errs := make(plotter.YErrors, len(pts))
		for i, pol := range pts {
			e := pol.Pick(rep.Estimator).Value
			// spread the H series a little so their intervals stay visible
			xys[i].X, xys[i].Y = rank(pol.Tau)+0.12*(float64(k)-float64(len(hs)-1)/2), e.Est
			errs[i].Low, errs[i].High = e.Est-e.Lo, e.Hi-e.Est
		}
		line, points, err := plotter.NewLinePoints(xys)
		if err != nil {
			return fmt.Errorf("plot: %w", err)
		}
		col := plotutil.Color(k)
		line.Color, points.Color = col, col
		points.Shape = plotutil.Shape(k)
		bars, err := plotter.NewYErrorBars(struct {
			plotter.XYs
			plotter.YErrors
		}{xys, errs})
		if err != nil {
			return fmt.Errorf("plot: %w", err)
		}
		bars.Color = col
		p.Add(line, points, bars)
		p.Legend.Add(fmt.Sprintf("H = %d", h), line, points)
	}
	if rep.Best != nil {
		e := rep.Best.Pick(rep.Estimator).Value
		s, err := plotter.NewScatter(plotter.XYs{{X: rank(rep.Best.Tau), Y: e.Est}})
		if err == nil {
			s.Color = color.RGBA{R: 0xd0, A: 0xff}
			s.Radius = vg.Points(6)
			p.Add(s)
			p.Legend.Add(fmt.Sprintf("best estimated τ=%s H=%d", FormatTaus([]float64{rep.Best.Tau})[0], rep.Best.MaxHops), s)
		}
	}
	p.Add(plotter.NewGrid())
	p.Legend.Top = false
	return p.Save(8*vg.Inch, 5*vg.Inch, path)
}

func plotCalibration(path string, bins []CalibBin) error {
	if len(bins) == 0 {
		return errors.New("plot: no calibration data")
	}
	p := plot.New()
	p.Title.Text = "calibration: router expected error vs realised error"
	p.X.Label.Text = "predicted: router expected error of the chosen estimate (bin mean)"
	p.Y.Label.Text = "realised: 1 − outcome score (bin mean)"
	xys := make(plotter.XYs, len(bins))
	for i, b := range bins {
		xys[i].X, xys[i].Y = b.Predicted, b.Realised
	}
	line, points, err := plotter.NewLinePoints(xys)
	if err != nil {
		return fmt.Errorf("plot: %w", err)
	}
	p.Add(line, points, plotter.NewGrid())
	return p.Save(6*vg.Inch, 4.5*vg.Inch, path)
}
