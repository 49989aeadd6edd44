package demo

import (
	"fmt"
	"image/color"
	"os"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// writePlot draws one bar panel per query set (their scales differ by orders
// of magnitude) with the direct, chained and routed MSE, as a PNG.
func writePlot(path string, r *Report) error {
	colors := []color.Color{
		color.RGBA{R: 0xc0, G: 0x50, B: 0x40, A: 0xff},
		color.RGBA{R: 0x40, G: 0x80, B: 0xb0, A: 0xff},
		color.RGBA{R: 0x50, G: 0xa0, B: 0x50, A: 0xff},
	}
	var panels []*plot.Plot
	for _, row := range []Row{r.HeldOut, r.Supported} {
		p := plot.New()
		p.Title.Text = fmt.Sprintf("%s (%d queries)", row.Set, row.Queries)
		p.Y.Label.Text = "mean squared error vs exact"
		vals := plotter.Values{row.Direct, row.Chained, row.Routed}
		for i, v := range vals {
			// One chart per bar, so each route gets its own colour.
			one := make(plotter.Values, len(vals))
			one[i] = v
			b, err := plotter.NewBarChart(one, vg.Points(40))
			if err != nil {
				return fmt.Errorf("demo: plot: %w", err)
			}
			b.Color = colors[i]
			b.LineStyle.Width = 0
			p.Add(b)
		}
		p.NominalX("direct", "chained", "routed")
		p.Y.Min = 0
		panels = append(panels, p)
	}
	const width, height = 9 * vg.Inch, 4 * vg.Inch
	img := vgimg.New(width, height)
	dc := draw.New(img)
	tiles := draw.Tiles{Rows: 1, Cols: len(panels), PadX: vg.Millimeter * 6, PadY: vg.Millimeter * 2,
		PadTop: vg.Millimeter * 2, PadBottom: vg.Millimeter * 2, PadLeft: vg.Millimeter * 2, PadRight: vg.Millimeter * 2}
	canvases := plot.Align([][]*plot.Plot{panels}, tiles, dc)
	for i, p := range panels {
		p.Draw(canvases[0][i])
	}
	tmp := path + ".tmp"
	f, err := os.Create(tmp)
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	_, err = vgimg.PngCanvas{Canvas: img}.WriteTo(f)
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(tmp, path)
	}
	if err != nil {
		os.Remove(tmp)
		return fmt.Errorf("demo: writing plot %s: %w", path, err)
	}
	return nil
}
