package stl

import (
	"bytes"
	"testing"

	"soakfarm/internal/partgen"
)

// benchTorus is a 200 000-triangle torus (500 × 200 segments) read back
// from binary STL, as an analyst's large part would arrive.
func benchTorus(b *testing.B) *Body {
	b.Helper()
	var buf bytes.Buffer
	if err := partgen.WriteBinary(&buf, "torus", partgen.Torus(0.08, 0.03, 500, 200)); err != nil {
		b.Fatal(err)
	}
	m, err := Read(&buf, Options{})
	if err != nil {
		b.Fatal(err)
	}
	body, err := NewBody(m)
	if err != nil {
		b.Fatal(err)
	}
	return body
}

// gridOver returns a grid of n³ cells spanning the body's bounding box.
func gridOver(body *Body, n int) (origin [3]float64, cell float64) {
	lo, hi := body.Bounds()
	cell = max(hi[0]-lo[0], hi[1]-lo[1], hi[2]-lo[2]) / float64(n)
	return lo, cell
}

// BenchmarkContainsGrid voxelises the torus at 200³; cells/s is the
// figure of merit. BenchmarkContainsPoints is the reference measured in
// the same run: the same question asked cell by cell with Contains.
func BenchmarkContainsGrid(b *testing.B) {
	body := benchTorus(b)
	const n = 200
	origin, cell := gridOver(body, n)
	out := make([]bool, n*n*n)
	b.ResetTimer()
	for b.Loop() {
		body.ContainsGrid(origin, cell, [3]int{n, n, n}, out)
	}
	b.ReportMetric(float64(n*n*n)*float64(b.N)/b.Elapsed().Seconds(), "cells/s")
}

func BenchmarkContainsPoints(b *testing.B) {
	body := benchTorus(b)
	const n = 40
	origin, cell := gridOver(body, n)
	b.ResetTimer()
	for b.Loop() {
		for k := range n {
			for j := range n {
				for i := range n {
					body.Contains([3]float64{origin[0] + cell*(float64(i)+0.5), origin[1] + cell*(float64(j)+0.5), origin[2] + cell*(float64(k)+0.5)})
				}
			}
		}
	}
	b.ReportMetric(float64(n*n*n)*float64(b.N)/b.Elapsed().Seconds(), "cells/s")
}

func BenchmarkNewBody(b *testing.B) {
	var buf bytes.Buffer
	if err := partgen.WriteBinary(&buf, "torus", partgen.Torus(0.08, 0.03, 500, 200)); err != nil {
		b.Fatal(err)
	}
	m, err := Read(&buf, Options{})
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if _, err := NewBody(m); err != nil {
			b.Fatal(err)
		}
	}
}
