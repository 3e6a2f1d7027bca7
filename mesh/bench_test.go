package mesh

import (
	"bytes"
	"context"
	"testing"

	"soakfarm/internal/partgen"
	"soakfarm/mesh/stl"
)

// benchTorus is a 200 000-triangle torus (500 × 200 segments) read back
// from binary STL, as an analyst's large part would arrive.
func benchTorus(b *testing.B) *stl.Body {
	b.Helper()
	var buf bytes.Buffer
	if err := partgen.WriteBinary(&buf, "torus", partgen.Torus(0.08, 0.03, 500, 200)); err != nil {
		b.Fatal(err)
	}
	m, err := stl.Read(&buf, stl.Options{})
	if err != nil {
		b.Fatal(err)
	}
	body, err := stl.NewBody(m)
	if err != nil {
		b.Fatal(err)
	}
	return body
}

// torusCell gives the torus's 0.22 × 0.22 × 0.06 m box about 8 million cells.
const torusCell = 7.13e-4

// BenchmarkVoxeliseSTL200k voxelises the 200 000-triangle torus into about
// 8 million cells (308 × 308 × 84) with every face grouped and corrected;
// cells/s is the figure of merit. BenchmarkSTLContainsReference is the
// reference measured in the same run: the inside test asked cell by cell.
func BenchmarkVoxeliseSTL200k(b *testing.B) {
	body := benchTorus(b)
	var cells int
	b.ResetTimer()
	for b.Loop() {
		g, err := Voxelise(context.Background(), body, torusCell, []Selector{{All: true}})
		if err != nil {
			b.Fatal(err)
		}
		cells = g.CellCount()
	}
	b.ReportMetric(float64(cells)*float64(b.N)/b.Elapsed().Seconds(), "cells/s")
}

func BenchmarkSTLContainsReference(b *testing.B) {
	body := benchTorus(b)
	lo, _ := body.Bounds()
	const n = 40 // a 40³ corner of the same grid
	b.ResetTimer()
	for b.Loop() {
		for k := range n {
			for j := range n {
				for i := range n {
					body.Contains([3]float64{lo[0] + torusCell*(float64(i)+0.5), lo[1] + torusCell*(float64(j)+0.5) + 0.08, lo[2] + torusCell*(float64(k)+0.5)})
				}
			}
		}
	}
	b.ReportMetric(float64(n*n*n)*float64(b.N)/b.Elapsed().Seconds(), "cells/s")
}
