package solver

import "golang.org/x/sys/cpu"

// haveVector tells whether this CPU runs the AVX2 stencil kernels.
func haveVector() bool { return cpu.X86.HasAVX2 && cpu.X86.HasFMA }

// The kernels of kernels_amd64.s; see there for what they expect.

//go:noescape
func residualSpansAVX(spans *span, count int, x, gx, gy, gz, inv, b, scale, d *float32)

//go:noescape
func productAVX(n, dn, ds, du, dd int, p *float64, gx, gy, gz *float32, diag, q *float64) (pq float64)

//go:noescape
func axpyAVX(n int, w float32, src, dst *float32)

//go:noescape
func updateAVX(n int, alpha float64, x, p, r, q *float64, rb *float32) (rr float64)

//go:noescape
func directionAVX(n int, beta float64, z *float32, p *float64)

//go:noescape
func dotAVX(n int, r *float64, z *float32, q *float64) (rz, zq float64)

//go:noescape
func fromZeroSpansAVX(spans *span, count int, b, inv, d, dst *float32, cr float32)

//go:noescape
func prolongAVX(parents int, row, scale, x *float32)

//go:noescape
func blend4AVX(n int, w *[4]float32, r0, r1, r2, r3, dst *float32)

//go:noescape
func chebyshevSpansAVX(spans *span, count int, x, gx, gy, gz, inv, b, d, dst *float32, cr, cd float32)

//go:noescape
func gatherAddAVX(n int, row *float32, w *[4]float32, d0, d1, d2, d3 *float32)
