package verify

import (
	"context"
	"fmt"
	"math"
	"time"

	"soakfarm/estimate"
	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/solver"
	"soakfarm/solver/exact"
)

// Bounds that keep the cross-check small next to the job.
const (
	// maxSphereAcross caps the cross-check sphere at about 17 000 cells.
	maxSphereAcross = 32
	// maxWallAcross caps the wall's cells through its thickness; the wall
	// is only four cells wide, so this is a few thousand cells.
	maxWallAcross = 400
	// wallWidthCells is the wall's width in y and z, in cells: its faces
	// there are insulated, so the field is the same across it.
	wallWidthCells = 4
	// settledEnergy ends a cross-check once the exact solution has taken
	// up this fraction of its energy: later there is nothing left to get
	// wrong.
	settledEnergy = 0.999
	// compareFromFourier is the Fourier number (on the shape's radius or
	// half-thickness) from which the cross-check compares, as the solver's
	// accuracy tests do: before it the profile under the surface is thinner
	// than a cell at any sensible resolution, and milestones come later.
	compareFromFourier = 0.05
	// maxSamples bounds the history kept for the plot.
	maxSamples = 80
)

// shape is one of the cross-check's bodies.
type shape int

const (
	sphereShape shape = iota
	wallShape
)

func (s shape) String() string {
	if s == sphereShape {
		return "sphere"
	}
	return "plane-wall"
}

// jobScale is what the cross-check copies from the job.
type jobScale struct {
	cellsPerLc  float64
	cellsAcross float64
	// fourierEnd is α·t_end/Lc² of the job.
	fourierEnd float64
	stepping   *soakv1.TimeStepping
	threads    int
}

// body is a cross-check shape meshed and set up.
type body struct {
	exact    exact.Shape
	length   float64 // radius or half-thickness, m
	lc       float64 // V/As of the shape, m
	solid    mesh.Solid
	selector mesh.Selector
}

func newBody(s shape, est *estimate.Estimate) body {
	h := est.Hand
	if s == sphereShape {
		r := h.GetSphereRadiusM()
		return body{exact: exact.Sphere, length: r, lc: r / 3, solid: mesh.Sphere{Diameter: 2 * r}, selector: mesh.Selector{All: true}}
	}
	l := h.GetWallHalfThicknessM()
	return body{exact: exact.PlaneWall, length: l, lc: l, selector: mesh.Selector{Facing: []int{mesh.MinusX, mesh.PlusX}}}
}

// crossCheck runs the solver on shape s with the job's material at the
// estimate's mean temperature, the estimate's one effective exposure, the
// job's cells per Lc and Fourier range, and compares with the exact series.
func crossCheck(ctx context.Context, s shape, est *estimate.Estimate, job jobScale) (*soakv1.CrossCheck, error) {
	started := time.Now()
	h := est.Hand
	b := newBody(s, est)
	cc := &soakv1.CrossCheck{Shape: s.String(), SizeM: b.length, JobCellsPerLc: job.cellsPerLc}

	// Cells through the shape's smallest extent at the job's cells per Lc,
	// kept within what the mesh accepts and what stays cheap.
	across := 2 * b.length / b.lc * job.cellsPerLc
	limit := float64(maxWallAcross)
	if s == sphereShape {
		limit = maxSphereAcross
	}
	switch {
	case across > limit:
		cc.Notes = append(cc.Notes, fmt.Sprintf("coarser than the job: %g cells across instead of %.3g, to keep it cheap; its errors are likely larger than the job's", limit, across))
		across = limit
	case across < mesh.MinCellsAcross:
		cc.Notes = append(cc.Notes, fmt.Sprintf("finer than the job: %d cells across instead of %.3g, the fewest the mesh accepts; the job's own error is larger", mesh.MinCellsAcross, across))
		across = mesh.MinCellsAcross
	default:
		// A whole number of cells across gives the wall its true thickness.
		across = math.Round(across)
	}
	cell := 2 * b.length / across
	if s == wallShape {
		b.solid = mesh.Box{Size: [3]float64{2 * b.length, wallWidthCells * cell, wallWidthCells * cell}}
	}
	cc.CellSizeM = cell
	cc.CellsPerLc = b.lc / cell
	g, err := mesh.Voxelise(ctx, b.solid, cell, []mesh.Selector{b.selector})
	if err != nil {
		return nil, err
	}
	cc.PartCells = uint64(g.PartCells())

	k, alpha := h.GetConductivityWMk(), h.GetDiffusivityM2S()
	bi := h.GetHEffectiveWM2K() * b.length / k
	cc.BiotNumber = bi
	// The job's Fourier range on Lc, in the shape's own time: t = Fo·Lc²/α.
	timeScale := b.lc * b.lc / (h.GetCharacteristicLengthM() * h.GetCharacteristicLengthM())
	prob := &solver.Problem{
		Grid: g,
		Materials: []solver.Material{{
			Density:      h.GetDensityKgM3(),
			Conductivity: solver.Constant(k),
			SpecificHeat: solver.Constant(h.GetSpecificHeatJKgk()),
		}},
		Exposures: make([]solver.Exposure, len(g.Groups)),
		Initial:   est.InitialK,
		End:       job.fourierEnd * b.lc * b.lc / alpha,
		Stepping: solver.Stepping{
			Scheme:    job.stepping.GetScheme(),
			MaxChange: job.stepping.GetMaxChangeK(),
			FirstStep: job.stepping.GetFirstStepS() * timeScale,
			MaxStep:   job.stepping.GetMaxStepS() * timeScale,
		},
		Threads: job.threads,
	}
	for i, grp := range g.Groups {
		ph := solver.ExposurePhase{Fluid: est.InitialK, Surroundings: est.InitialK}
		if grp.Exposure >= 0 {
			ph = solver.ExposurePhase{H: h.GetHEffectiveWM2K(), Fluid: est.FluidK, Surroundings: est.FluidK}
		}
		prob.Exposures[i] = solver.Exposure{Phases: []solver.ExposurePhase{ph}}
	}

	cmp, err := newComparison(b, prob, bi, est)
	if err != nil {
		return nil, err
	}
	qMax := float64(g.PartCells()) * cell * cell * cell * h.GetDensityKgM3() * h.GetSpecificHeatJKgk() * (est.FluidK - est.InitialK)
	var samples []*soakv1.CrossCheckSample
	var cmpErr error
	observe := func(st *solver.State) bool {
		fo := alpha * st.Time / (b.length * b.length)
		sample, settled, err := cmp.at(st, fo, st.StoredEnergy/qMax)
		if err != nil {
			cmpErr = err
			return true
		}
		samples = append(samples, sample)
		return settled
	}
	out, err := solver.Solve(ctx, prob, observe)
	if err != nil {
		return nil, err
	}
	if cmpErr != nil {
		return nil, fmt.Errorf("exact solution: %w", cmpErr)
	}
	cc.Steps = uint32(out.Steps)
	cc.FourierFrom = compareFromFourier
	cc.FourierTo = alpha * out.EndTime / (b.length * b.length)
	cc.TemperatureError = check(cmp.maxTemp, TemperatureErrorLimit)
	cc.EnergyError = check(cmp.maxEnergy, EnergyErrorLimit)
	cc.Samples = thin(samples, maxSamples)
	cc.Notes = append(cc.Notes, fmt.Sprintf("constant properties at %.4g °C and one exposure, h = %.4g W/m²K to %.4g °C; the job's temperature dependence, schedules and mixed exposures are not part of it",
		h.GetPropertyTempC(), h.GetHEffectiveWM2K(), h.GetFluidC()))
	cc.WallSeconds = time.Since(started).Seconds()
	return cc, nil
}

