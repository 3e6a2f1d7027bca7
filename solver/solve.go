package solver

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"

	"soakfarm/mesh"
)

// Errors of a run that started.
var (
	// ErrLinearSolve marks a linear solve that broke down or hit its iteration cap.
	ErrLinearSolve = errors.New("linear solve did not converge")
	// ErrNotConverged marks a step whose Newton passes did not settle even
	// after the step was cut several times.
	ErrNotConverged = errors.New("newton passes did not converge")
)

// Default stepping. The accuracy tests against exact solutions
// (accuracy_test.go) are run with these values: backward Euler with a
// change of 1/160 of the driving difference per step keeps its time error
// near 0.3 % of that difference.
const (
	defaultMaxChange  = 5.0       // K, upper bound
	maxChangeFraction = 1.0 / 160 // of the largest driving temperature difference
	defaultStepsToEnd = 20        // MaxStep = End/defaultStepsToEnd
	defaultTolerance  = 1e-8
	// firstStepFourier is the cell Fourier number α·Δt/Δx² of the default
	// first step (the boundary rate may make it shorter).
	firstStepFourier = 1.0
)

// Control of steps and passes.
const (
	growthLimit  = 2.0 // largest ratio of one step to the one planned before
	shrinkLimit  = 0.5 // smallest such ratio for an accepted step
	rejectFactor = 2.0 // a step changing more than this times MaxChange is redone
	// timeLag is the relative time error backward Euler may accrue: the
	// ratio of its estimated local error to the change of the step.
	timeLag = 0.005
	// localErrorFloor (of MaxChange) is a local error small enough to
	// allow whatever the lag ratio says.
	localErrorFloor = 1e-3
	// bdf2RatioLimit keeps variable-step BDF2 zero-stable (the bound is 1+√2).
	bdf2RatioLimit = 2.0
	// newtonTolerance is the Newton pass change, relative to the largest
	// driving temperature difference, at which a step counts as settled.
	newtonTolerance = 1e-6
	maxPasses       = 30
	maxRetries      = 8 // cuts of one step after failed passes
	// minCellsPerWorker keeps small grids on one goroutine, where the
	// hand-over would cost more than the work.
	minCellsPerWorker = 4096
)

// Solve integrates p from its initial temperature to p.End (or until observe
// returns true), calling observe with the initial state and after every
// accepted step. observe may be nil.
func Solve(ctx context.Context, p *Problem, observe Observer) (*Outcome, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	r := newRun(p)
	defer r.ws.stop()
	return r.integrate(ctx, observe)
}

// bdf holds the coefficients of one step: a0·E(n+1) − a1·E(n) + a2·E(n−1) = Δt·(heat in).
// Backward Euler is a0 = a1 = 1, a2 = 0.
type bdf struct{ a0, a1, a2 float64 }

var backwardEulerCoefficients = bdf{1, 1, 0}

// bdf2Coefficients returns variable-step BDF2 for step ratio ω = Δt(n)/Δt(n−1).
func bdf2Coefficients(omega float64) bdf {
	return bdf{(1 + 2*omega) / (1 + omega), 1 + omega, omega * omega / (1 + omega)}
}

type material struct {
	rhoV float64 // kg per cell
	k    Curve
	cp   Curve
	h    enthalpy
}

// run is the working state of one Solve.
type run struct {
	p        *Problem
	g        *mesh.Grid
	stepping Stepping
	pad      int // padded index of cell 0
	slabs    [][]span
	ws       *workers
	lin      linearSolver
	st       stencil
	mats     []material

	// t is the current iterate and, between steps, the accepted solution
	// (whole box: the stencil reads neighbours, observers see the grid);
	// tn and tnm1 are the two accepted solutions before and tstar is the
	// linearisation point of a Newton pass, over the part cells only
	// (span.at).
	t, tn, tnm1, tstar []float64
	// b is the right-hand side of the Newton pass, over the part cells
	// only (span.at): no neighbour reads it.
	b []float64
	// facePart is the index among the part cells of each face's cell.
	facePart []int32
	// k is each cell's conductivity at the linearisation point; nil when
	// every conductivity is constant (cellK reads the material then).
	k []float64

	// contactR[a][b] is the contact resistance of one cell face between
	// regions a and b, K/W (0 for none); nil when the problem has no contacts.
	contactR [][]float64

	phases []*ExposurePhase // per surface group, for the current step
	// faceFlow and faceConductance are each face's heat flow into its cell
	// at the linearisation point and −d(flow)/dT there; faceSurface is the
	// surface temperature found then, where the next search starts.
	faceFlow, faceConductance, faceSurface []float64
	linear                                 bool // constant properties and no radiation: one pass per step
	constantK                              bool
	// regionK is each region's conductivity when all are constant, by
	// region number (0 outside the part: 0).
	regionK     []float64
	newtonTol   float64
	drive       float64 // largest driving temperature difference, K
	phaseStarts []float64

	// operands of the assembly tasks
	dt                                          float64
	coef                                        bdf
	kTask, conductanceTask, fillTask, facesTask func(int)
	// slabFaces lists, per slab, the faces of its cells, so that the
	// face passes run on all workers without two touching one cell.
	slabFaces [][]int32
	// acc holds each worker's share of a reduction over the part.
	acc []partial
	// conductancesSet tells that the face conductances hold for every
	// step (constant conductivities) and are set.
	conductancesSet bool
}

