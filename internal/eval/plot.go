package eval

import (
	"fmt"
	"image/color"
	"io"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"github.com/hopwise/hopwise/internal/atomicfile"
)

// WritePlot draws the per-condition means of s as a PNG at path: one panel
// per condition, the estimators on the x axis, and for each a pair of bars,
// held-out and supported MSE, labelled with their values (the numbers of the
// table's mean rows). The file is written to a temporary name and renamed.
func (s Summary) WritePlot(path string) error {
	if len(s.Mean) == 0 {
		return fmt.Errorf("eval: plot: no worlds")
	}
	sets := []struct {
		name string
		get  func(Mean) Scores
		col  color.Color
	}{
		{SetHeldOut, func(m Mean) Scores { return m.HeldOut }, color.RGBA{R: 0xc0, G: 0x50, B: 0x40, A: 0xff}},
		{SetSupported, func(m Mean) Scores { return m.Supported }, color.RGBA{R: 0x40, G: 0x80, B: 0xb0, A: 0xff}},
	}
	ests := Estimators()
	const barW = 14
	var rows [][]*plot.Plot
	for _, m := range s.Mean {
		p := plot.New()
		p.Title.Text = fmt.Sprintf("%s: mean over %d world(s)", m.Condition, len(m.Seeds))
		if s.Title != "" {
			p.Title.Text = s.Title
		}
		p.Y.Label.Text = "MSE vs exact truth"
		p.Y.Min = 0
		top := 0.0
		for i, set := range sets {
			sc := set.get(m)
			vals := make(plotter.Values, len(ests))
			for j, e := range ests {
				v := sc.Get(e)
				if math.IsNaN(v) {
					v = 0
				}
				vals[j] = v
				top = max(top, v)
			}
			b, err := plotter.NewBarChart(vals, vg.Points(barW))
			if err != nil {
				return fmt.Errorf("eval: plot: %w", err)
			}
			b.Color = set.col
			b.LineStyle.Width = 0
			b.Offset = vg.Points(barW * (float64(i) - 0.5))
			p.Add(b)
			p.Legend.Add(fmt.Sprintf("%s (n=%d)", set.name, sc.N), b)
			xys := make(plotter.XYs, len(ests))
			labels := make([]string, len(ests))
			for j := range ests {
				xys[j].X, xys[j].Y = float64(j), vals[j]
				labels[j] = fmt.Sprintf("%.4f", vals[j])
			}
			lb, err := plotter.NewLabels(plotter.XYLabels{XYs: xys, Labels: labels})
			if err != nil {
				return fmt.Errorf("eval: plot: %w", err)
			}
			for k := range lb.TextStyle {
				lb.TextStyle[k].Font.Size = vg.Points(7)
				lb.TextStyle[k].Rotation = math.Pi / 2
			}
			lb.Offset = vg.Point{X: vg.Points(barW*(float64(i)-0.5) + 3), Y: vg.Points(2)}
			p.Add(lb)
		}
		p.Y.Max = top * 1.35
		p.Legend.Top = true
		p.NominalX(ests...)
		rows = append(rows, []*plot.Plot{p})
	}
	width, height := 10*vg.Inch, vg.Length(len(rows))*4*vg.Inch
	img := vgimg.New(width, height)
	dc := draw.New(img)
	tiles := draw.Tiles{Rows: len(rows), Cols: 1, PadX: vg.Millimeter * 4, PadY: vg.Millimeter * 6,
		PadTop: vg.Millimeter * 2, PadBottom: vg.Millimeter * 2, PadLeft: vg.Millimeter * 2, PadRight: vg.Millimeter * 4}
	canvases := plot.Align(rows, tiles, dc)
	for i := range rows {
		rows[i][0].Draw(canvases[i][0])
	}
	err := atomicfile.Write(path, ".hopwise-plot-*", func(w io.Writer) error {
		_, err := vgimg.PngCanvas{Canvas: img}.WriteTo(w)
		return err
	})
	if err != nil {
		return fmt.Errorf("eval: writing plot %s: %w", path, err)
	}
	return nil
}
