// Package bench owns the logic of `soak bench`: it times the solver on
// reference block steps and on a realistic part over a whole run, each side
// by side with the plain Jacobi-preconditioned solver as the in-run
// reference, and measures the machine's own memory bandwidth with a
// triad so that the solver's traffic can be read against it.
package bench

import (
	"context"
	"errors"
	"fmt"
	"io"
	"runtime"
	"slices"
	"time"

	"soakfarm/mesh"
	"soakfarm/solver"
)

// The reference problem: steel-like round values of our own.
const (
	cellSize     = 1e-3   // m
	conductivity = 40.0   // W/(m·K)
	density      = 8000.0 // kg/m³
	specificHeat = 450.0  // J/(kg·K); ρ·cp = 3.6e6 J/(m³·K)
	filmCoeff    = 100.0  // W/(m²·K)
	fluidTemp    = 293.15 // K (20 °C)
	initialTemp  = 1073.15
	tolerance    = 1e-8
	// The part's run: half an hour of cooling in still air, by BDF2 with
	// changes of up to 25 K and at least 30 steps.
	partEnd       = 1800.0 // s
	partMaxChange = 25.0   // K
	partSteps     = 30
	partEmissiv   = 0.7
)

// Options choose what Run measures. Zero fields take the defaults.
type Options struct {
	// Sizes are the block edges in cells: 64, 128 and 160 by default.
	Sizes []int
	// CellFouriers are the steps' cell Fourier numbers α·Δt/Δx²: 20 and 2000.
	CellFouriers []float64
	// PartCells is the diameter of the irregular part (a ball with a
	// through bore) in cells: 100 by default; negative leaves it out.
	PartCells int
	// TriadElements is the length of each triad array: 2²⁴ by default
	// (three arrays of 128 MiB, far beyond any cache).
	TriadElements int
	// Repeat is how many times each solver takes each block step and the
	// part's whole run, the fastest counting: 2 by default.
	Repeat int
}

// Result is one case, with the same work done by the reference solver.
type Result struct {
	Case                    string  `json:"case"`
	N                       int     `json:"n"` // cells along the block's edge or the part's diameter
	CellFourier             float64 `json:"cell_fourier"`
	Cells                   int     `json:"cells"` // part cells
	Steps                   int     `json:"steps"`
	Iterations              float64 `json:"iterations"` // per step
	SecondsPerStep          float64 `json:"seconds_per_step"`
	CellIterationsPerSecond float64 `json:"cell_iterations_per_second"`
	BandwidthGBs            float64 `json:"bandwidth_gbs"` // linear solver's modelled traffic / time
	// CycleGBs is the multigrid V-cycles' traffic counted as STREAM counts
	// a kernel's, each pass of the cycle (smoothing step, residual,
	// transfer) reading and writing its own operands, over the cycles'
	// wall time (set-up and the CG passes left out). SweepGBs counts the
	// traffic as the solver's fused sweeps make it instead, each array
	// once per sweep of a level, however many passes the sweep runs.
	CycleGBs float64 `json:"cycle_gbs"`
	SweepGBs float64 `json:"sweep_gbs"`
	// PassCycleGBs is the traffic over the wall time of the same V-cycles
	// run pass by pass, each pass then really moving its operands to and
	// from memory (the in-run reference of the fused sweeps, block steps
	// only), and FusedSpeedup its cycle time over the fused cycles'.
	PassCycleGBs            float64 `json:"pass_cycle_gbs"`
	FusedSpeedup            float64 `json:"fused_speedup"`
	TriadGBs                float64 `json:"triad_gbs"`
	BytesPerCell            float64 `json:"bytes_per_cell"` // solver memory per part cell
	ReferenceIterations     float64 `json:"reference_iterations"`
	ReferenceSecondsPerStep float64 `json:"reference_seconds_per_step"`
	Speedup                 float64 `json:"speedup"` // reference time / time
	Threads                 int     `json:"threads"`
}

