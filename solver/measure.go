package solver

import (
	"context"
	"fmt"
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
	// Cycles is the part of Seconds spent in multigrid V-cycles and their
	// traffic by the same model (zero for the Jacobi reference).
	Cycles CycleCost
	// PassByPass is the same for the same step solved again with every
	// pass of the V-cycles run on its own, each then really moving its
	// operands to and from memory (MeasureStep only; zero elsewhere).
	PassByPass CycleCost
}

// MeasureStep times one backward-Euler step of length dt from p's initial
// state, `repeat` times over, and reports the fastest: on a machine that
// others share, the fastest run is the one least disturbed. With the
// multigrid preconditioner it then solves the same step `repeat` times
// with the V-cycles run pass by pass, the in-run reference of the fused
// sweeps, which must take the same iterations. An untimed step
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
	iterations := -1
	for _, passByPass := range []bool{false, true} {
		mg, ok := r.lin.(*multigridCG)
		if passByPass && !ok {
			break
		}
		if ok {
			mg.mg.passByPass = passByPass
		}
		fastest := math.Inf(1)
		for range max(1, repeat) {
			r.initialState()
			moved, cycles := r.lin.moved(), r.lin.cycles()
			start := time.Now()
			it, err := r.step(ctx, 0, dt, 0, backwardEulerCoefficients)
			seconds := time.Since(start).Seconds()
			if err != nil {
				return Measurement{}, err
			}
			if passByPass && it != iterations {
				return Measurement{}, fmt.Errorf("the V-cycles run pass by pass took %d iterations and the fused ones %d: they must give the same cycle", it, iterations)
			}
			iterations = it
			if seconds >= fastest {
				continue
			}
			fastest = seconds
			cost := r.lin.cycles().since(cycles)
			if passByPass {
				m.PassByPass = cost
				continue
			}
			m.Seconds, m.Iterations, m.BytesMoved, m.Cycles = seconds, int64(it), r.lin.moved()-moved, cost
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
	return Measurement{
		Cells: r.g.PartCells(), Steps: out.Steps, Iterations: out.TotalIterations, Seconds: seconds,
		BytesMoved: r.lin.moved(), MemoryBytes: r.memory(),
		Cycles: r.lin.cycles(),
	}, nil
}
