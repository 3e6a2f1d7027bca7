package solver

import (
	"context"
	"fmt"
	"math"
	"testing"

	"soakfarm/mesh"
	"soakfarm/solver/exact"
)

// Properties of the accuracy tests: a part of half-thickness or radius
// testLength with a steel-like conductivity and heat capacity (our own
// round values). Bi and Fo fix h and t.
const (
	testLength = 0.05  // m
	testK      = 40.0  // W/(m·K)
	testRhoCp  = 3.6e6 // J/(m³·K)
)

var testAlpha = testK / testRhoCp

// history records the accepted steps of a run at one cell.
type history struct{ time, theta []float64 }

// crossing returns the time at which θ first falls to target, linear
// between steps, or NaN when it never does.
func (h *history) crossing(target float64) float64 {
	for i := 1; i < len(h.time); i++ {
		if h.theta[i] <= target {
			a, b := h.theta[i-1], h.theta[i]
			return h.time[i-1] + (h.time[i]-h.time[i-1])*(a-target)/(a-b)
		}
	}
	return math.NaN()
}

// nearestCell returns the part cell whose centre has the smallest distance
// (by the given measure) and that distance.
func nearestCell(g *mesh.Grid, distance func([3]float64) float64) (cell int, d float64) {
	d = math.Inf(1)
	for c, r := range g.Region {
		if r == 0 {
			continue
		}
		if dc := distance(g.Centre(g.Coords(c))); dc < d {
			cell, d = c, dc
		}
	}
	return cell, d
}

// poleFace returns the exposed face whose true normal is closest to +x: the
// face where the staircase lies flattest on the surface.
func poleFace(g *mesh.Grid) int {
	best, bestN := -1, -1.0
	for i, f := range g.Faces {
		if f.Group == 0 && f.Dir == mesh.PlusX && f.Normal[0] > bestN {
			best, bestN = i, f.Normal[0]
		}
	}
	return best
}