func newRun(p *Problem) *run { return newRunOn(p, haveVector()) }

// newRunOn is newRun with the vector kernels on or off (off: the portable
// loops the kernels are checked against).
func newRunOn(p *Problem, vector bool) *run {
	g := p.Grid
	nxy := g.N[0] * g.N[1]
	size := g.CellCount() + 2*nxy
	mem := &arrays{}
	r := &run{
		p: p, g: g, pad: nxy, stepping: p.Stepping,
		st:       stencil{vector: vector},
		t:        grow[float64](mem, size),
		phases:   make([]*ExposurePhase, len(g.Groups)),
		faceFlow: make([]float64, len(g.Faces)), faceConductance: make([]float64, len(g.Faces)),
		faceSurface: make([]float64, len(g.Faces)),
	}
	vol := g.CellSize * g.CellSize * g.CellSize
	r.linear, r.constantK = true, true
	for _, m := range p.Materials {
		r.mats = append(r.mats, material{rhoV: m.Density * vol, k: m.Conductivity, cp: m.SpecificHeat,
			h: newEnthalpy(m.SpecificHeat, p.Initial)})
		if !m.Conductivity.isConstant() {
			r.constantK, r.linear = false, false
		}
		if !m.SpecificHeat.isConstant() {
			r.linear = false
		}
	}
	if len(p.Contacts) > 0 {
		r.contactR = make([][]float64, len(p.Materials)+1)
		for i := range r.contactR {
			r.contactR[i] = make([]float64, len(p.Materials)+1)
		}
		for _, c := range p.Contacts {
			res := 1 / (c.Conductance * g.CellSize * g.CellSize)
			r.contactR[c.RegionA][c.RegionB], r.contactR[c.RegionB][c.RegionA] = res, res
		}
	}
	if r.constantK {
		r.regionK = make([]float64, len(r.mats)+1)
		for i, m := range r.mats {
			r.regionK[i+1] = m.k.At(p.Initial) // constant: any temperature
		}
	} else {
		r.k = grow[float64](mem, size)
	}
	drive := 1.0 // K, floor for a problem with no driving difference
	for _, e := range p.Exposures {
		for _, ph := range e.Phases {
			if ph.Start > 0 {
				r.phaseStarts = append(r.phaseStarts, ph.Start)
			}
			if ph.H > 0 {
				drive = math.Max(drive, math.Abs(ph.Fluid-p.Initial))
			}
			if ph.Emissivity > 0 {
				r.linear = false
				drive = math.Max(drive, math.Abs(ph.Surroundings-p.Initial))
			}
		}
	}
	r.drive = drive
	r.newtonTol = newtonTolerance * drive

	threads := p.Threads
	if threads == 0 {
		threads = runtime.GOMAXPROCS(0)
	}
	var lay *layout
	r.slabs, lay = partition(g, r.pad, threads)
	r.st.gx, r.st.gy, r.st.gz = grow[float32](mem, lay.size), grow[float32](mem, lay.size), grow[float32](mem, lay.size)
	cells := partCells(r.slabs)
	r.b, r.st.diag = grow[float64](mem, cells), grow[float64](mem, cells)
	r.tn, r.tnm1, r.tstar = grow[float64](mem, cells), grow[float64](mem, cells), grow[float64](mem, cells)
	all := slices.Concat(r.slabs...)
	r.facePart = make([]int32, len(g.Faces))
	r.slabFaces = make([][]int32, len(r.slabs))
	slabEnd := make([]int, len(r.slabs)) // part index after each slab's last cell
	for w, slab := range r.slabs {
		slabEnd[w] = partCells(r.slabs[:w]) + partCells([][]span{slab})
	}
	for i, f := range g.Faces {
		at := partIndex(all, r.pad+int(f.Cell))
		r.facePart[i] = int32(at)
		w, _ := slices.BinarySearch(slabEnd, at+1)
		r.slabFaces[w] = append(r.slabFaces[w], int32(i))
	}
	r.acc = make([]partial, len(r.slabs))
	r.ws = newWorkers(len(r.slabs))
	if p.Stepping.Preconditioner == Jacobi {
		r.lin = newJacobiCG(r.ws, r.slabs, lay.size, mem)
	} else {
		r.lin = newMultigridCG(r.ws, r.slabs, lay, &r.st, g.N, func(c int) bool { return g.Region[c] != 0 }, mem, conductivityJumps(p))
	}
	r.kTask = r.conductivities
	r.conductanceTask = r.faceConductances
	r.fillTask = r.fill
	r.facesTask = r.addFaces
	r.stepping = r.defaults()
	return r
}

