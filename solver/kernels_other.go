//go:build !amd64

package solver

// haveVector is false off amd64: the portable loops do all the work and
// the kernels below are never called.
func haveVector() bool { return false }

func chebyshevSpansAVX(spans *span, count int, x, gx, gy, gz, inv, b, d, dst *float32, cr, cd float32) {
	panic("solver: no vector kernels on this architecture")
}

func residualSpansAVX(spans *span, count int, x, gx, gy, gz, inv, b, scale, d *float32) {
	panic("solver: no vector kernels on this architecture")
}

func productAVX(n, dn, ds, du, dd int, p *float64, gx, gy, gz *float32, diag, q *float64) float64 {
	panic("solver: no vector kernels on this architecture")
}

func axpyAVX(n int, w float32, src, dst *float32) {
	panic("solver: no vector kernels on this architecture")
}

func updateAVX(n int, alpha float64, x, p, r, q *float64, rb *float32) float64 {
	panic("solver: no vector kernels on this architecture")
}

func directionAVX(n int, beta float64, z *float32, p *float64) {
	panic("solver: no vector kernels on this architecture")
}

func dotAVX(n int, r *float64, z *float32, q *float64) (rz, zq float64) {
	panic("solver: no vector kernels on this architecture")
}

func fromZeroSpansAVX(spans *span, count int, b, inv, d, dst *float32, cr float32) {
	panic("solver: no vector kernels on this architecture")
}

func prolongAVX(parents int, row, scale, x *float32) {
	panic("solver: no vector kernels on this architecture")
}

func blend4AVX(n int, w *[4]float32, r0, r1, r2, r3, dst *float32) {
	panic("solver: no vector kernels on this architecture")
}

func gatherAddAVX(n int, row *float32, w *[4]float32, d0, d1, d2, d3 *float32) {
	panic("solver: no vector kernels on this architecture")
}