// TestSeriesSolutions compares the sphere, the infinite cylinder and the
// plane wall at 40 cells across with the exact series solutions, with the
// default stepping.
// Source: exact.Theta and exact.EnergyFraction, the series of Incropera,
// DeWitt, Bergman and Lavine, Fundamentals of Heat and Mass Transfer, 6th ed.,
// §5.5–5.6 (see package exact).
func TestSeriesSolutions(t *testing.T) {
	t.Parallel()
	type limits struct{ centre, surface, energy, time float64 }
	curved := limits{centre: 0.01, surface: 0.015, energy: 0.01, time: 0.025}
	flat := limits{centre: 0.005, surface: 0.008, energy: 0.005, time: 0.015}
	shapes := []struct {
		shape    exact.Shape
		part     testPart
		distance func([3]float64) float64 // from the centre, axis or mid-plane
		limits   limits
	}{
		{exact.Sphere, sphereOctant(20, testLength), norm, curved},
		{exact.InfiniteCylinder, cylinderSlice(40, testLength), func(p [3]float64) float64 { return math.Hypot(p[0], p[1]) }, curved},
		{exact.PlaneWall, wallColumn(40, testLength), func(p [3]float64) float64 { return math.Abs(p[0]) }, flat},
	}
	checkpoints := []float64{0.05, 0.2, 0.5, 1, 3} // Fo
	for _, sh := range shapes {
		for n, bi := range []float64{0.01, 0.1, 1, 10, 50} {
			t.Run(fmt.Sprintf("%v/Bi=%g", sh.shape, bi), func(t *testing.T) {
				t.Parallel()
				// Alternate quenching and heating, 800 K apart either way.
				initial, fluid := 1100.0, 300.0
				if n%2 == 1 {
					initial, fluid = 293.0, 1093.0
				}
				g := testGrid(sh.part)
				fourier := func(fo float64) float64 { return fo * testLength * testLength / testAlpha }
				p := problemFor(g, constantMaterial(testK, 1, testRhoCp), convection(bi*testK/testLength, fluid), initial, fourier(checkpoints[len(checkpoints)-1]))
				for _, fo := range checkpoints {
					p.Landings = append(p.Landings, fourier(fo))
				}
				centre, d := nearestCell(g, sh.distance)
				xi := d / testLength
				pole := poleFace(g)
				capacity := testRhoCp * float64(g.PartCells()) * math.Pow(g.CellSize, 3) * (fluid - initial)
				theta := func(temp float64) float64 { return (temp - fluid) / (initial - fluid) }

				var hist history
				checked := 0
				_, err := Solve(context.Background(), p, func(s *State) bool {
					hist.time = append(hist.time, s.Time)
					hist.theta = append(hist.theta, theta(s.T[centre]))
					for _, fo := range checkpoints {
						if s.Time != fourier(fo) {
							continue
						}
						checked++
						want, err := exact.Theta(sh.shape, bi, fo, xi)
						if err != nil {
							t.Fatal(err)
						}
						if got := theta(s.T[centre]); math.Abs(got-want) > sh.limits.centre {
							t.Errorf("Fo=%g centre (ξ=%.3f): θ = %.5f, exact %.5f", fo, xi, got, want)
						}
						want, _ = exact.Theta(sh.shape, bi, fo, 1)
						surface := SurfaceTemperature(p, pole, s.T[g.Faces[pole].Cell], s.Time)
						if got := theta(surface); math.Abs(got-want) > sh.limits.surface {
							t.Errorf("Fo=%g surface: θ = %.5f, exact %.5f", fo, got, want)
						}
						want, _ = exact.EnergyFraction(sh.shape, bi, fo)
						if got := s.StoredEnergy / capacity; math.Abs(got-want) > sh.limits.energy {
							t.Errorf("Fo=%g energy fraction %.5f, exact %.5f", fo, got, want)
						}
					}
					return false
				})
				if err != nil {
					t.Fatal(err)
				}
				if checked != len(checkpoints) {
					t.Fatalf("steps landed on %d of %d checkpoints", checked, len(checkpoints))
				}
				// Time to reach the exact centre temperature of Fo, where the
				// centre has moved enough for the time to be well defined.
				for _, fo := range []float64{0.2, 0.5, 1, 2} {
					target, _ := exact.Theta(sh.shape, bi, fo, xi)
					if target > 0.95 || target < 0.1 {
						continue
					}
					if got := hist.crossing(target) / fourier(fo); !(math.Abs(got-1) <= sh.limits.time) {
						t.Errorf("time to θ = %.4f at the centre: %.5f of the exact time", target, got)
					}
				}
			})
		}
	}
}