// Run measures the triad, then every case, calling each (when not nil)
// with every result as soon as it is known. The triad is measured again
// after every case, and each case is read against the higher of the two
// triads either side of it: on a shared machine the memory a case gets
// changes from minute to minute, and a triad taken at one moment for all
// cases would flatter some and wrong others.
func Run(ctx context.Context, opt Options, each func(Result) error) ([]Result, error) {
	if opt.Sizes == nil {
		opt.Sizes = []int{64, 128, 160}
	}
	if opt.CellFouriers == nil {
		opt.CellFouriers = []float64{20, 2000}
	}
	if opt.PartCells == 0 {
		opt.PartCells = 100
	}
	if opt.Repeat == 0 {
		opt.Repeat = 2
	}
	if opt.TriadElements == 0 {
		opt.TriadElements = 1 << 24
	}
	for i, n := range opt.Sizes {
		if n < mesh.MinCellsAcross {
			return nil, fmt.Errorf("sizes[%d]: a block needs at least %d cells along its edge, got %d", i, mesh.MinCellsAcross, n)
		}
	}
	threads := runtime.GOMAXPROCS(0)
	triad, err := Triad(ctx, threads, opt.TriadElements)
	if err != nil {
		return nil, err
	}
	var results []Result
	emit := func(r Result) error {
		after, err := Triad(ctx, threads, opt.TriadElements)
		if err != nil {
			return err
		}
		r.TriadGBs, r.Threads = max(triad, after), threads
		triad = after
		results = append(results, r)
		if each != nil {
			return each(r)
		}
		return nil
	}
	for _, n := range opt.Sizes {
		g, err := mesh.Voxelise(ctx, mesh.Box{Size: [3]float64{float64(n) * cellSize, float64(n) * cellSize, float64(n) * cellSize}},
			cellSize, []mesh.Selector{{All: true}})
		if err != nil {
			return results, fmt.Errorf("block %d³: %w", n, err)
		}
		for _, fo := range opt.CellFouriers {
			dt := fo * cellSize * cellSize * density * specificHeat / conductivity
			r, err := stepCase(ctx, g, dt, opt.Repeat)
			if err != nil {
				return results, fmt.Errorf("block %d³ at cell Fourier number %g: %w", n, fo, err)
			}
			r.Case, r.N, r.CellFourier = fmt.Sprintf("block %d³", n), n, fo
			if err := emit(r); err != nil {
				return results, err
			}
		}
	}
	if opt.PartCells > 0 {
		r, err := partCase(ctx, opt.PartCells, opt.Repeat)
		if err != nil {
			return results, fmt.Errorf("part: %w", err)
		}
		if err := emit(r); err != nil {
			return results, err
		}
	}
	return results, nil
}

// problem is the reference problem on g: every face of group 0 exposed by
// the given phase, the other groups insulated.
func problem(g *mesh.Grid, exposure solver.ExposurePhase, end float64, preconditioner string) *solver.Problem {
	exposures := make([]solver.Exposure, len(g.Groups))
	for i := range exposures {
		exposures[i] = solver.Exposure{Phases: []solver.ExposurePhase{{}}}
	}
	exposures[0] = solver.Exposure{Phases: []solver.ExposurePhase{exposure}}
	return &solver.Problem{
		Grid: g,
		Materials: []solver.Material{{Density: density,
			Conductivity: solver.Constant(conductivity), SpecificHeat: solver.Constant(specificHeat)}},
		Exposures: exposures,
		Initial:   initialTemp, End: end,
		Stepping: solver.Stepping{Tolerance: tolerance, Preconditioner: preconditioner},
	}
}