// partition finds the runs of part cells of g and splits the grid into at
// most `threads` slabs of whole z-planes holding about equal numbers of part cells.
func partition(g *mesh.Grid, pad, threads int) ([][]span, *layout) {
	return partitionMask(g.N, func(c int) bool { return g.Region[c] != 0 }, pad, threads, false)
}

// partitionMask is partition for a box of n cells whose part cells
// inPart tells (by unpadded index), with a wide layout for a coarse
// multigrid level. It returns the spans with their
// positions in the box padded by pad cells at each end (span.lo, hi) and
// in the layout it builds (span.cp and the deltas).
func partitionMask(n [3]int, inPart func(c int) bool, pad, threads int, wide bool) ([][]span, *layout) {
	nx, ny, nz := n[0], n[1], n[2]
	lay, partRuns := newLayout(n, inPart, wide)
	planes := make([][]span, nz)
	total := 0
	for z := range nz {
		for y := range ny {
			row := nx * (y + ny*z)
			for _, pr := range partRuns[lay.row(y, z)] {
				lo, hi := int(pr.lo), int(pr.hi)
				cp := lay.neighbour(lay.row(y, z), lo)
				planes[z] = append(planes[z], span{
					lo: pad + row + lo, hi: pad + row + hi, cp: cp, at: total, x: lo, y: y, z: z,
					dn: lay.neighbour(lay.row(y+1, z), lo) - cp, ds: lay.neighbour(lay.row(y-1, z), lo) - cp,
					du: lay.neighbour(lay.row(y, z+1), lo) - cp, dd: lay.neighbour(lay.row(y, z-1), lo) - cp,
				})
				total += hi - lo
			}
		}
	}
	count := min(threads, max(1, total/minCellsPerWorker), nz)
	slabs := make([][]span, count)
	done := 0
	w := 0
	for z := range nz {
		slabs[w] = append(slabs[w], planes[z]...)
		for _, sp := range planes[z] {
			done += sp.hi - sp.lo
		}
		if w < count-1 && done*count >= (w+1)*total {
			w++
		}
	}
	return slabs, lay
}

// defaults fills unset stepping fields.
func (r *run) defaults() Stepping {
	s := r.p.Stepping
	if s.Scheme == "" {
		s.Scheme = BackwardEuler
	}
	if s.MaxChange == 0 {
		s.MaxChange = min(defaultMaxChange, maxChangeFraction*r.drive)
	}
	if s.MaxStep == 0 {
		s.MaxStep = r.p.End / defaultStepsToEnd
	}
	if s.Tolerance == 0 {
		s.Tolerance = defaultTolerance
	}
	if s.FirstStep == 0 {
		s.FirstStep = min(r.firstStep(s.MaxChange), s.MaxStep)
	}
	return s
}

