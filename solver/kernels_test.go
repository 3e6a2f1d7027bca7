package solver

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"
	"unsafe"
)

// TestSpanOffsets holds the offsets of the span fields that the span-list
// kernels read (SPAN_LO … SPAN_SIZE in kernels_amd64.s) to the struct.
func TestSpanOffsets(t *testing.T) {
	t.Parallel()
	var sp span
	got := [...]uintptr{unsafe.Offsetof(sp.lo), unsafe.Offsetof(sp.hi), unsafe.Offsetof(sp.cp), unsafe.Offsetof(sp.dn),
		unsafe.Offsetof(sp.ds), unsafe.Offsetof(sp.du), unsafe.Offsetof(sp.dd), unsafe.Offsetof(sp.at), unsafe.Sizeof(sp)}
	if want := [...]uintptr{0, 8, 16, 24, 32, 40, 48, 56, 88}; got != want {
		t.Errorf("span offsets lo, hi, cp, dn, ds, du, dd, at and size %v; the kernels read %v", got, want)
	}
}

// TestVectorKernelsMatchLoops runs each pass that has an AVX2 kernel both
// ways on the bracket's finest level, filled with random values, and
// compares cell by cell with the portable loop. Spans of every length
// occur (bore, slot, thin walls), so the kernels' remainders are covered.
func TestVectorKernelsMatchLoops(t *testing.T) {
	t.Parallel()
	if !haveVector() {
		t.Skip("this CPU has no AVX2 with FMA")
	}
	r := newRunOn(bracketProblem(21), true)
	defer r.ws.stop()
	mg := r.lin.(*multigridCG).mg
	l := mg.levels[0]
	rng := rand.New(rand.NewPCG(1, 2))
	fill := func(v []float32) {
		for i := range v {
			v[i] = float32(rng.Float64() + 0.5)
		}
	}
	// Random values everywhere, also outside the part: the conductances
	// there are read, never used, by either path, and stay as they are.
	for _, v := range [][]float32{l.x, l.xNext, l.d, l.b, l.inv, l.gx, l.gy, l.gz, l.scale} {
		fill(v)
	}
	l.cd[1], l.cr[1] = 0.3, 0.7
	spans := concatSlabs(l.slabs)

	// Every position is compared, the part's and the others: a kernel
	// must leave what lies beyond its spans as it was.
	compare := func(name string, got, want []float32) {
		t.Helper()
		for c := range want {
			if math.Abs(float64(got[c]-want[c])) > 1e-5*math.Abs(float64(want[c]))+1e-6 {
				t.Fatalf("%s at position %d: vector %g, loop %g", name, c, got[c], want[c])
			}
		}
	}
	run := func(vector bool, pass func()) (d, dst []float32) {
		savedD, savedNext := append([]float32(nil), l.d...), append([]float32(nil), l.xNext...)
		l.vector = vector
		pass()
		d, dst = append([]float32(nil), l.d...), append([]float32(nil), l.xNext...)
		copy(l.d, savedD)
		copy(l.xNext, savedNext)
		return d, dst
	}
	smooth := func() { l.smooth(spans, 1, l.x, l.xNext) }
	dv, xv := run(true, smooth)
	dl, xl := run(false, smooth)
	compare("Chebyshev direction", dv, dl)
	compare("Chebyshev step", xv, xl)
	residual := func() { l.residual(spans, l.x) }
	dv, _ = run(true, residual)
	dl, _ = run(false, residual)
	compare("residual", dv, dl)
	fromZero := func() { l.smoothFromZero(spans, l.xNext) }
	dv, xv = run(true, fromZero)
	dl, xl = run(false, fromZero)
	compare("first step's direction", dv, dl)
	compare("first step", xv, xl)

	// Prolongation adds the interpolated coarse values to x, per slab;
	// the trilinear transfers have kernels (the weighted ones, which a
	// bracket of two materials takes, do not).
	weighted := l.weighted
	l.weighted = false
	defer func() { l.weighted = weighted }()
	fill(l.next.x)
	prolong := func(vector bool) []float32 {
		saved := append([]float32(nil), l.x...)
		defer copy(l.x, saved)
		l.vector = vector
		for w := range l.slabs {
			l.prolong(w, l.slabs[w])
		}
		return append([]float32(nil), l.x...)
	}
	compare("prolongation", prolong(true), prolong(false))

	// Restriction blends rows of the fine residual into the coarse
	// right-hand side, per coarse slab.
	fill(l.d)
	restrict := func(vector bool) []float32 {
		l.vector = vector
		for w := range l.next.slabs {
			l.restrict(w)
		}
		return append([]float32(nil), l.next.b...)
	}
	bv, bl := restrict(true), restrict(false)
	for i := range bl {
		if math.Abs(float64(bv[i]-bl[i])) > 1e-5*math.Abs(float64(bl[i])) {
			t.Fatalf("restriction at coarse part cell %d: vector %g, loop %g", i, bv[i], bl[i])
		}
	}

	// The CG product, in float64 with float32 conductances.
	a := &r.st
	pv := make([]float64, len(a.gx)) // in the layout
	for i := range pv {
		pv[i] = rng.Float64() - 0.5
	}
	for i := range a.diag {
		a.diag[i] = 10 + rng.Float64()
	}
	qv, ql := make([]float64, len(a.diag)), make([]float64, len(a.diag))
	a.vector = true
	sv := a.product(spans, pv, qv)
	a.vector = false
	sl := a.product(spans, pv, ql)
	for i := range qv {
		if math.Abs(qv[i]-ql[i]) > 1e-12*math.Abs(ql[i])+1e-12 {
			t.Fatalf("product at part cell %d: vector %g, loop %g", i, qv[i], ql[i])
		}
	}
	if math.Abs(sv-sl) > 1e-12*math.Abs(sl) {
		t.Fatalf("p·Ap: vector %g, loop %g", sv, sl)
	}

	// The CG vector updates, each pass run both ways from the same state.
	cg := r.lin.(*multigridCG)
	cg.a, cg.x = a, make([]float64, len(r.t))
	defer func() { cg.a, cg.x = nil, nil }()
	random := func(v []float64) {
		for i := range v {
			v[i] = rng.Float64() - 0.5
		}
	}
	random(cg.x)
	random(cg.p)
	random(cg.r)
	random(cg.q)
	cg.alpha, cg.beta = 0.7, 0.4
	state := func() [][]float64 {
		return [][]float64{append([]float64(nil), cg.x...), append([]float64(nil), cg.p...), append([]float64(nil), cg.r...)}
	}
	restore := func(s [][]float64) { copy(cg.x, s[0]); copy(cg.p, s[1]); copy(cg.r, s[2]) }
	before := state()
	for _, pass := range []struct {
		name string
		task func(int)
	}{{"update", cg.update}, {"dot", cg.dot}, {"direction", cg.direction}} {
		var sums [2]partial
		var after [2][][]float64
		for k, vector := range []bool{true, false} {
			restore(before)
			a.vector = vector
			for w := range cg.slabs {
				pass.task(w)
				sums[k].a += cg.sums[w].a
				sums[k].b += cg.sums[w].b
			}
			after[k] = state()
		}
		for v := range after[0] {
			for i := range after[0][v] {
				if got, want := after[0][v][i], after[1][v][i]; math.Abs(got-want) > 1e-12*math.Abs(want)+1e-15 {
					t.Fatalf("%s, array %d, index %d: vector %g, loop %g", pass.name, v, i, got, want)
				}
			}
		}
		if math.Abs(sums[0].a-sums[1].a) > 1e-12*math.Abs(sums[1].a) || math.Abs(sums[0].b-sums[1].b) > 1e-12*math.Abs(sums[1].b) {
			t.Fatalf("%s sums: vector %v, loop %v", pass.name, sums[0], sums[1])
		}
	}
}

