package report

import (
	"fmt"
	"image/color"
	"path/filepath"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
)

// lineColours are distinguishable on screen and in greyscale print.
var lineColours = []color.RGBA{
	{R: 0x1b, G: 0x4f, B: 0x9c, A: 0xff},
	{R: 0xc2, G: 0x3b, B: 0x22, A: 0xff},
	{R: 0x2e, G: 0x8b, B: 0x57, A: 0xff},
	{R: 0x8e, G: 0x44, B: 0xad, A: 0xff},
	{R: 0xd4, G: 0x8a, B: 0x00, A: 0xff},
	{R: 0x44, G: 0x44, B: 0x44, A: 0xff},
}

// WriteHistoryPlot draws each probe's temperature and the part's minimum
// and maximum against time into dir/history.png.
func WriteHistoryPlot(dir, title string, probeNames []string, rows []Row) error {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "time, s"
	p.Y.Label.Text = "temperature, °C"
	p.Add(plotter.NewGrid())

	series := func(pick func(Row) float64) plotter.XYs {
		xy := make(plotter.XYs, len(rows))
		for i, r := range rows {
			xy[i].X, xy[i].Y = r.Time, pick(r)
		}
		return xy
	}
	for i, name := range probeNames {
		l, err := plotter.NewLine(series(func(r Row) float64 { return r.Probes[i] }))
		if err != nil {
			return fmt.Errorf("plot probe %s: %w", name, err)
		}
		l.Color = lineColours[i%len(lineColours)]
		l.Width = vg.Points(1.6)
		p.Add(l)
		p.Legend.Add(name, l)
	}
	for _, band := range []struct {
		name string
		pick func(Row) float64
	}{{"part max", func(r Row) float64 { return r.Max }}, {"part min", func(r Row) float64 { return r.Min }}} {
		l, err := plotter.NewLine(series(band.pick))
		if err != nil {
			return fmt.Errorf("plot %s: %w", band.name, err)
		}
		l.Color = color.Gray{Y: 0x99}
		l.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
		p.Add(l)
		p.Legend.Add(band.name, l)
	}
	// The curves of a heating part fill the top right, those of a cooling
	// part the bottom right: put the legend in the corner they leave free.
	p.Legend.Left = false
	p.Legend.Top = len(rows) == 0 || rows[len(rows)-1].Mean < rows[0].Mean
	p.Legend.XOffs = -vg.Points(4)
	p.Legend.YOffs = vg.Points(4)
	if p.Legend.Top {
		p.Legend.YOffs = -vg.Points(4)
	}
	if err := p.Save(18*vg.Centimeter, 11*vg.Centimeter, filepath.Join(dir, HistoryFile)); err != nil {
		return fmt.Errorf("write %s: %w", HistoryFile, err)
	}
	return nil
}
