package solver

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"

	"soakfarm/mesh"
)

func TestValidate(t *testing.T) {
	t.Parallel()
	good := func() *Problem {
		return problemFor(testGrid(block3(4)), constantMaterial(40, 7800, 460), convection(100, 300), 1000, 60)
	}
	cases := []struct {
		name   string
		change func(p *Problem) *Problem
		want   string // part of the message
	}{
		{"nil problem", func(*Problem) *Problem { return nil }, "problem is nil"},
		{"nil grid", func(p *Problem) *Problem { p.Grid = nil; return p }, "grid: missing"},
		{"no cells", func(p *Problem) *Problem { clear(p.Grid.Region); return p }, "no cell belongs to the part"},
		{"density", func(p *Problem) *Problem { p.Materials[0].Density = -1; return p }, "materials[0].density: must be positive, got -1"},
		{"conductivity zero", func(p *Problem) *Problem { p.Materials[0].Conductivity = Constant(0); return p }, "materials[0].conductivity.v[0]: must be positive, got 0"},
		{"decreasing curve", func(p *Problem) *Problem {
			p.Materials[0].SpecificHeat = Curve{T: []float64{300, 900, 800}, V: []float64{460, 600, 700}}
			return p
		}, "materials[0].specific_heat.t[2]: temperatures must increase, got 800 after 900"},
		{"curve lengths", func(p *Problem) *Problem {
			p.Materials[0].Conductivity = Curve{T: []float64{1, 2}, V: []float64{1}}
			return p
		}, "materials[0].conductivity: needs as many"},
		{"exposures length", func(p *Problem) *Problem { p.Exposures = p.Exposures[:1]; return p }, "exposures: 1 given for 2 surface groups"},
		{"emissivity", func(p *Problem) *Problem { p.Exposures[0].Phases[0].Emissivity = 1.4; return p }, "exposures[0].phases[0].emissivity: must be in [0, 1], got 1.4"},
		{"phase order", func(p *Problem) *Problem {
			p.Exposures[0].Phases = append(p.Exposures[0].Phases, ExposurePhase{Start: 0, H: 5, Fluid: 300})
			return p
		}, "exposures[0].phases[1].start: phases must start in increasing order"},
		{"initial", func(p *Problem) *Problem { p.Initial = -20; return p }, "initial: must be a positive absolute temperature in K, got -20"},
		{"end", func(p *Problem) *Problem { p.End = 0; return p }, "end: must be positive, got 0"},
		{"scheme", func(p *Problem) *Problem { p.Stepping.Scheme = "crank"; return p }, `stepping.scheme: must be "backward-euler" or "bdf2", got "crank"`},
		{"region without material", func(p *Problem) *Problem { p.Grid.Region[3] = 2; return p }, "grid.region[3]: region 2 has no material"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			p := tc.change(good())
			_, err := Solve(context.Background(), p, nil)
			if !errors.Is(err, ErrInvalidProblem) || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want ErrInvalidProblem containing %q", err, tc.want)
			}
		})
	}
	t.Run("every problem at once", func(t *testing.T) {
		t.Parallel()
		p := good()
		p.Initial, p.End = 0, -1
		err := p.Validate()
		for _, want := range []string{"initial:", "end:"} {
			if err == nil || !strings.Contains(err.Error(), want) {
				t.Errorf("error %v lacks %q", err, want)
			}
		}
	})
}

// block3 is a whole n³ block of 1 cm cells, every face exposed.
func block3(n int) testPart {
	const cell = 0.01
	half := 0.5 * cell * float64(n)
	return testPart{n: [3]int{n, n, n}, cell: cell, origin: [3]float64{-half, -half, -half}, inside: func([3]float64) bool { return true }}
}

// nonlinearProblem heats a block with temperature-dependent properties by
// convection and radiation, then quenches it, in two phases.
func nonlinearProblem(scheme string) *Problem {
	g := testGrid(block3(8))
	m := Material{
		Density:      7800,
		Conductivity: Curve{T: []float64{300, 800, 1100}, V: []float64{50, 30, 27}},
		SpecificHeat: Curve{T: []float64{300, 1000, 1050, 1300}, V: []float64{450, 800, 2000, 650}},
	}
	e := Exposure{Phases: []ExposurePhase{
		{Start: 0, H: 30, Fluid: 1200, Emissivity: 0.7, Surroundings: 1250},
		{Start: 1800, H: 800, Fluid: 330, Emissivity: 0.3, Surroundings: 300},
	}}
	p := problemFor(g, m, e, 293, 2400)
	p.Landings = []float64{600}
	p.Stepping.Scheme = scheme
	return p
}