// TestVectorAndLoopStepsAgree takes one step of the bracket with the
// vector kernels and with the portable loops: both must meet the
// tolerance, and their solutions differ by no more than the tolerance
// allows.
func TestVectorAndLoopStepsAgree(t *testing.T) {
	t.Parallel()
	if !haveVector() {
		t.Skip("this CPU has no AVX2 with FMA")
	}
	const tol = 1e-8
	step := func(vector bool) ([]float64, int) {
		p := bracketProblem(24)
		p.Stepping.Tolerance = tol
		r := newRunOn(p, vector)
		defer r.ws.stop()
		r.initialState()
		n, err := r.step(context.Background(), 0, 200*1e-6*3.6e6/40, 0, backwardEulerCoefficients)
		if err != nil {
			t.Fatal(err)
		}
		return r.t, n
	}
	xv, nv := step(true)
	xl, nl := step(false)
	if d := nv - nl; d < -1 || d > 1 {
		t.Errorf("iterations: vector %d, loop %d", nv, nl)
	}
	var worst float64
	for i := range xv {
		worst = max(worst, math.Abs(xv[i]-xl[i]))
	}
	// 1100 K initial: a relative residual of 1e-8 leaves errors of a few µK.
	if worst > 1e-3 {
		t.Errorf("largest difference %g K", worst)
	}
}

// bracketProblem is the bracket of n³ cells, its upper half 1000 times as
// conductive, cooling by convection from 1100 K.
func bracketProblem(n int) *Problem {
	p := problemFor(bracketGrid(n), constantMaterial(40, 1, 3.6e6), convection(100, 300), 1100, 3600)
	p.Materials = append(p.Materials, constantMaterial(40e3, 1, 3.6e6))
	p.Exposures = []Exposure{convection(100, 300), convection(100, 300)}
	return p
}

// concatSlabs lists the spans of all slabs.
func concatSlabs(slabs [][]span) []span {
	var out []span
	for _, s := range slabs {
		out = append(out, s...)
	}
	return out
}
