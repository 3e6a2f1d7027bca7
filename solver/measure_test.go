package solver

import (
	"context"
	"testing"
)

// TestMeasureMatchesSolve: the bench's measurements must count the same
// steps and iterations as Solve makes for the same problem.
func TestMeasureMatchesSolve(t *testing.T) {
	t.Parallel()
	const k, rhoCp, cell, fourier = 40.0, 3.6e6, 1e-3, 20.0
	for _, pre := range []string{Multigrid, Jacobi} {
		t.Run(pre, func(t *testing.T) {
			t.Parallel()
			tp := block3(10)
			tp.cell = cell
			dt := fourier * cell * cell * rhoCp / k
			p := problemFor(testGrid(tp), constantMaterial(k, 1, rhoCp), convection(100, 293), 1073, 20*dt)
			p.Stepping = Stepping{FirstStep: dt, MaxChange: 1e6, Preconditioner: pre}
			m, err := MeasureStep(context.Background(), p, dt, 2)
			if err != nil {
				t.Fatal(err)
			}
			first := 0
			out, err := Solve(context.Background(), p, func(s *State) bool {
				if s.Step == 1 {
					first = s.Iterations
				}
				return false
			})
			if err != nil {
				t.Fatal(err)
			}
			if m.Steps != 1 || m.Iterations != int64(first) || m.Cells != 1000 {
				t.Errorf("step measured as %+v; Solve's first step took %d iterations on 1000 cells", m, first)
			}
			// The state alone is six float64 arrays and the operator four.
			if !(m.BytesMoved > 0) || m.MemoryBytes < 10*8*1000 || !(m.Seconds > 0) {
				t.Errorf("measurement %+v lacks traffic, memory or time", m)
			}
			// Pass by pass, the cycles move more bytes by the model: every
			// pass reads its operands, where a fused sweep reads them once.
			// Counted per pass, the fused cycles and the pass-by-pass ones
			// are the same passes, so the same bytes.
			fused, passes := m.Cycles, m.PassByPass
			if withCycles := pre == Multigrid; withCycles != (passes.Seconds > 0) || withCycles != (fused.Seconds > 0) ||
				withCycles != (passes.Bytes > 2*fused.Bytes) || passes.PassBytes != passes.Bytes || fused.PassBytes != passes.PassBytes {
				t.Errorf("%s: cycles fused %+v; pass by pass %+v", pre, fused, passes)
			}
			run, err := MeasureRun(context.Background(), p)
			if err != nil {
				t.Fatal(err)
			}
			if run.Steps != out.Steps || run.Iterations != out.TotalIterations {
				t.Errorf("run measured %d steps, %d iterations; Solve %d, %d", run.Steps, run.Iterations, out.Steps, out.TotalIterations)
			}
		})
	}
}
