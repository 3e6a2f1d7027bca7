package stl

import (
	"bytes"
	"testing"
)

// FuzzRead feeds arbitrary bytes through reading, checking, repair and
// the body's queries: errors are fine, panics are not. Seeds live in
// testdata/fuzz/FuzzRead/.
func FuzzRead(f *testing.F) {
	f.Fuzz(func(t *testing.T, data []byte) {
		m, err := Read(bytes.NewReader(data), Options{Units: "mm", MaxBytes: 1 << 16, MaxTriangles: 2000, RepairHoles: 8})
		if err != nil {
			return
		}
		_ = Check(m).String()
		b, err := NewBody(m)
		if err != nil {
			return
		}
		lo, hi := b.Bounds()
		mid := scale(add(lo, hi), 0.5)
		_ = b.Contains(mid)
		_ = b.SurfaceNormal(mid)
		const n = 4
		cell := max(hi[0]-lo[0], hi[1]-lo[1], hi[2]-lo[2]) / n
		if cell > 0 {
			out := make([]bool, n*n*n)
			b.ContainsGrid(lo, cell, [3]int{n, n, n}, out)
		}
	})
}
