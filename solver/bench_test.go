package solver

import (
	"context"
	"fmt"
	"testing"
)

// benchmarkStep times one backward-Euler step on an n³ block of 1 mm cells
// (k = 40 W/(m·K), ρcp = 3.6e6 J/(m³·K), h = 100 W/(m²·K)) at cell Fourier
// numbers 20 and 2000 with each preconditioner, and reports part cells per
// second and CG iterations per step. `soak bench` makes the same
// comparison with a bandwidth reference.
func benchmarkStep(b *testing.B, n int) {
	const cell, k, rhoCp = 1e-3, 40.0, 3.6e6
	for _, fourier := range []float64{20, 2000} {
		for _, pre := range []string{Multigrid, Jacobi} {
			b.Run(fmt.Sprintf("Fo=%g/%s", fourier, pre), func(b *testing.B) {
				tp := block3(n)
				tp.cell = cell
				tp.origin = [3]float64{}
				p := problemFor(testGrid(tp), constantMaterial(k, 1, rhoCp), convection(100, 300), 1100, 3600)
				p.Stepping.Preconditioner = pre
				r := newRun(p)
				defer r.ws.stop()
				dt := fourier * cell * cell * rhoCp / k
				iterations := 0
				for b.Loop() {
					r.initialState()
					it, err := r.step(context.Background(), 0, dt, 0, backwardEulerCoefficients)
					if err != nil {
						b.Fatal(err)
					}
					iterations = it
				}
				b.ReportMetric(float64(n*n*n)*float64(b.N)/b.Elapsed().Seconds(), "cells/s")
				b.ReportMetric(float64(iterations), "iterations/step")
			})
		}
	}
}

func BenchmarkStep64(b *testing.B)  { benchmarkStep(b, 64) }
func BenchmarkStep128(b *testing.B) { benchmarkStep(b, 128) }