// firstStep is the smaller of the step at cell Fourier number
// firstStepFourier and the step in which the initial surface heat flow
// would change a cell by maxChange.
func (r *run) firstStep(maxChange float64) float64 {
	g, p := r.g, r.p
	h := g.CellSize
	step := math.Inf(1)
	for _, m := range r.mats {
		rhoCp := m.rhoV / (h * h * h) * m.cp.At(p.Initial)
		step = min(step, firstStepFourier*h*h*rhoCp/m.k.At(p.Initial))
	}
	rate := make(map[int32]float64)
	for _, f := range g.Faces {
		m := &r.mats[g.Region[f.Cell]-1]
		ph := &p.Exposures[f.Group].Phases[0]
		_, q, _ := faceExchange(halfCellConductance(m.k.At(p.Initial), h), f.Area, ph, p.Initial, p.Initial)
		rate[f.Cell] += math.Abs(q) / (m.rhoV * m.cp.At(p.Initial))
	}
	for _, v := range rate {
		if v > 0 {
			step = min(step, maxChange/v)
		}
	}
	return step
}

// forParts calls fn for every part cell: its padded index c and its index
// i among the part cells.
func (r *run) forParts(fn func(c, i int, m *material)) {
	for w := range r.slabs {
		r.slabParts(w, fn)
	}
}

// eachSlab runs fn(w) for every slab w at once, on the workers. fn may
// write r.acc[w] and the cells of slab w, nothing shared.
func (r *run) eachSlab(fn func(w int)) { r.ws.run(fn) }

// sumAcc returns the sums of the workers' shares a and b.
func (r *run) sumAcc() (a, b float64) {
	for _, p := range r.acc {
		a += p.a
		b += p.b
	}
	return a, b
}

// maxAcc returns the largest of the workers' shares a.
func (r *run) maxAcc() float64 {
	m := 0.0
	for _, p := range r.acc {
		m = max(m, p.a)
	}
	return m
}

// partRows returns the cells of span sp in the solution, in the solution
// before and in the one before that, as equal-length views.
func (r *run) partRows(sp span) (t, tn, tnm1 []float64) {
	t = r.t[sp.lo:sp.hi]
	n := len(t)
	return t, r.tn[sp.at : sp.at+n : sp.at+n], r.tnm1[sp.at : sp.at+n : sp.at+n]
}

// slabParts calls fn for every part cell of slab w.
func (r *run) slabParts(w int, fn func(c, i int, m *material)) {
	for _, sp := range r.slabs[w] {
		m := &r.mats[r.g.Region[sp.lo-r.pad]-1]
		for i, c := sp.at, sp.lo; c < sp.hi; i, c = i+1, c+1 {
			if c > sp.lo && r.g.Region[c-r.pad] != r.g.Region[c-1-r.pad] {
				m = &r.mats[r.g.Region[c-r.pad]-1]
			}
			fn(c, i, m)
		}
	}
}

// initialState sets the solution and the two before it to the initial temperature.
func (r *run) initialState() {
	r.forParts(func(c, i int, _ *material) { r.t[c], r.tn[i], r.tnm1[i] = r.p.Initial, r.p.Initial, r.p.Initial })
}

// partValues copies the part cells of the whole-box t into dst, which
// holds the part cells only.
func (r *run) partValues(dst []float64) {
	r.eachSlab(func(w int) {
		for _, sp := range r.slabs[w] {
			copy(dst[sp.at:sp.at+sp.hi-sp.lo], r.t[sp.lo:sp.hi])
		}
	})
}

// memory returns the bytes of the run's arrays, the linear solver's included.
func (r *run) memory() int {
	return 8*(len(r.t)+len(r.tn)+len(r.tnm1)+len(r.tstar)+len(r.b)+len(r.k)+
		len(r.st.diag)+len(r.faceFlow)+len(r.faceConductance)+len(r.faceSurface)) +
		4*(len(r.st.gx)+len(r.st.gy)+len(r.st.gz)+len(r.facePart)) + r.lin.memory()
}