// measured runs the same measurement with both preconditioners and fills
// a Result from them.
func measured(measure func(preconditioner string) (solver.Measurement, error)) (Result, error) {
	mg, err := measure(solver.Multigrid)
	if err != nil {
		return Result{}, fmt.Errorf("multigrid: %w", err)
	}
	ref, err := measure(solver.Jacobi)
	if err != nil {
		return Result{}, fmt.Errorf("jacobi reference: %w", err)
	}
	cycles, passes := mg.Cycles, mg.PassByPass
	if mg.Steps == 0 || ref.Steps == 0 || !(mg.Seconds > 0) || !(cycles.Seconds > 0) {
		return Result{}, errors.New("no step was timed")
	}
	steps := float64(mg.Steps)
	var passGBs, fused float64
	if passes.Seconds > 0 {
		passGBs, fused = passes.Bytes/passes.Seconds/1e9, passes.Seconds/cycles.Seconds
	}
	return Result{
		PassCycleGBs: passGBs, FusedSpeedup: fused,
		Cells: mg.Cells, Steps: mg.Steps,
		Iterations:              float64(mg.Iterations) / steps,
		SecondsPerStep:          mg.Seconds / steps,
		CellIterationsPerSecond: float64(mg.Cells) * float64(mg.Iterations) / mg.Seconds,
		BandwidthGBs:            mg.BytesMoved / mg.Seconds / 1e9,
		CycleGBs:                cycles.PassBytes / cycles.Seconds / 1e9,
		SweepGBs:                cycles.Bytes / cycles.Seconds / 1e9,
		BytesPerCell:            float64(mg.MemoryBytes) / float64(mg.Cells),
		ReferenceIterations:     float64(ref.Iterations) / float64(ref.Steps),
		ReferenceSecondsPerStep: ref.Seconds / float64(ref.Steps),
		Speedup:                 (ref.Seconds / float64(ref.Steps)) / (mg.Seconds / steps),
	}, nil
}

// stepCase times one step of length dt from the initial state on g, the
// fastest of `repeat`.
func stepCase(ctx context.Context, g *mesh.Grid, dt float64, repeat int) (Result, error) {
	return measured(func(pre string) (solver.Measurement, error) {
		return solver.MeasureStep(ctx, problem(g, solver.ExposurePhase{H: filmCoeff, Fluid: fluidTemp}, 1e3*dt, pre), dt, repeat)
	})
}

// partCase times a whole run of a ball of `across` cells in diameter with
// a through bore of 30 % of it, cooling in air by convection and
// radiation, the fastest of `repeat` runs with each solver.
func partCase(ctx context.Context, across, repeat int) (Result, error) {
	d := float64(across) * cellSize
	part := &mesh.Assembly{Bodies: []mesh.Body{
		{Name: "ball", Solid: mesh.Sphere{Diameter: d}, Region: 1},
		{Name: "bore", Solid: mesh.Cylinder{Diameter: 0.3 * d, Length: 1.2 * d, Axis: 2}, Subtract: true},
	}}
	g, err := mesh.Voxelise(ctx, part, cellSize, []mesh.Selector{{All: true}})
	if err != nil {
		return Result{}, err
	}
	air := solver.ExposurePhase{H: filmCoeff, Fluid: fluidTemp, Emissivity: partEmissiv, Surroundings: fluidTemp}
	r, err := measured(func(pre string) (solver.Measurement, error) {
		p := problem(g, air, partEnd, pre)
		p.Stepping.Scheme, p.Stepping.MaxChange, p.Stepping.MaxStep = solver.BDF2, partMaxChange, partEnd/partSteps
		var fastest solver.Measurement
		for i := range max(1, repeat) {
			m, err := solver.MeasureRun(ctx, p)
			if err != nil {
				return m, err
			}
			if i == 0 || m.Seconds < fastest.Seconds {
				fastest = m
			}
		}
		return fastest, nil
	})
	if err != nil {
		return Result{}, err
	}
	r.Case, r.N = "ball with bore, whole run", across
	// The mean step's cell Fourier number.
	r.CellFourier = conductivity / (density * specificHeat) * (partEnd / float64(r.Steps)) / (cellSize * cellSize)
	return r, nil
}