// comparison measures the cross-check against the exact series where the
// solver's own accuracy tests do: the cell nearest the centre, the surface
// temperature at the pole (the face whose normal is nearest +x) and the
// energy taken up.
type comparison struct {
	body    body
	prob    *solver.Problem
	bi      float64
	fluid   float64 // K
	drive   float64 // initial − fluid, K
	centre  int     // cell nearest the centre
	centreX float64 // its ξ (r/R or |x|/L)
	pole    int     // boundary face
	// maxTemp and maxEnergy are the largest errors seen so far.
	maxTemp, maxEnergy float64
}

func newComparison(b body, prob *solver.Problem, bi float64, est *estimate.Estimate) (*comparison, error) {
	c := &comparison{body: b, prob: prob, bi: bi, fluid: est.FluidK, drive: est.InitialK - est.FluidK, centre: -1, pole: -1}
	g := prob.Grid
	for cell, r := range g.Region {
		if r == 0 {
			continue
		}
		i, j, k := g.Coords(cell)
		p := g.Centre(i, j, k)
		d := math.Abs(p[0])
		if b.exact == exact.Sphere {
			d = math.Sqrt(p[0]*p[0] + p[1]*p[1] + p[2]*p[2])
		}
		if c.centre < 0 || d < c.centreX {
			c.centre, c.centreX = cell, d
		}
	}
	c.centreX /= b.length
	best := math.Inf(-1)
	for f, face := range g.Faces {
		if face.Dir == mesh.PlusX && face.Normal[0] > best {
			c.pole, best = f, face.Normal[0]
		}
	}
	if c.centre < 0 || c.pole < 0 {
		return nil, fmt.Errorf("the %v mesh has no cells or no +x face", b.exact)
	}
	return c, nil
}

// at compares one state at Fourier number fo whose energy fraction is
// energy, and reports whether the exact solution has settled.
func (c *comparison) at(st *solver.State, fo, energy float64) (*soakv1.CrossCheckSample, bool, error) {
	exactEnergy, err := exact.EnergyFraction(c.body.exact, c.bi, fo)
	if err != nil {
		return nil, false, err
	}
	exactCentre, err := exact.Theta(c.body.exact, c.bi, fo, c.centreX)
	if err != nil {
		return nil, false, err
	}
	s := &soakv1.CrossCheckSample{
		FourierNumber: fo, EnergyFraction: energy, EnergyFractionExact: exactEnergy,
		CentreTheta: c.theta(st.T[c.centre]), CentreThetaExact: exactCentre,
	}
	if fo >= compareFromFourier {
		exactSurface, err := exact.Theta(c.body.exact, c.bi, fo, 1)
		if err != nil {
			return nil, false, err
		}
		face := c.prob.Grid.Faces[c.pole]
		surface := c.theta(solver.SurfaceTemperature(c.prob, c.pole, st.T[face.Cell], st.Time))
		c.maxTemp = max(c.maxTemp, math.Abs(s.CentreTheta-exactCentre), math.Abs(surface-exactSurface))
		c.maxEnergy = max(c.maxEnergy, math.Abs(energy-exactEnergy))
	}
	return s, exactEnergy >= settledEnergy, nil
}

func (c *comparison) theta(t float64) float64 { return (t - c.fluid) / c.drive }

// thin keeps at most n samples, evenly spread, always the first and last.
func thin(s []*soakv1.CrossCheckSample, n int) []*soakv1.CrossCheckSample {
	if len(s) <= n {
		return s
	}
	out := make([]*soakv1.CrossCheckSample, 0, n)
	for i := range n {
		out = append(out, s[i*(len(s)-1)/(n-1)])
	}
	return out
}