// TestProductSolutions compares a cube and a short cylinder (octant models,
// 40 cells across) with the product solutions, at the centre, at the
// middle of a face and at a corner or rim, where the surface point is the
// face of the corner cell.
// Source: exact.BlockTheta, exact.ShortCylinderTheta and their energy
// fractions, the product solutions of Incropera et al., 6th ed., §5.8.
func TestProductSolutions(t *testing.T) {
	t.Parallel()
	const cells = 20 // per half
	h := testLength / cells
	half := [3]float64{testLength, testLength, testLength}
	type point struct {
		name string
		cell [3]int
		dir  int        // face of the cell whose surface point is checked; -1 for the cell centre
		at   [3]float64 // where the exact solution is evaluated, m from the centre
	}
	faceCentre := func(cell [3]int, dir int) [3]float64 {
		p := [3]float64{(float64(cell[0]) + 0.5) * h, (float64(cell[1]) + 0.5) * h, (float64(cell[2]) + 0.5) * h}
		p[dir/2] += 0.5 * h * float64(faceOffsets[dir][dir/2])
		return p
	}
	centre := [3]float64{0.5 * h, 0.5 * h, 0.5 * h}
	edge := cells - 1
	// Last cell of the row y = 0 inside the cylinder's quarter disc.
	rim := 0
	for i := range cells {
		if math.Hypot((float64(i)+0.5)*h, 0.5*h) < testLength {
			rim = i
		}
	}
	cases := []struct {
		name     string
		part     testPart
		bi       float64
		limits   [3]float64 // centre, surface, energy fraction
		points   []point
		theta    func(hc, t float64, at [3]float64) (float64, error)
		fraction func(hc, t float64) (float64, error)
	}{
		{
			name: "cube", part: blockOctant([3]int{cells, cells, cells}, h), bi: 5,
			limits: [3]float64{0.005, 0.008, 0.005},
			points: []point{
				{"centre", [3]int{0, 0, 0}, -1, centre},
				{"mid-face", [3]int{edge, 0, 0}, mesh.PlusX, faceCentre([3]int{edge, 0, 0}, mesh.PlusX)},
				{"corner", [3]int{edge, edge, edge}, mesh.PlusX, faceCentre([3]int{edge, edge, edge}, mesh.PlusX)},
			},
			theta: func(hc, t float64, at [3]float64) (float64, error) {
				return exact.BlockTheta(half, hc, testK, testAlpha, t, at)
			},
			fraction: func(hc, t float64) (float64, error) {
				return exact.BlockEnergyFraction(half, hc, testK, testAlpha, t)
			},
		},
		{
			name: "short cylinder", part: shortCylinderOctant(cells, testLength, testLength), bi: 2,
			limits: [3]float64{0.01, 0.015, 0.01},
			points: []point{
				{"centre", [3]int{0, 0, 0}, -1, centre},
				{"end face", [3]int{0, 0, edge}, mesh.PlusZ, faceCentre([3]int{0, 0, edge}, mesh.PlusZ)},
				{"side", [3]int{rim, 0, 0}, mesh.PlusX, [3]float64{testLength, 0, 0.5 * h}},
				{"rim, end face", [3]int{rim, 0, edge}, mesh.PlusZ, faceCentre([3]int{rim, 0, edge}, mesh.PlusZ)},
				{"rim, side", [3]int{rim, 0, edge}, mesh.PlusX, [3]float64{testLength, 0, (float64(edge) + 0.5) * h}},
			},
			theta: func(hc, t float64, at [3]float64) (float64, error) {
				return exact.ShortCylinderTheta(testLength, testLength, hc, testK, testAlpha, t, math.Hypot(at[0], at[1]), at[2])
			},
			fraction: func(hc, t float64) (float64, error) {
				return exact.ShortCylinderEnergyFraction(testLength, testLength, hc, testK, testAlpha, t)
			},
		},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			g := testGrid(tc.part)
			hc := tc.bi * testK / testLength
			initial, fluid := 1100.0, 300.0
			fourier := func(fo float64) float64 { return fo * testLength * testLength / testAlpha }
			checkpoints := []float64{0.05, 0.2, 0.5, 1}
			p := problemFor(g, constantMaterial(testK, 1, testRhoCp), convection(hc, fluid), initial, fourier(1))
			for _, fo := range checkpoints {
				p.Landings = append(p.Landings, fourier(fo))
			}
			faceOf := func(pt point) int {
				c := g.Index(pt.cell[0], pt.cell[1], pt.cell[2])
				for i, f := range g.Faces {
					if int(f.Cell) == c && int(f.Dir) == pt.dir {
						return i
					}
				}
				t.Fatalf("%s: cell %v has no face %s", pt.name, pt.cell, mesh.DirectionNames[pt.dir])
				return -1
			}
			capacity := testRhoCp * float64(g.PartCells()) * math.Pow(g.CellSize, 3) * (fluid - initial)
			theta := func(temp float64) float64 { return (temp - fluid) / (initial - fluid) }
			_, err := Solve(context.Background(), p, func(s *State) bool {
				for _, fo := range checkpoints {
					if s.Time != fourier(fo) {
						continue
					}
					for _, pt := range tc.points {
						want, err := tc.theta(hc, s.Time, pt.at)
						if err != nil {
							t.Fatal(err)
						}
						c := g.Index(pt.cell[0], pt.cell[1], pt.cell[2])
						got, limit := theta(s.T[c]), tc.limits[0]
						if pt.dir >= 0 {
							got, limit = theta(SurfaceTemperature(p, faceOf(pt), s.T[c], s.Time)), tc.limits[1]
						}
						if math.Abs(got-want) > limit {
							t.Errorf("Fo=%g %s: θ = %.5f, exact %.5f", fo, pt.name, got, want)
						}
					}
					want, err := tc.fraction(hc, s.Time)
					if err != nil {
						t.Fatal(err)
					}
					if got := s.StoredEnergy / capacity; math.Abs(got-want) > tc.limits[2] {
						t.Errorf("Fo=%g energy fraction %.5f, exact %.5f", fo, got, want)
					}
				}
				return false
			})
			if err != nil {
				t.Fatal(err)
			}
		})
	}
}