// Triad measures the memory bandwidth of a[i] = b[i] + s·c[i] over arrays
// of n float64 on `threads` goroutines, counting 24 bytes per element as
// the STREAM benchmark does, best of several repetitions, in GB/s.
func Triad(ctx context.Context, threads, n int) (float64, error) {
	if threads < 1 || n < threads {
		return 0, fmt.Errorf("triad: need at least one thread and an element per thread, got %d threads for %d elements", threads, n)
	}
	a, b, c := make([]float64, n), make([]float64, n), make([]float64, n)
	chunk := (n + threads - 1) / threads
	parallel := func(fn func(lo, hi int)) {
		done := make(chan struct{}, threads)
		for w := range threads {
			go func() {
				fn(w*chunk, min(n, (w+1)*chunk))
				done <- struct{}{}
			}()
		}
		for range threads {
			<-done
		}
	}
	// Each goroutine first touches its own share, as it will use it.
	parallel(func(lo, hi int) {
		for i := lo; i < hi; i++ {
			a[i], b[i], c[i] = 0, 1, 2
		}
	})
	const repetitions = 6
	const s = 3.0
	times := make([]float64, 0, repetitions)
	for range repetitions {
		if err := ctx.Err(); err != nil {
			return 0, fmt.Errorf("triad: %w", err)
		}
		start := time.Now()
		parallel(func(lo, hi int) {
			a, b, c := a[lo:hi], b[lo:hi], c[lo:hi:hi]
			for i := range a {
				a[i] = b[i] + s*c[i]
			}
		})
		times = append(times, time.Since(start).Seconds())
	}
	// The first repetition warms up; the best of the rest is the figure.
	best := slices.Min(times[1:])
	if a[n-1] != 7 || !(best > 0) {
		return 0, fmt.Errorf("triad: wrong result %g or no time measured", a[n-1])
	}
	return 24 * float64(n) / best / 1e9, nil
}

// WriteText prints results as a table.
func WriteText(w io.Writer, results []Result) error {
	if len(results) == 0 {
		return nil
	}
	r0 := results[0]
	lo, hi := r0.TriadGBs, r0.TriadGBs
	for _, r := range results {
		lo, hi = min(lo, r.TriadGBs), max(hi, r.TriadGBs)
	}
	if _, err := fmt.Fprintf(w, "threads %d, triad bandwidth %.1f–%.1f GB/s (each case against the higher triad either side of it)\n",
		r0.Threads, lo, hi); err != nil {
		return err
	}
	if _, err := fmt.Fprintf(w, "%-28s %6s %9s %6s %9s %12s %7s %7s %7s %7s %7s %6s %6s  %6s %9s %7s\n",
		"case", "Fo", "cells", "iter", "s/step", "cell·it/s", "GB/s", "triad%", "cycle%", "sweep%", "pass%", "fused",
		"B/cell", "ref it", "ref s", "speedup"); err != nil {
		return err
	}
	for _, r := range results {
		pass, fused := "—", "—" // no pass-by-pass reference for a whole run
		if r.PassCycleGBs > 0 {
			pass, fused = fmt.Sprintf("%.0f%%", 100*r.PassCycleGBs/r.TriadGBs), fmt.Sprintf("%.2f×", r.FusedSpeedup)
		}
		if _, err := fmt.Fprintf(w, "%-28s %6.4g %9d %6.1f %9.3f %12.3g %7.1f %6.0f%% %6.0f%% %6.0f%% %7s %6s %6.0f  %6.1f %9.3f %6.1f×\n",
			r.Case, r.CellFourier, r.Cells, r.Iterations, r.SecondsPerStep, r.CellIterationsPerSecond,
			r.BandwidthGBs, 100*r.BandwidthGBs/r.TriadGBs, 100*r.CycleGBs/r.TriadGBs, 100*r.SweepGBs/r.TriadGBs, pass, fused,
			r.BytesPerCell, r.ReferenceIterations, r.ReferenceSecondsPerStep, r.Speedup); err != nil {
			return err
		}
	}
	return nil
}
