package estimate

import (
	"bytes"
	"errors"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"soakfarm/jobspec"
	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
)

func load(t *testing.T, name string) *Estimate {
	t.Helper()
	spec, err := jobspec.Load(filepath.Join("testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	if err := jobspec.Validate(spec, jobspec.DefaultLimits()); err != nil {
		t.Fatal(err)
	}
	e, err := fromSpec(spec)
	if err != nil {
		t.Fatal(err)
	}
	return e
}

func answerOf(t *testing.T, e *Estimate, milestone, method string) *soakv1.HandAnswer {
	t.Helper()
	for _, m := range e.Hand.GetMilestones() {
		if m.GetName() != milestone {
			continue
		}
		for _, a := range m.GetAnswers() {
			if a.GetMethod() == method {
				return a
			}
		}
	}
	t.Fatalf("no %s answer for milestone %s", method, milestone)
	return nil
}

func near(t *testing.T, what string, got, want, relTol float64) {
	t.Helper()
	if math.Abs(got-want) > relTol*math.Abs(want) {
		t.Errorf("%s = %.6g, want %.6g (±%g%%)", what, got, want, 100*relTol)
	}
}

// Values of the first eigenvalue ζ1 and coefficient C1 at Bi = 1.0 from
// Incropera, DeWitt, Bergman and Lavine, Fundamentals of Heat and Mass
// Transfer, 6th ed., Table 5.1 (from memory; the sphere's row is also
// exact: ζ1 = π/2 and C1 = 4/π solve 1 − ζ cot ζ = 1).
const (
	wallZeta1Bi1   = 0.8603
	wallC1Bi1      = 1.1191
	sphereZeta1Bi1 = 1.5708
	sphereC1Bi1    = 1.2732
)

// TestThermocoupleWorkedExample: a 0.706 mm bead, h = 400 W/m²K, k = 20,
// cp = 400, ρ = 8500, from 25 °C in gas at 200 °C. Incropera et al., 6th
// ed., Example 5.1 (from memory) finds τ = 1 s and 5.2 s to come within
// 1 °C of the gas, with lumped capacitance valid.
func TestThermocoupleWorkedExample(t *testing.T) {
	t.Parallel()
	e := load(t, "thermocouple-junction.yaml")
	h := e.Hand
	near(t, "Lc", h.GetCharacteristicLengthM(), 0.000706/6, 1e-12)
	// By hand: Bi = 400·(0.706e-3/6)/20 = 2.353e-3.
	near(t, "Bi", h.GetBiotNumber(), 2.3533e-3, 1e-4)
	if !h.GetLumpedApplies() {
		t.Error("lumped capacitance should apply at Bi = 0.0024")
	}
	near(t, "time constant", h.GetTimeConstantS(), 1.0, 0.01)
	lumped := answerOf(t, e, "within-one-degree", MethodLumped)
	near(t, "time to 199 °C", lumped.GetTimeS(), 5.2, 0.01)
	if !lumped.GetApplies() {
		t.Errorf("lumped answer should apply: %s", lumped.GetNote())
	}
	// Common practice: with Bi < 0.1, 90% of the energy is exchanged after
	// τ·ln 10.
	ninety := answerOf(t, e, "ninety-percent", MethodLumped)
	near(t, "t(90% energy)", ninety.GetTimeS(), h.GetTimeConstantS()*math.Ln10, 1e-12)
	// At Bi → 0 the sphere's one-term series tends to lumped capacitance
	// (Incropera 6th ed., section 5.5, from memory); at Bi_R = 0.007 the two
	// differ by a fraction of a per cent.
	sphere := answerOf(t, e, "ninety-percent", MethodSphere)
	near(t, "sphere one-term t(90%)", sphere.GetTimeS(), ninety.GetTimeS(), 0.005)
}

func TestOneTermAgainstTable(t *testing.T) {
	t.Parallel()
	alpha := 10 / (8000.0 * 500) // k/(ρ·cp) of sphere-biot-one.yaml
	sphere := load(t, "sphere-biot-one.yaml")
	near(t, "sphere Bi", sphere.Hand.GetSphereBiotNumber(), 1, 1e-12)
	near(t, "sphere Lc", sphere.Hand.GetCharacteristicLengthM(), 0.05/3, 1e-12)
	near(t, "sphere τ", sphere.Hand.GetTimeConstantS(), 8000*500*(0.05/3)/200, 1e-12)

	slab := load(t, "slab-biot-one.yaml")
	// Only the two large faces are exposed: Lc = 0.04·0.09/(2·0.09) = 0.02 m.
	near(t, "slab Lc", slab.Hand.GetCharacteristicLengthM(), 0.02, 1e-12)
	near(t, "slab Bi", slab.Hand.GetWallBiotNumber(), 1, 1e-12)
	if !strings.Contains(strings.Join(slab.Hand.GetNotes(), "\n"), "insulated") {
		t.Errorf("slab notes should say part of the surface is insulated: %q", slab.Hand.GetNotes())
	}

	// Hand calculations with the table values: Fo = ln(C1·f/θ)/ζ1².
	foCore := math.Log(sphereC1Bi1/0.3) / (sphereZeta1Bi1 * sphereZeta1Bi1)
	mean := 3 * (math.Sin(sphereZeta1Bi1) - sphereZeta1Bi1*math.Cos(sphereZeta1Bi1)) / math.Pow(sphereZeta1Bi1, 3)
	foEnergy := math.Log(sphereC1Bi1*mean/0.4) / (sphereZeta1Bi1 * sphereZeta1Bi1)
	foFace := math.Log(wallC1Bi1*math.Cos(wallZeta1Bi1)/0.3) / (wallZeta1Bi1 * wallZeta1Bi1)
	tests := []struct {
		est              *Estimate
		milestone, which string
		wantFo, length   float64
	}{
		// core: θ = (208 − 40)/(600 − 40) = 0.3
		{sphere, "core-at-208", MethodSphere, foCore, 0.05},
		// 60% of the energy: mean θ = 0.4
		{sphere, "sixty-percent", MethodSphere, foEnergy, 0.05},
		// face: θ = (160 − 220)/(20 − 220) = 0.3, read at the surface
		{slab, "face-at-160", MethodWall, foFace, 0.02},
	}
	for _, tc := range tests {
		a := answerOf(t, tc.est, tc.milestone, tc.which)
		near(t, tc.milestone+" Fo", a.GetFourierNumber(), tc.wantFo, 2e-4)
		near(t, tc.milestone+" time", a.GetTimeS(), tc.wantFo*tc.length*tc.length/alpha, 2e-4)
		if !a.GetApplies() {
			t.Errorf("%s %s should apply: %s", tc.milestone, tc.which, a.GetNote())
		}
	}
}

func TestStatesWhenAMethodDoesNotApply(t *testing.T) {
	t.Parallel()
	sphere := load(t, "sphere-biot-one.yaml")
	bead := load(t, "radiant-bead.yaml")
	tests := []struct {
		est                   *Estimate
		milestone, method     string
		noteHas               string
		wantTime, wantApplies bool
	}{
		{sphere, "core-at-208", MethodLumped, "Bi = 0.333 is not below 0.1", true, false},
		{sphere, "halfway-at-300", MethodSphere, "neither at the part's centre nor on its surface", false, false},
		{sphere, "core-at-20", MethodWall, "does not lie between", false, false},
		{bead, "middle-at-450", MethodLumped, "", true, true},
		// θ = 460/560: Fo = ln(1.2732/0.821)/1.5708² = 0.178 by hand
		{sphere, "core-at-500", MethodSphere, "Fo = 0.178 is below 0.2, too early for one term", true, false},
		{bead, "middle-at-450", MethodSphere, "", true, true},
		{bead, "ninety-percent", MethodLumped, "the exposure changes at 30 s", true, false},
	}
	for _, tc := range tests {
		a := answerOf(t, tc.est, tc.milestone, tc.method)
		if a.GetApplies() != tc.wantApplies || (a.TimeS != nil) != tc.wantTime || !strings.Contains(a.GetNote(), tc.noteHas) {
			t.Errorf("%s %s: applies %v, time %v, note %q; want applies %v, time %v, note with %q",
				tc.milestone, tc.method, a.GetApplies(), a.TimeS != nil, a.GetNote(), tc.wantApplies, tc.wantTime, tc.noteHas)
		}
	}
	notes := strings.Join(bead.Hand.GetNotes(), "\n")
	for _, want := range []string{"h_rad = εσ(Tm²+Tsur²)(Tm+Tsur)", "mean of the initial and surroundings", "values at the mean", "schedule"} {
		if !strings.Contains(notes, want) {
			t.Errorf("radiant bead notes lack %q:\n%s", want, notes)
		}
	}
}

// TestRadiationCoefficient: εσ(Tm²+Tsur²)(Tm+Tsur) worked by hand for
// ε = 0.8, Tm = (773.15 + 298.15)/2 = 535.65 K, Tsur = 298.15 K:
// 0.8·5.670374e-8·(286920.9 + 88893.4)·833.8 = 14.2147 W/m²K. The
// properties at 262.5 °C are read off the table by hand: k = 1.0 + 0.6·262.5/600.
func TestRadiationCoefficient(t *testing.T) {
	t.Parallel()
	bead := load(t, "radiant-bead.yaml")
	near(t, "h_rad", bead.Hand.GetHRadiationWM2K(), 14.2147, 1e-5)
	near(t, "h_eff", bead.Hand.GetHEffectiveWM2K(), 24.2147, 1e-5)
	near(t, "property temperature", bead.Hand.GetPropertyTempC(), 262.5, 1e-12)
	near(t, "k at the mean", bead.Hand.GetConductivityWMk(), 1.2625, 1e-12)
}

func TestNoExchange(t *testing.T) {
	t.Parallel()
	spec, err := jobspec.Load(filepath.Join("testdata", "sphere-biot-one.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	spec.Exposure[0].HWM2K = 0
	if _, err := fromSpec(spec); !errors.Is(err, ErrNoExchange) {
		t.Errorf("FromSpec without exchange: got %v, want ErrNoExchange", err)
	}
}

func TestWriteText(t *testing.T) {
	t.Parallel()
	e := load(t, "sphere-biot-one.yaml")
	var b bytes.Buffer
	if err := WriteText(&b, e.Hand, e.Hand.GetMilestones()); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"Biot number 0.3333", "lumped capacitance does not apply", "sphere-one-term  585.9", "no: Bi = 0.333 is not below 0.1"} {
		if !strings.Contains(b.String(), want) {
			t.Errorf("text lacks %q:\n%s", want, b.String())
		}
	}
}

// fromSpec estimates a job whose part is one primitive shape.
func fromSpec(spec *soakv1.JobSpec) (*Estimate, error) {
	solid, err := mesh.SolidFromSpec(spec.GetPart())
	if err != nil {
		return nil, err
	}
	return New(spec, solid, MaterialFromSpec(spec.GetMaterial()), nil)
}
