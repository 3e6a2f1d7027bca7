package estimate

import (
	"fmt"
	"io"
	"text/tabwriter"

	soakv1 "soakfarm/proto/soak/v1"
)

// WriteText writes a hand estimate for people: the figures, a table of
// milestone times by method, and the notes on what the methods assume.
// milestones is h's own list for a bare estimate, or a verification's list,
// which also carries the 3-D times.
func WriteText(w io.Writer, h *soakv1.HandEstimate, milestones []*soakv1.MilestoneEstimate) error {
	ew := &errWriter{w: w}
	ew.printf("Hand estimate (true geometry, no 3-D solve)\n")
	ew.printf("  volume %.4g m³, exposed area %.4g m², Lc = V/As %.4g m\n",
		h.GetVolumeM3(), h.GetExposedAreaM2(), h.GetCharacteristicLengthM())
	ew.printf("  h = %.4g (convection) + %.4g (radiation) = %.4g W/m²K, fluid %.4g °C, initial %.4g °C\n",
		h.GetHConvectionWM2K(), h.GetHRadiationWM2K(), h.GetHEffectiveWM2K(), h.GetFluidC(), h.GetInitialC())
	ew.printf("  properties at %.4g °C: k %.4g W/mK, cp %.4g J/kgK, density %.4g kg/m³, diffusivity %.4g m²/s\n",
		h.GetPropertyTempC(), h.GetConductivityWMk(), h.GetSpecificHeatJKgk(), h.GetDensityKgM3(), h.GetDiffusivityM2S())
	lumped := "lumped capacitance holds"
	if !h.GetLumpedApplies() {
		lumped = "lumped capacitance does not apply"
	}
	ew.printf("  Biot number %.4g (%s, limit %g), time constant %.4g s\n",
		h.GetBiotNumber(), lumped, LumpedBiotLimit, h.GetTimeConstantS())
	ew.printf("  equal-volume sphere: radius %.4g m, Bi %.4g; plane wall of equal Lc: half-thickness %.4g m, Bi %.4g\n",
		h.GetSphereRadiusM(), h.GetSphereBiotNumber(), h.GetWallHalfThicknessM(), h.GetWallBiotNumber())
	if len(milestones) > 0 {
		ew.printf("\n")
		tw := tabwriter.NewWriter(ew, 2, 8, 2, ' ', 0)
		fmt.Fprintf(tw, "  milestone\tmethod\ttime, s\tFo\tapplies\n")
		for _, m := range milestones {
			if m.SolvedTimeS != nil {
				fmt.Fprintf(tw, "  %s\t3-D solve\t%.4g\t\t\n", m.GetName(), m.GetSolvedTimeS())
			}
			for _, a := range m.GetAnswers() {
				time, fo := "-", "-"
				if a.TimeS != nil {
					time = fmt.Sprintf("%.4g", a.GetTimeS())
				}
				if a.FourierNumber != nil {
					fo = fmt.Sprintf("%.3g", a.GetFourierNumber())
				}
				applies := "yes"
				if !a.GetApplies() {
					applies = "no: " + a.GetNote()
				}
				fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\t%s\n", m.GetName(), a.GetMethod(), time, fo, applies)
			}
		}
		if err := tw.Flush(); err != nil {
			return err
		}
	}
	if len(h.GetNotes()) > 0 {
		ew.printf("\nNotes:\n")
		for _, n := range h.GetNotes() {
			ew.printf("  - %s\n", n)
		}
	}
	return ew.err
}

// errWriter keeps the first write error so that a long report checks once.
type errWriter struct {
	w   io.Writer
	err error
}

func (e *errWriter) Write(p []byte) (int, error) {
	if e.err != nil {
		return 0, e.err
	}
	n, err := e.w.Write(p)
	e.err = err
	return n, err
}

func (e *errWriter) printf(format string, args ...any) { fmt.Fprintf(e, format, args...) }
