package pipeline

import (
	"bufio"
	"context"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"soakfarm/jobspec"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/report"
	"soakfarm/solver/exact"
)

// sphereSpec is a sphere of radius r cooling from 400 to 20 deg C with
// convection coefficient h; properties give α = k/(ρ·cp).
func sphereSpec(r, h, k, endS float64, cells uint32) *soakv1.JobSpec {
	return &soakv1.JobSpec{
		Name:        "sphere-check",
		Part:        &soakv1.Part{Shape: &soakv1.Part_Sphere{Sphere: &soakv1.Sphere{DiameterM: 2 * r}}},
		CellsAcross: proto.Uint32(cells),
		Material: &soakv1.Material{
			DensityKgM3: 2000, ConductivityWMk: proto.Float64(k), SpecificHeatJKgk: proto.Float64(1000),
		},
		InitialC: proto.Float64(400),
		Exposure: []*soakv1.Exposure{{Surfaces: "all", HWM2K: h, FluidC: proto.Float64(20)}},
		EndS:     endS,
		Probes: []*soakv1.Probe{
			{Name: "centre", AtM: []float64{0, 0, 0}},
			{Name: "skin", AtM: []float64{r, 0, 0}},
		},
		Milestones: []*soakv1.Milestone{
			{Name: "centre-below-200", Probe: "centre", ReachesC: proto.Float64(200)},
			{Name: "half-energy", EnergyFraction: proto.Float64(0.5)},
		},
	}
}

func readCSV(t *testing.T, path string) (header []string, rows [][]float64) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Scan()
	header = strings.Split(sc.Text(), ",")
	for sc.Scan() {
		var row []float64
		for _, s := range strings.Split(sc.Text(), ",") {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatalf("probes.csv: %v", err)
			}
			row = append(row, v)
		}
		rows = append(rows, row)
	}
	return header, rows
}

