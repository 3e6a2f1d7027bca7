package verify

import (
	"fmt"
	"image/color"
	"path/filepath"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"

	soakv1 "soakfarm/proto/soak/v1"
)

// PlotFile is the name of the cross-check plot.
const PlotFile = "crosscheck.png"

// shapeColours tell the cross-check shapes apart, on screen and in
// greyscale print, in the colours of the result plots.
var shapeColours = map[string]color.RGBA{
	"sphere":     {R: 0x1b, G: 0x4f, B: 0x9c, A: 0xff},
	"plane-wall": {R: 0xc2, G: 0x3b, B: 0x22, A: 0xff},
}

// WritePlot draws each cross-check's centre temperature and energy
// fraction against the Fourier number, numerical as solid lines and exact
// as dashed ones, into dir/crosscheck.png.
func WritePlot(dir string, v *soakv1.Verification) error {
	p := plot.New()
	p.Title.Text = "cross-check: solver (solid) against exact series (dashed)"
	p.X.Label.Text = "Fourier number on the radius or half-thickness"
	p.Y.Label.Text = "centre θ = (T − T fluid)/(T initial − T fluid); Q/Qmax"
	p.Add(plotter.NewGrid())
	p.Legend.Top = true
	p.Legend.Left = false
	for _, cc := range v.GetCrossChecks() {
		colour := shapeColours[cc.GetShape()]
		for _, curve := range []struct {
			label string
			pick  func(*soakv1.CrossCheckSample) float64
			exact bool
		}{
			{"centre θ", (*soakv1.CrossCheckSample).GetCentreTheta, false},
			{"", (*soakv1.CrossCheckSample).GetCentreThetaExact, true},
			{"Q/Qmax", (*soakv1.CrossCheckSample).GetEnergyFraction, false},
			{"", (*soakv1.CrossCheckSample).GetEnergyFractionExact, true},
		} {
			xy := make(plotter.XYs, len(cc.GetSamples()))
			for i, s := range cc.GetSamples() {
				xy[i].X, xy[i].Y = s.GetFourierNumber(), curve.pick(s)
			}
			l, err := plotter.NewLine(xy)
			if err != nil {
				return fmt.Errorf("plot %s cross-check: %w", cc.GetShape(), err)
			}
			l.Color = colour
			l.Width = vg.Points(1.6)
			if curve.exact {
				l.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
				l.Width = vg.Points(1)
			}
			p.Add(l)
			if curve.label != "" {
				p.Legend.Add(cc.GetShape()+" "+curve.label, l)
			}
		}
	}
	if err := p.Save(18*vg.Centimeter, 11*vg.Centimeter, filepath.Join(dir, PlotFile)); err != nil {
		return fmt.Errorf("write %s: %w", PlotFile, err)
	}
	return nil
}
