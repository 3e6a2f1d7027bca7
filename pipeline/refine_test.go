package pipeline

import (
	"context"
	"math"
	"testing"

	"google.golang.org/protobuf/proto"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/solver/exact"
)

// On a coarse sphere and a coarse plane wall the Richardson band holds the
// exact answer (series solutions with convection, e.g. Incropera et al.,
// Fundamentals of Heat and Mass Transfer, 6th ed., sections 5.5-5.6, from
// memory) for the centre milestone time and the final centre temperature.
func TestRefineBracketsExact(t *testing.T) {
	t.Parallel()
	const r, k, h = 0.02, 2.0, 100.0 // Bi = 1 on r
	alpha := k / (2000 * 1000.0)
	bi := h * r / k
	cases := []struct {
		name  string
		shape exact.Shape
		spec  func() *soakv1.JobSpec
	}{
		{"sphere", exact.Sphere, func() *soakv1.JobSpec { return sphereSpec(r, h, k, 0.5*r*r/alpha, 10) }},
		{"plane wall", exact.PlaneWall, func() *soakv1.JobSpec {
			// A block 2r thick in x, exposed on ±x only: the four other faces
			// are insulated, so the field is that of a plane wall.
			s := sphereSpec(r, h, k, 1.5*r*r/alpha, 10)
			s.Part = &soakv1.Part{Shape: &soakv1.Part_Box{Box: &soakv1.Box{SizeM: []float64{2 * r, r, r}}}}
			s.CellsAcross = proto.Uint32(5)
			s.Exposure[0].Surfaces = ""
			s.Exposure[0].Facing = []string{"+x", "-x"}
			s.Probes[1].AtM = []float64{r, 0, 0}
			return s
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			spec := c.spec()
			spec.Refine = true
			sum, err := Run(context.Background(), spec, t.TempDir(), Options{})
			if err != nil {
				t.Fatal(err)
			}
			ref := sum.GetRefinement()
			if ref == nil {
				t.Fatal("no refinement in the summary")
			}
			const drive = 400 - 20.0
			fo := alpha * sum.GetEndTimeS() / (r * r)
			th, err := exact.Theta(c.shape, bi, fo, 0)
			if err != nil {
				t.Fatal(err)
			}
			centre := ref.GetProbes()[0]
			check(t, "final centre temperature", centre, 20+drive*th)

			want := timeToTheta(t, c.shape, bi, (200-20)/drive, r*r/alpha, false)
			check(t, "centre-below-200 time", ref.GetMilestones()[0], want)
		})
	}
}

func check(t *testing.T, what string, v *soakv1.RefinedValue, exactValue float64) {
	t.Helper()
	if !v.GetAvailable() {
		t.Fatalf("%s: not available", what)
	}
	t.Logf("%s: coarse %.4f fine %.4f extrapolated %.4f ± %.4f, exact %.4f", what, v.GetCoarse(), v.GetFine(), v.GetExtrapolated(), v.GetErrorBand(), exactValue)
	if math.Abs(v.GetExtrapolated()-exactValue) > v.GetErrorBand() {
		t.Errorf("%s: band %.4f ± %.4f misses the exact %.4f", what, v.GetExtrapolated(), v.GetErrorBand(), exactValue)
	}
	if v.GetErrorBand() == 0 {
		t.Errorf("%s: zero error band", what)
	}
}