func (r *run) integrate(ctx context.Context, observe Observer) (*Outcome, error) {
	p, s := r.p, r.stepping
	r.initialState()
	n := r.g.CellCount()
	state := &State{T: r.t[r.pad : r.pad+n]}
	out := &Outcome{}
	if observe != nil && observe(state) {
		return out, nil
	}
	landings := r.landings()
	next := 0
	time, dt, dtPrev := 0.0, s.FirstStep, 0.0
	minStep := p.End * 1e-14
	var lastIncrement float64 // boundary heat of the previous step, for BDF2
	for retries := 0; time < p.End; {
		if err := ctx.Err(); err != nil {
			return out, fmt.Errorf("solve at t = %g s: %w", time, err)
		}
		for landings[next] <= time {
			next++
		}
		h, lands := dt, false
		if remaining := landings[next] - time; h >= remaining*(1-1e-9) {
			h, lands = remaining, true
		} else if h > remaining/2 {
			h = remaining / 2 // two equal steps instead of one and a sliver
		}
		coef := backwardEulerCoefficients
		if s.Scheme == BDF2 && dtPrev > 0 && !slices.Contains(r.phaseStarts, time) {
			if h > bdf2RatioLimit*dtPrev {
				h, lands = bdf2RatioLimit*dtPrev, false
			}
			coef = bdf2Coefficients(h / dtPrev)
		}
		iters, err := r.step(ctx, time, h, dtPrev, coef)
		state.Iterations += iters
		state.TotalIterations += int64(iters)
		if err != nil {
			if ctx.Err() != nil {
				return out, fmt.Errorf("solve at t = %g s: %w", time, ctx.Err())
			}
			if (errors.Is(err, ErrNotConverged) || errors.Is(err, ErrLinearSolve)) && retries < maxRetries {
				retries++
				dt = h / 4
				continue
			}
			return out, fmt.Errorf("solve: step from t = %g s of %g s: %w", time, h, err)
		}
		change := r.largestChange()
		if change > rejectFactor*s.MaxChange && h > minStep {
			dt = h * max(0.1, min(shrinkLimit, 0.9*s.MaxChange/change))
			continue
		}
		retries = 0

		heat := h * r.boundaryFlow()
		if coef.a2 != 0 {
			heat = (heat + coef.a2*lastIncrement) / coef.a0
		}
		lastIncrement = heat
		state.BoundaryHeat += heat
		state.StoredEnergy = r.storedEnergy()
		if lands {
			time = landings[next]
		} else {
			time += h
		}
		state.Time = time
		state.Step++
		grown := h * s.MaxChange / change
		if change == 0 {
			grown = math.Inf(1)
		}
		if coef == backwardEulerCoefficients && dtPrev > 0 {
			// Backward Euler runs late by about lte/change of the elapsed
			// time; keep that ratio at timeLag, except in slow tails where
			// the local error is negligible anyway.
			allowed := max(timeLag*change, localErrorFloor*s.MaxChange)
			if lte := r.localError(h / dtPrev); lte > allowed/100 {
				grown = min(grown, h*math.Sqrt(allowed/lte)) // lte ∝ Δt²
			}
		}
		r.tnm1, r.tn = r.tn, r.tnm1
		r.partValues(r.tn)
		out.Steps, out.TotalIterations, out.EndTime = state.Step, state.TotalIterations, time
		out.EnergyImbalance = imbalance(state.StoredEnergy, state.BoundaryHeat)
		stop := observe != nil && observe(state)
		state.Iterations = 0
		if stop {
			break
		}

		dtPrev = h
		dt = min(max(grown, shrinkLimit*dt), growthLimit*dt, s.MaxStep)
	}
	return out, nil
}

func imbalance(stored, heat float64) float64 {
	if stored == 0 {
		return 0
	}
	return math.Abs(stored-heat) / math.Abs(stored)
}

// landings returns the sorted times a step must end on, End last.
func (r *run) landings() []float64 {
	var l []float64
	for _, t := range append(slices.Clone(r.p.Landings), r.phaseStarts...) {
		if t > 0 && t < r.p.End {
			l = append(l, t)
		}
	}
	l = append(l, r.p.End)
	slices.Sort(l)
	return slices.Compact(l)
}