// timeToTheta inverts the exact centre history by bisection.
func timeToTheta(t *testing.T, s exact.Shape, bi, target, scale float64, energy bool) float64 {
	t.Helper()
	lo, hi := 1e-6, 50.0
	for i := 0; i < 200; i++ {
		mid := (lo + hi) / 2
		var v float64
		var err error
		if energy {
			v, err = exact.EnergyFraction(s, bi, mid)
			v = 1 - v
		} else {
			v, err = exact.Theta(s, bi, mid, 0)
		}
		if err != nil {
			t.Fatal(err)
		}
		if v > target {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2 * scale
}

// The whole pipeline on a sphere against the exact series solution
// (sphere with convection; e.g. Incropera et al., Fundamentals of Heat and
// Mass Transfer, 6th ed., section 5.6, from memory): probes at the centre
// (even cell count, so interpolated) and on the surface (boundary balance),
// energy fraction, and milestone times.
func TestSphereAgainstExactSeries(t *testing.T) {
	t.Parallel()
	const r, k, h = 0.025, 2.0, 80.0 // Bi = h r / k = 1
	alpha := k / (2000 * 1000.0)
	bi := h * r / k
	fo := 0.6
	end := fo * r * r / alpha
	spec := sphereSpec(r, h, k, end, 40)
	if err := jobspec.Validate(spec, jobspec.DefaultLimits()); err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	sum, err := Run(context.Background(), spec, dir, Options{})
	if err != nil {
		t.Fatal(err)
	}
	header, rows := readCSV(t, filepath.Join(dir, report.ProbesFile))
	want := []string{"time_s", "centre_c", "skin_c", "min_c", "max_c", "mean_c", "energy_fraction"}
	if strings.Join(header, ",") != strings.Join(want, ",") {
		t.Fatalf("header %v, want %v", header, want)
	}
	if last := rows[len(rows)-1][0]; last != end {
		t.Fatalf("last row at %v s, want exactly end_s %v", last, end)
	}
	const drive = 400 - 20.0
	worst := map[string]float64{}
	for _, row := range rows[1:] {
		f := alpha * row[0] / (r * r)
		if f < 0.05 {
			continue
		}
		for _, c := range []struct {
			name string
			xi   float64
			got  float64
		}{{"centre", 0, row[1]}, {"skin", 1, row[2]}} {
			th, err := exact.Theta(exact.Sphere, bi, f, c.xi)
			if err != nil {
				t.Fatal(err)
			}
			worst[c.name] = math.Max(worst[c.name], math.Abs(c.got-(20+drive*th))/drive)
		}
		q, err := exact.EnergyFraction(exact.Sphere, bi, f)
		if err != nil {
			t.Fatal(err)
		}
		worst["energy"] = math.Max(worst["energy"], math.Abs(row[6]-q))
	}
	for name, lim := range map[string]float64{"centre": 0.01, "skin": 0.015, "energy": 0.01} {
		if worst[name] > lim {
			t.Errorf("%s: largest error %.4f, limit %.4f", name, worst[name], lim)
		}
	}
	t.Logf("largest errors: %v", worst)

	tCentre := timeToTheta(t, exact.Sphere, bi, (200-20)/drive, r*r/alpha, false)
	tHalf := timeToTheta(t, exact.Sphere, bi, 0.5, r*r/alpha, true)
	for i, wantT := range []float64{tCentre, tHalf} {
		m := sum.GetMilestones()[i]
		if m.TimeS == nil {
			t.Fatalf("milestone %s not reached", m.GetName())
		}
		if e := math.Abs(m.GetTimeS().GetValue()-wantT) / wantT; e > 0.025 {
			t.Errorf("milestone %s at %.2f s, exact %.2f s (%.2f%%)", m.GetName(), m.GetTimeS().GetValue(), wantT, 100*e)
		}
	}
	if got := sum.GetFinalProbes()[1].GetPlacement(); got != "surface" {
		t.Errorf("skin probe placement %q, want surface", got)
	}
	if sum.GetEnergyImbalance() > 1e-4 {
		t.Errorf("energy imbalance %g", sum.GetEnergyImbalance())
	}
	if math.Abs(sum.GetBiotNumber()-bi/3) > 1e-9 {
		// Lc = V/As = r/3 for a sphere.
		t.Errorf("Biot number %g, want h·(r/3)/k = %g", sum.GetBiotNumber(), bi/3)
	}
}

// Probes on a box read the cell field, the surface balance, or an
// extrapolation, by where they are.
func TestProbePlacement(t *testing.T) {
	t.Parallel()
	spec := &soakv1.JobSpec{
		Name:        "block",
		Part:        &soakv1.Part{Shape: &soakv1.Part_Box{Box: &soakv1.Box{SizeM: []float64{0.04, 0.02, 0.02}}}},
		CellsAcross: proto.Uint32(8),
		Material:    &soakv1.Material{DensityKgM3: 7800, ConductivityWMk: proto.Float64(40), SpecificHeatJKgk: proto.Float64(470)},
		InitialC:    proto.Float64(20),
		Exposure:    []*soakv1.Exposure{{Surfaces: "all", HWM2K: 50, FluidC: proto.Float64(200)}},
		EndS:        30,
		Probes: []*soakv1.Probe{
			{Name: "middle", AtM: []float64{0, 0, 0}},
			{Name: "face", AtM: []float64{0.02, 0, 0}},
			{Name: "edge", AtM: []float64{0.02, 0.01, 0}},
			{Name: "corner", AtM: []float64{0.02, 0.01, 0.01}},
		},
	}
	m, err := Build(context.Background(), spec, Options{Threads: 1})
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"interior", "surface", "edge", "corner"}
	for i, p := range m.probes {
		if p.placement != want[i] {
			t.Errorf("probe %s: placement %q, want %q", p.name, p.placement, want[i])
		}
		sum := 0.0
		for _, w := range p.cellW {
			sum += w
		}
		for _, w := range p.faceW {
			sum += w
		}
		// A reading of a uniform field must return that field.
		if math.Abs(sum-1) > 1e-9 {
			t.Errorf("probe %s: weights sum to %g", p.name, sum)
		}
	}
	// The centre of an even cell count lies on a cell corner: the reading
	// must blend the eight cells around it equally.
	if len(m.probes[0].cellW) != 8 {
		t.Fatalf("middle probe reads %d cells, want 8", len(m.probes[0].cellW))
	}
	for _, w := range m.probes[0].cellW {
		if math.Abs(w-0.125) > 1e-12 {
			t.Errorf("middle probe weight %g, want 1/8", w)
		}
	}

	spec.Probes = []*soakv1.Probe{{Name: "away", AtM: []float64{0.03, 0, 0}}}
	if _, err := Build(context.Background(), spec, Options{Threads: 1}); err == nil || !strings.Contains(err.Error(), "probes[0].at_m") {
		t.Errorf("probe outside the part: error %v, want one naming probes[0].at_m", err)
	}
}

// Stopping at milestones ends the run at the step that reaches the last.
func TestStopAtMilestones(t *testing.T) {
	t.Parallel()
	spec := sphereSpec(0.01, 50, 20, 2000, 10)
	spec.StopAtMilestones = true
	dir := t.TempDir()
	sum, err := Run(context.Background(), spec, dir, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if sum.GetStopReason() != StopMilestones {
		t.Fatalf("stop reason %q, want %q", sum.GetStopReason(), StopMilestones)
	}
	latest := 0.0
	for _, m := range sum.GetMilestones() {
		latest = math.Max(latest, m.GetTimeS().GetValue())
	}
	if sum.GetEndTimeS() < latest || sum.GetEndTimeS() >= 2000 {
		t.Errorf("ended at %g s; last milestone at %g s", sum.GetEndTimeS(), latest)
	}
	if _, err := os.Stat(filepath.Join(dir, report.HistoryFile)); err != nil {
		t.Error(err)
	}
}

// A schedule of exposure changes, at Bi well below 0.1, follows lumped
// capacitance phase by phase: T = T∞ + (T0 − T∞)·exp(−t/τ), τ = ρ·cp·V/(h·A)
// (lumped capacitance; common practice below Bi 0.1).
func TestScheduleFollowsLumpedPhases(t *testing.T) {
	t.Parallel()
	const r, rho, cp, k = 0.01, 2700.0, 900.0, 200.0 // a small aluminium ball, Bi ≈ 0.003
	h1, h2 := 60.0, 20.0
	spec := sphereSpec(r, h1, k, 1200, 12)
	spec.Material = &soakv1.Material{DensityKgM3: rho, ConductivityWMk: proto.Float64(k), SpecificHeatJKgk: proto.Float64(cp)}
	spec.InitialC = proto.Float64(20)
	spec.Exposure[0].FluidC = proto.Float64(500)
	spec.Exposure[0].Schedule = []*soakv1.ExposureChange{{AtS: 400, HWM2K: proto.Float64(h2), FluidC: proto.Float64(30)}}
	spec.Milestones = nil
	dir := t.TempDir()
	if _, err := Run(context.Background(), spec, dir, Options{}); err != nil {
		t.Fatal(err)
	}
	_, rows := readCSV(t, filepath.Join(dir, report.ProbesFile))
	lc := r / 3
	tau1, tau2 := rho*cp*lc/h1, rho*cp*lc/h2
	t400 := 500 + (20-500)*math.Exp(-400/tau1)
	landed := false
	for _, row := range rows {
		tm := row[0]
		var want float64
		if tm <= 400 {
			want = 500 + (20-500)*math.Exp(-tm/tau1)
		} else {
			want = 30 + (t400-30)*math.Exp(-(tm-400)/tau2)
		}
		landed = landed || tm == 400
		if math.Abs(row[5]-want) > 0.01*480 {
			t.Errorf("t=%.1f s: mean %.2f °C, lumped %.2f °C", tm, row[5], want)
		}
	}
	if !landed {
		t.Error("no step ended exactly on the schedule change at 400 s")
	}
}