// TestLumpedCapacitance checks a cube at Bi = 0.01 (on V/A) against the
// lumped model θ = exp(−t/τ).
// Source: exact.LumpedConvection and exact.TimeConstant (Incropera et al.,
// 6th ed., §5.2); that 90 % of the energy is exchanged at t = τ·ln 10 is
// common practice. The lumped model itself is off by about the Biot number
// of each half-thickness (here 0.03), so the limits are 2 %.
func TestLumpedCapacitance(t *testing.T) {
	t.Parallel()
	const cells, a = 6, testLength // octant of a cube of side 2a
	g := testGrid(blockOctant([3]int{cells, cells, cells}, a/cells))
	volume, area := a*a*a, 3*a*a // of the octant
	hc := 0.01 * testK / (volume / area)
	tau := exact.TimeConstant(1, testRhoCp, volume, hc, area)
	initial, fluid := 1100.0, 300.0
	p := problemFor(g, constantMaterial(testK, 1, testRhoCp), convection(hc, fluid), initial, 3*tau)
	checkpoints := []float64{0.5 * tau, tau, math.Ln10 * tau, 3 * tau}
	p.Landings = checkpoints
	capacity := testRhoCp * volume * (fluid - initial)
	var energy history // θ here is 1 − Q/Qmax
	_, err := Solve(context.Background(), p, func(s *State) bool {
		mean := 1 - s.StoredEnergy/capacity
		energy.time = append(energy.time, s.Time)
		energy.theta = append(energy.theta, mean)
		for _, at := range checkpoints {
			if s.Time != at {
				continue
			}
			want := exact.LumpedConvection(at, tau)
			if math.Abs(mean-want) > 0.02 {
				t.Errorf("t = %.2fτ: mean θ = %.5f, lumped %.5f", at/tau, mean, want)
			}
			for c, r := range g.Region {
				if got := (s.T[c] - fluid) / (initial - fluid); r != 0 && math.Abs(got-want) > 0.02 {
					t.Errorf("t = %.2fτ: cell %d θ = %.5f, lumped %.5f", at/tau, c, got, want)
					break
				}
			}
		}
		return false
	})
	if err != nil {
		t.Fatal(err)
	}
	if got := energy.crossing(0.1) / (tau * math.Ln10); math.Abs(got-1) > 0.02 {
		t.Errorf("90 %% of the energy after %.4f of τ·ln 10", got)
	}
}

