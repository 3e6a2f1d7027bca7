package solver

import (
	"context"
	"math"
	"time"
)

// Measurement is what a timed stretch of solving cost, for the bench.
type Measurement struct {
	Cells      int   // part cells
	Steps      int   // accepted steps timed
	Iterations int64 // linear solver iterations over those steps
	// Seconds is the wall time of the steps, assembly and the
	// preconditioner's set-up of every step included.
	Seconds float64
	// BytesMoved is the linear solver's memory traffic (its set-up
	// included) by a model of the bytes each of its passes reads and
	// writes per part cell.
	BytesMoved float64
	// MemoryBytes is what the solver's arrays hold: state, operator,
	// linear solver.
	MemoryBytes int
	// CycleSeconds and CycleBytesMoved are the part of Seconds spent in
	// multigrid V-cycles and the bytes those moved, by the same model (0
	// for the Jacobi reference).
	CycleSeconds, CycleBytesMoved float64
}

// MeasureStep times one backward-Euler step of length dt from p's initial
// state, `repeat` times over, and reports the fastest: on a machine that
// others share, the fastest run is the one least disturbed. An untimed step
// a thousand times shorter goes first: it touches every array, whose fresh
// pages would otherwise be counted against the step.
func MeasureStep(ctx context.Context, p *Problem, dt float64, repeat int) (Measurement, error) {
	if err := p.Validate(); err != nil {
		return Measurement{}, err
	}
	r := newRun(p)
	defer r.ws.stop()
	r.initialState()
	if _, err := r.step(ctx, 0, dt/1000, 0, backwardEulerCoefficients); err != nil {
		return Measurement{}, err
	}
	m := Measurement{Cells: r.g.PartCells(), Steps: 1, MemoryBytes: r.memory(), Seconds: math.Inf(1)}
	for range max(1, repeat) {
		r.initialState()
		moved := r.lin.moved()
		cycleSeconds, cycleBytes := r.lin.cycles()
		start := time.Now()
		iterations, err := r.step(ctx, 0, dt, 0, backwardEulerCoefficients)
		seconds := time.Since(start).Seconds()
		if err != nil {
			return Measurement{}, err
		}
		if seconds < m.Seconds {
			m.Seconds, m.Iterations, m.BytesMoved = seconds, int64(iterations), r.lin.moved()-moved
			s, b := r.lin.cycles()
			m.CycleSeconds, m.CycleBytesMoved = s-cycleSeconds, b-cycleBytes
		}
	}
	return m, nil
}

// MeasureRun times a whole run of p as Solve makes it.
func MeasureRun(ctx context.Context, p *Problem) (Measurement, error) {
	if err := p.Validate(); err != nil {
		return Measurement{}, err
	}
	r := newRun(p)
	defer r.ws.stop()
	start := time.Now()
	out, err := r.integrate(ctx, nil)
	seconds := time.Since(start).Seconds()
	if err != nil {
		return Measurement{}, err
	}
	cycleSeconds, cycleBytes := r.lin.cycles()
	return Measurement{
		Cells: r.g.PartCells(), Steps: out.Steps, Iterations: out.TotalIterations, Seconds: seconds,
		BytesMoved: r.lin.moved(), MemoryBytes: r.memory(),
		CycleSeconds: cycleSeconds, CycleBytesMoved: cycleBytes,
	}, nil
}
