package stl

import (
	"os"
	"math"
	"testing"
)

func TestDbg(t *testing.T) {
	r, _ := os.Open("../../testdata/parts/sphere.stl")
	m, _ := Read(r, Options{Units: "mm"})
	b, _ := NewBody(m)
	for _, ni := range []int{5, 20, 100} {
		nd := &b.nodes[ni]
		lo, hi := b.leafRange(int32(ni))
		for _, f := range []float64{2, 4, 8} {
			p := add(nd.centre, vec{f * nd.radius, 0.3 * nd.radius, 0})
			exact := 0.0
			for _, tr := range b.tris[lo:hi] {
				exact += solidAngle(tr.v, p)
			}
			d := sub(nd.centre, p)
			d2 := dot(d, d)
			dip := dot(nd.areaNormal, d) / (d2 * math.Sqrt(d2))
			ps := 0.0
			for _, tr := range b.tris[lo:hi] {
				x := sub(centroid(tr.v), p)
				x2 := dot(x, x)
				ps += dot(areaVector(tr.v), x) / (x2 * math.Sqrt(x2))
			}
			t.Logf("pointsum %.6g", ps)
			t.Logf("node %d n=%d f=%g exact %.6g dipole %.6g first %.6g", ni, hi-lo, f, exact, dip, farField(nd, d, d2))
		}
	}
}