// step advances from the accepted solution at time t by h into r.t.
func (r *run) step(ctx context.Context, t, h, dtPrev float64, coef bdf) (iterations int, err error) {
	for i := range r.phases {
		r.phases[i] = phaseBefore(&r.p.Exposures[i], t+h/2)
	}
	// Extrapolate the last two solutions: the first linearisation point and
	// the warm start of the linear solver.
	ratio := 0.0
	if dtPrev > 0 {
		ratio = h / dtPrev
	}
	r.eachSlab(func(w int) {
		for _, sp := range r.slabs[w] {
			t, tn, tm := r.partRows(sp)
			for i := range t {
				t[i] = tn[i] + ratio*(tn[i]-tm[i])
			}
		}
	})
	r.dt, r.coef = h, coef
	for pass := 1; ; pass++ {
		r.partValues(r.tstar)
		if !r.constantK || !r.conductancesSet {
			if r.k != nil {
				r.ws.run(r.kTask)
			}
			r.ws.run(r.conductanceTask)
			r.st.conductancesSet++
			r.conductancesSet = r.constantK
		}
		r.ws.run(r.fillTask)
		r.ws.run(r.facesTask)
		n, err := r.lin.solve(ctx, &r.st, r.b, r.t, r.stepping.Tolerance)
		iterations += n
		if err != nil {
			return iterations, err
		}
		if r.linear {
			return iterations, nil
		}
		r.eachSlab(func(w int) {
			moved := 0.0
			for _, sp := range r.slabs[w] {
				t, ts := r.t[sp.lo:sp.hi], r.tstar[sp.at:sp.at+sp.hi-sp.lo]
				ts = ts[:len(t)]
				for i := range t {
					moved = max(moved, math.Abs(t[i]-ts[i]))
				}
			}
			r.acc[w] = partial{a: moved}
		})
		if r.maxAcc() <= r.newtonTol {
			return iterations, nil
		}
		if pass == maxPasses {
			return iterations, fmt.Errorf("%w after %d passes", ErrNotConverged, pass)
		}
	}
}

// conductivities sets k at the linearisation point for the cells of slab w.
func (r *run) conductivities(w int) {
	for _, sp := range r.slabs[w] {
		m := &r.mats[r.g.Region[sp.lo-r.pad]-1]
		for i, c := sp.at, sp.lo; c < sp.hi; i, c = i+1, c+1 {
			if c > sp.lo && r.g.Region[c-r.pad] != r.g.Region[c-1-r.pad] {
				m = &r.mats[r.g.Region[c-r.pad]-1]
			}
			r.k[c] = m.k.At(r.tstar[i])
		}
	}
}

// cellK returns the conductivity of cell c (padded index, inside the box)
// at the linearisation point, 0 outside the part.
func (r *run) cellK(c int) float64 {
	if r.k != nil {
		return r.k[c]
	}
	return r.regionK[r.g.Region[c-r.pad]]
}

// faceConductances sets the conductances between neighbouring part cells
// of slab w, from the cell conductivities at the linearisation point: the
// series of two half cells, k·Δx²/(Δx/2) each.
func (r *run) faceConductances(w int) {
	g := r.g
	nx, ny, nz, nxy := g.N[0], g.N[1], g.N[2], r.pad
	dx := g.CellSize
	harmonic := func(k1, k2 float64) float64 { return 2 * dx * k1 * k2 / (k1 + k2) } // 0 when k2 = 0 (outside)
	pair := func(c, nb int) float64 { return harmonic(r.cellK(c), r.cellK(nb)) }
	if r.contactR != nil {
		// A contact resistance between two regions adds in series.
		pair = func(c, nb int) float64 {
			gh := harmonic(r.cellK(c), r.cellK(nb))
			if res := r.contactR[g.Region[c-r.pad]][g.Region[nb-r.pad]]; res > 0 && gh > 0 {
				return 1 / (1/gh + res)
			}
			return gh
		}
	}
	for _, sp := range r.slabs[w] {
		for c, at := sp.lo, sp.cp; c < sp.hi; c, at = c+1, at+1 {
			var gxp, gyp, gzp float64
			if sp.x+c-sp.lo < nx-1 {
				gxp = pair(c, c+1)
			}
			if sp.y < ny-1 {
				gyp = pair(c, c+nx)
			}
			if sp.z < nz-1 {
				gzp = pair(c, c+nxy)
			}
			r.st.gx[at], r.st.gy[at], r.st.gz[at] = float32(gxp), float32(gyp), float32(gzp)
		}
	}
}