// TestLumpedRadiation checks a small copper-like sphere cooling by
// radiation alone (Bi of the linearised radiation about 0.003) against the
// closed-form lumped radiation time, evaluated for the model's own volume
// and area so that only conduction, radiation and stepping are tested.
// Source: exact.LumpedRadiationTime (Incropera et al., 6th ed., §5.3).
func TestLumpedRadiation(t *testing.T) {
	t.Parallel()
	const radius, rho, cp, emissivity, initial, surroundings = 0.01, 8900.0, 385.0, 0.8, 1200.0, 300.0
	g := testGrid(sphereOctant(10, radius))
	volume := float64(g.PartCells()) * math.Pow(g.CellSize, 3)
	area := g.Groups[0].ModelArea
	tEnd, err := exact.LumpedRadiationTime(rho, cp, volume, area, emissivity, surroundings, initial, 450)
	if err != nil {
		t.Fatal(err)
	}
	p := problemFor(g, constantMaterial(400, rho, cp),
		Exposure{Phases: []ExposurePhase{{Emissivity: emissivity, Surroundings: surroundings}}}, initial, tEnd)
	var mean history // θ here is the mean temperature
	_, err = Solve(context.Background(), p, func(s *State) bool {
		mean.time = append(mean.time, s.Time)
		mean.theta = append(mean.theta, initial+s.StoredEnergy/(rho*cp*volume))
		return false
	})
	if err != nil {
		t.Fatal(err)
	}
	for _, target := range []float64{1000, 800, 600, 500} {
		want, err := exact.LumpedRadiationTime(rho, cp, volume, area, emissivity, surroundings, initial, target)
		if err != nil {
			t.Fatal(err)
		}
		if got := mean.crossing(target) / want; !(math.Abs(got-1) < 0.01) {
			t.Errorf("mean temperature %g K after %.5f of the exact time", target, got)
		}
	}
}

// wallError runs a plane wall at Bi = 1 to Fo = 0.3 with fixed steps of
// Fourier number dFo and returns the largest |θ − θ exact| over its cells.
func wallError(t *testing.T, across int, scheme string, dFo float64) float64 {
	t.Helper()
	const bi, foEnd = 1.0, 0.3
	g := testGrid(wallColumn(across, testLength))
	step := dFo * testLength * testLength / testAlpha
	initial, fluid := 1100.0, 300.0
	p := problemFor(g, constantMaterial(testK, 1, testRhoCp), convection(bi*testK/testLength, fluid), initial, foEnd*testLength*testLength/testAlpha)
	p.Stepping = Stepping{Scheme: scheme, FirstStep: step, MaxStep: step, MaxChange: 1e6, Tolerance: 1e-12}
	var final []float64
	_, err := Solve(context.Background(), p, func(s *State) bool {
		final = s.T
		return false
	})
	if err != nil {
		t.Fatal(err)
	}
	worst := 0.0
	for c := range g.Region {
		i, j, k := g.Coords(c)
		want, err := exact.Theta(exact.PlaneWall, bi, foEnd, math.Abs(g.Centre(i, j, k)[0])/testLength)
		if err != nil {
			t.Fatal(err)
		}
		worst = max(worst, math.Abs((final[c]-fluid)/(initial-fluid)-want))
	}
	return worst
}

// TestConvergenceOrder checks that the error against the exact plane wall
// falls at the promised rate: second order in space, first order in time
// for backward Euler and second order for BDF2.
// Source: exact.Theta (plane wall series, Incropera et al., 6th ed., §5.5).
func TestConvergenceOrder(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name  string
		errAt func(level int) float64 // level 0, 1, 2: cells or steps doubled each time
		order float64
	}{
		// Steps small enough that BDF2's time error is far below the grid's.
		{"space", func(l int) float64 { return wallError(t, 10<<l, BDF2, 1e-4) }, 2},
		// 400 cells make the grid error far below the time error.
		{"time backward Euler", func(l int) float64 { return wallError(t, 400, BackwardEuler, 0.01/float64(int(1)<<l)) }, 1},
		{"time BDF2", func(l int) float64 { return wallError(t, 400, BDF2, 0.01/float64(int(1)<<l)) }, 2},
	}
	for _, tc := range cases {
		e := [3]float64{tc.errAt(0), tc.errAt(1), tc.errAt(2)}
		t.Logf("%s: errors %.3g %.3g %.3g", tc.name, e[0], e[1], e[2])
		for l := range 2 {
			if got := math.Log2(e[l] / e[l+1]); math.Abs(got-tc.order) > 0.2 {
				t.Errorf("%s: errors %.3g → %.3g, observed order %.2f, want %g", tc.name, e[l], e[l+1], got, tc.order)
			}
		}
	}
}
