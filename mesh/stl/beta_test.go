package stl

import (
	"os"
	"testing"
	"math"
)

func TestBeta(t *testing.T) {
	r, _ := os.Open("../../testdata/parts/sphere.stl")
	m, _ := Read(r, Options{Units: "mm"})
	b, _ := NewBody(m)
	pts := []vec{{0, 0, 0}, {0.02, 0.01, 0}, {0.045, 0, 0}, {0.06, 0.01, 0}, {0.03, 0.03, 0.02}}
	for _, p := range pts {
		exact := 0.0
		for _, tr := range b.tris {
			exact += solidAngle(tr.v, p)
		}
		t.Logf("p %v exact %.6f approx %.6f", p, exact/(4*math.Pi), b.WindingNumber(p))
	}
}