// fill sets the diagonal and right-hand side of the Newton pass for slab w:
// a0·ρV·(H* + cp*·(T − T*))/Δt + Σ G·(T − T_nb) = ρV·(a1·H(n) − a2·H(n−1))/Δt,
// enthalpy H linearised at T*, face conductances G (faceConductances) at
// the conductivity of T*.
func (r *run) fill(w int) {
	g, st := r.g, &r.st
	a0, a1, a2 := r.coef.a0, r.coef.a1, r.coef.a2
	for _, sp := range r.slabs[w] {
		for i, c := sp.at, sp.lo; c < sp.hi; i, c = i+1, c+1 {
			m := &r.mats[g.Region[c-r.pad]-1]
			capacity := m.rhoV / r.dt
			// A conductance to a cell outside the part is 0.
			gsum := faceSum(st.gx, st.gy, st.gz, &sp, sp.cp+c-sp.lo)
			ts := r.tstar[i]
			hs, cp := m.h.AtWithCp(ts)
			old := a1 * m.h.At(r.tn[i])
			if a2 != 0 {
				old -= a2 * m.h.At(r.tnm1[i])
			}
			st.diag[i] = a0*capacity*cp + gsum
			r.b[i] = capacity * (old - a0*(hs-cp*ts))
		}
	}
}

// addFaces adds the linearised surface exchange of the boundary faces of
// slab w.
func (r *run) addFaces(w int) {
	g := r.g
	for _, i := range r.slabFaces[w] {
		f := &g.Faces[i]
		ph := r.phases[f.Group]
		if ph.insulated() {
			r.faceFlow[i], r.faceConductance[i] = 0, 0
			continue
		}
		c, at := r.pad+int(f.Cell), r.facePart[i]
		ts := r.tstar[at]
		surface, q, gl := faceExchange(halfCellConductance(r.cellK(c), g.CellSize), f.Area, ph, ts, r.faceSurface[i])
		r.faceSurface[i] = surface
		r.faceFlow[i], r.faceConductance[i] = q, gl
		r.st.diag[at] += gl
		r.b[at] += q + gl*ts
	}
}

// boundaryFlow returns the heat flow into the part through its surface,
// W, as the last Newton pass linearised it: the flow the step's equations
// balance, so that stored energy and boundary heat agree to the linear
// solver's tolerance (the linearisation error is second order in the last
// pass's change).
func (r *run) boundaryFlow() float64 {
	r.eachSlab(func(w int) {
		sum := 0.0
		for _, i := range r.slabFaces[w] {
			c := r.pad + int(r.g.Faces[i].Cell)
			sum += r.faceFlow[i] + r.faceConductance[i]*(r.tstar[r.facePart[i]]-r.t[c])
		}
		r.acc[w] = partial{a: sum}
	})
	sum, _ := r.sumAcc()
	return sum
}

// storedEnergy returns Σ ρV·H(T) over the part, J since the start.
func (r *run) storedEnergy() float64 {
	r.eachSlab(func(w int) {
		sum := 0.0
		r.slabParts(w, func(c, _ int, m *material) {
			sum += m.rhoV * m.h.At(r.t[c])
		})
		r.acc[w] = partial{a: sum}
	})
	sum, _ := r.sumAcc()
	return sum
}

// localError estimates backward Euler's local error of the step just
// taken as half the largest distance between the solution and the linear
// extrapolation of the two before (ratio = this step / the one before).
func (r *run) localError(ratio float64) float64 {
	r.eachSlab(func(w int) {
		lte := 0.0
		for _, sp := range r.slabs[w] {
			t, tn, tm := r.partRows(sp)
			for i := range t {
				lte = max(lte, math.Abs(t[i]-tn[i]-ratio*(tn[i]-tm[i])))
			}
		}
		r.acc[w] = partial{a: lte}
	})
	return r.maxAcc() / 2
}

// largestChange returns max |T − T(n)| over the part.
func (r *run) largestChange() float64 {
	r.eachSlab(func(w int) {
		change := 0.0
		for _, sp := range r.slabs[w] {
			t, tn, _ := r.partRows(sp)
			for i := range t {
				change = max(change, math.Abs(t[i]-tn[i]))
			}
		}
		r.acc[w] = partial{a: change}
	})
	return r.maxAcc()
}

// conductivityJumps tells whether p's part may hold faces across which
// the conductivity changes sharply: a contact resistance, or materials
// whose conductivities differ more than twofold somewhere in their
// ranges. The multigrid transfers then follow the conductances.
func conductivityJumps(p *Problem) bool {
	if len(p.Contacts) > 0 {
		return true
	}
	lo, hi := math.Inf(1), 0.0
	for _, m := range p.Materials {
		for _, k := range m.Conductivity.V {
			lo, hi = min(lo, k), max(hi, k)
		}
	}
	return len(p.Materials) > 1 && hi > 2*lo
}
