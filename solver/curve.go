package solver

// At returns the curve's value at temperature t: linear between points,
// constant beyond the ends.
func (c Curve) At(t float64) float64 {
	n := len(c.T)
	if n == 1 || t <= c.T[0] {
		return c.V[0]
	}
	if t >= c.T[n-1] {
		return c.V[n-1]
	}
	return c.inside(c.segment(t), t)
}

// segment returns i with c.T[i-1] < t ≤ c.T[i], for t strictly inside the
// curve's range: a plain binary search, since the assembly calls it for
// every cell of every pass.
func (c Curve) segment(t float64) int {
	lo, hi := 1, len(c.T)-1
	for lo < hi {
		mid := int(uint(lo+hi) >> 1)
		if c.T[mid] < t {
			lo = mid + 1
		} else {
			hi = mid
		}
	}
	return lo
}

// inside interpolates within segment i.
func (c Curve) inside(i int, t float64) float64 {
	w := (t - c.T[i-1]) / (c.T[i] - c.T[i-1])
	return c.V[i-1] + w*(c.V[i]-c.V[i-1])
}

// isConstant reports whether the curve has the same value everywhere.
func (c Curve) isConstant() bool {
	for _, v := range c.V[1:] {
		if v != c.V[0] {
			return false
		}
	}
	return true
}

// enthalpy is ∫cp dT of one material measured from a reference temperature,
// J/kg. Storing energy as enthalpy instead of cp·ΔT keeps the balance exact
// when cp varies with temperature.
type enthalpy struct {
	cp  Curve
	cum []float64 // ∫cp dT from cp.T[0] to cp.T[i]
	ref float64   // integral from cp.T[0] to the reference temperature
	// constant is cp when it is the same at every temperature (0 when
	// not): the enthalpy is then constant·(t − reference), no search.
	constant, reference float64
}

func newEnthalpy(cp Curve, reference float64) enthalpy {
	e := enthalpy{cp: cp, cum: make([]float64, len(cp.T))}
	for i := 1; i < len(cp.T); i++ {
		e.cum[i] = e.cum[i-1] + 0.5*(cp.V[i]+cp.V[i-1])*(cp.T[i]-cp.T[i-1])
	}
	e.ref = e.fromStart(reference)
	if cp.isConstant() {
		e.constant, e.reference = cp.V[0], reference
	}
	return e
}

// fromStart integrates cp from the curve's first point to t (negative below it).
func (e *enthalpy) fromStart(t float64) float64 {
	h, _ := e.fromStartWithCp(t)
	return h
}

// fromStartWithCp is fromStart with cp at t, from one search.
func (e *enthalpy) fromStartWithCp(t float64) (h, cp float64) {
	c := e.cp
	n := len(c.T)
	if n == 1 || t <= c.T[0] {
		return c.V[0] * (t - c.T[0]), c.V[0]
	}
	if t >= c.T[n-1] {
		return e.cum[n-1] + c.V[n-1]*(t-c.T[n-1]), c.V[n-1]
	}
	i := c.segment(t)
	cp = c.inside(i, t)
	return e.cum[i-1] + 0.5*(c.V[i-1]+cp)*(t-c.T[i-1]), cp
}

// At returns the enthalpy at t relative to the reference temperature, J/kg.
func (e *enthalpy) At(t float64) float64 {
	h, _ := e.AtWithCp(t)
	return h
}

// AtWithCp returns At(t) and cp at t, from one search.
func (e *enthalpy) AtWithCp(t float64) (h, cp float64) {
	if e.constant != 0 {
		return e.constant * (t - e.reference), e.constant
	}
	h, cp = e.fromStartWithCp(t)
	return h - e.ref, cp
}

// Integral returns ∫ c dT from a to b (K), exact for the piecewise-linear
// curve: for a specific heat, the enthalpy change per kilogram.
func (c Curve) Integral(a, b float64) float64 {
	e := newEnthalpy(c, a)
	return e.fromStart(b) - e.ref
}