// TestEnergyConservation: the stored energy must equal the heat that came
// through the surface (the first law), with temperature-dependent
// properties, radiation and a change of exposure, for both schemes.
func TestEnergyConservation(t *testing.T) {
	t.Parallel()
	for _, scheme := range []string{BackwardEuler, BDF2} {
		t.Run(scheme, func(t *testing.T) {
			t.Parallel()
			p := nonlinearProblem(scheme)
			var landed []float64
			var peak, worst float64
			var last State
			out, err := Solve(context.Background(), p, func(s *State) bool {
				if s.Time == 600 || s.Time == 1800 || s.Time == 2400 {
					landed = append(landed, s.Time)
				}
				peak = max(peak, math.Abs(s.StoredEnergy))
				worst = max(worst, math.Abs(s.StoredEnergy-s.BoundaryHeat))
				last = *s
				return false
			})
			if err != nil {
				t.Fatal(err)
			}
			if len(landed) != 3 || out.EndTime != 2400 {
				t.Errorf("landed on %v, ended at %g; want 600, 1800, 2400", landed, out.EndTime)
			}
			// Residuals of 1e-8 of the right-hand side (which carries
			// ρV·cp·T/Δt) summed over some hundred steps.
			if worst > 1e-5*peak {
				t.Errorf("stored energy and boundary heat differ by up to %g J of a peak %g J", worst, peak)
			}
			if want := imbalance(last.StoredEnergy, last.BoundaryHeat); out.EnergyImbalance != want || want == 0 {
				t.Errorf("outcome imbalance %g, last state's %g", out.EnergyImbalance, want)
			}
		})
	}
}

// TestSymmetry: a cube exposed alike on all sides must stay symmetric
// under reflections and exchanges of the axes.
func TestSymmetry(t *testing.T) {
	t.Parallel()
	p := nonlinearProblem(BackwardEuler)
	p.Threads = 2
	g := p.Grid
	n := g.N[0]
	_, err := Solve(context.Background(), p, func(s *State) bool {
		for c := range s.T {
			i, j, k := g.Coords(c)
			for _, o := range []int{g.Index(n-1-i, j, k), g.Index(j, i, k), g.Index(k, j, i), g.Index(i, n-1-j, n-1-k)} {
				if math.Abs(s.T[c]-s.T[o]) > 1e-5 { // the linear solver's tolerance
					t.Fatalf("t = %g s: T%v = %.9f but its mirror cell has %.9f", s.Time, [3]int{i, j, k}, s.T[c], s.T[o])
				}
			}
		}
		return false
	})
	if err != nil {
		t.Fatal(err)
	}
}

// TestSteadyWall: a wall between two fluids settles to the linear profile
// of the thermal circuit 1/h1 + L/k + 1/h2.
// Source: plane wall thermal circuit, Incropera et al., 6th ed., §3.1 (from memory).
func TestSteadyWall(t *testing.T) {
	t.Parallel()
	const across, thickness, k, h1, t1, h2, t2 = 20, 0.1, 15.0, 40.0, 450.0, 250.0, 290.0
	g := testGrid(wallColumn(across, thickness/2))
	// Give the −x face its own group and exposure.
	g.Groups = append(g.Groups, mesh.Group{Name: "left", Exposure: 2})
	for i := range g.Faces {
		if g.Faces[i].Dir == mesh.MinusX {
			g.Faces[i].Group = 2
		}
	}
	p := problemFor(g, constantMaterial(k, 2000, 500), convection(h2, t2), 350, 0)
	p.Exposures = append(p.Exposures, convection(h1, t1))
	p.End = 200 * thickness * thickness / (k / (2000 * 500)) // many time constants
	_, err := Solve(context.Background(), p, nil)
	if err != nil {
		t.Fatal(err)
	}
	var final []float64
	p.End *= 1.01
	if _, err := Solve(context.Background(), p, func(s *State) bool { final = s.T; return false }); err != nil {
		t.Fatal(err)
	}
	q := (t1 - t2) / (1/h1 + thickness/k + 1/h2)
	for c := range final {
		x := g.Centre(g.Coords(c))[0] + thickness/2 // from the left face
		if want := t1 - q*(1/h1+x/k); math.Abs(final[c]-want) > 1e-4 {
			t.Errorf("x = %.4f m: T = %.6f K, thermal circuit %.6f K", x, final[c], want)
		}
	}
}

// TestSurfaceTemperature checks the face balance: for convection the series
// circuit of half a cell and the film, for radiation the balance itself.
// Source: conductances in series, Incropera et al., 6th ed., §3.1 (from memory).
func TestSurfaceTemperature(t *testing.T) {
	t.Parallel()
	g := testGrid(block3(3))
	p := problemFor(g, constantMaterial(20, 7800, 460), Exposure{Phases: []ExposurePhase{
		{Start: 0, H: 150, Fluid: 350},
		{Start: 100, H: 20, Fluid: 900, Emissivity: 0.8, Surroundings: 1300},
	}}, 600, 200)
	face, dx := 5, g.CellSize
	area := g.Faces[face].Area
	gc := 20 * dx * dx / (dx / 2)
	want := (gc*700 + 150*area*350) / (gc + 150*area)
	if got := SurfaceTemperature(p, face, 700, 50); math.Abs(got-want) > 1e-9 {
		t.Errorf("convection: Ts = %.12f K, series circuit %.12f K", got, want)
	}
	// At t = 100 s the first phase is still in force (it shaped the step
	// that ends there); just after, the second.
	if got := SurfaceTemperature(p, face, 700, 100); math.Abs(got-want) > 1e-9 {
		t.Errorf("at the phase start: Ts = %.12f K, want the first phase's %.12f K", got, want)
	}
	ts := SurfaceTemperature(p, face, 700, 150)
	in := gc * (700 - ts)
	out := area * (20*(ts-900) + 0.8*StefanBoltzmann*(math.Pow(ts, 4)-math.Pow(1300, 4)))
	if !(ts > 700 && ts < 1300) || math.Abs(in-out) > 1e-9*math.Abs(out) {
		t.Errorf("radiation: Ts = %.6f K leaves conduction %g W against exchange %g W", ts, in, out)
	}
	if got := SurfaceTemperature(p, len(g.Faces), 700, 0); !math.IsNaN(got) {
		t.Errorf("face out of range gave %g, want NaN", got)
	}
}

func TestObserverStops(t *testing.T) {
	t.Parallel()
	p := problemFor(testGrid(block3(4)), constantMaterial(40, 7800, 460), convection(100, 300), 1000, 600)
	calls := 0
	out, err := Solve(context.Background(), p, func(s *State) bool {
		if s.Step != calls {
			t.Errorf("call %d saw step %d", calls, s.Step)
		}
		calls++
		return s.Step == 3
	})
	if err != nil || calls != 4 || out.Steps != 3 || !(out.EndTime < 600) {
		t.Errorf("err %v, %d calls, outcome %+v; want a stop after step 3", err, calls, out)
	}
}

// TestCancel: a cancelled context ends the run with ctx.Err() wrapped, and
// the linear solver itself gives up within a few iterations.
func TestCancel(t *testing.T) {
	t.Parallel()
	p := problemFor(testGrid(block3(12)), constantMaterial(40, 7800, 460), convection(100, 300), 1000, 1e6)
	ctx, cancel := context.WithCancel(context.Background())
	_, err := Solve(ctx, p, func(s *State) bool {
		if s.Step == 2 {
			cancel()
		}
		return false
	})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("error %v, want context.Canceled", err)
	}

	r := newRun(p)
	defer r.ws.stop()
	r.forParts(func(_, i int, _ *material) { r.tstar[i], r.tn[i] = 1000, 1000 }) // k is the material's 40
	r.dt, r.coef = 1, backwardEulerCoefficients
	r.ws.run(r.conductanceTask)
	r.ws.run(r.fillTask)
	iterations, err := r.lin.solve(ctx, &r.st, r.b, r.t, 1e-300) // unreachable tolerance
	if !errors.Is(err, context.Canceled) || iterations > ctxCheckEvery {
		t.Errorf("linear solve after cancel: %d iterations, error %v", iterations, err)
	}
}

// TestThreadsAgree: splitting the grid into slabs must not change the
// answer beyond the linear solver's tolerance.
func TestThreadsAgree(t *testing.T) {
	t.Parallel()
	var finals [2][]float64
	for i, threads := range []int{1, 2} {
		p := problemFor(testGrid(block3(24)), constantMaterial(40, 7800, 460), convection(300, 300), 1000, 120)
		p.Threads = threads
		_, err := Solve(context.Background(), p, func(s *State) bool {
			finals[i] = append(finals[i][:0], s.T...)
			return false
		})
		if err != nil {
			t.Fatal(err)
		}
	}
	for c := range finals[0] {
		if d := math.Abs(finals[0][c] - finals[1][c]); d > 1e-5 {
			t.Fatalf("cell %d: %.9f K on one thread, %.9f K on two", c, finals[0][c], finals[1][c])
		}
	}
}

// TestSurfaceNewtonConvergesQuickly: the radiating face's balance is
// smooth and monotone, so Newton from the cell temperature settles in a
// handful of iterations; the answer must satisfy the balance to rounding.
func TestSurfaceNewtonConvergesQuickly(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct{ tCell, surroundings float64 }{{1073.15, 293.15}, {293.15, 1173.15}, {600, 600.5}} {
		ph := &ExposurePhase{H: 100, Fluid: 293.15, Emissivity: 0.7, Surroundings: tc.surroundings}
		gc, area := halfCellConductance(40, 1e-3), 1e-6
		ts, steps := surfaceNewton(gc, area, ph, tc.tCell, tc.tCell)
		es := ph.Emissivity * StefanBoltzmann
		balance := gc*(tc.tCell-ts) - area*(ph.H*(ts-ph.Fluid)+es*(math.Pow(ts, 4)-math.Pow(ph.Surroundings, 4)))
		if steps > 8 || math.Abs(balance) > 1e-12*gc*tc.tCell {
			t.Errorf("cell %g K: surface %g K after %d iterations, balance off by %g W", tc.tCell, ts, steps, balance)
		}
	}
}
