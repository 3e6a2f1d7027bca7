package exact

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
)

// An invented case: a thick refractory lining suddenly exposed to hot gas.
const (
	liningK     = 1.2    // W/(m·K)
	liningAlpha = 6e-7   // m²/s
	liningTime  = 1800.0 // s
)

// With h → ∞ the surface is held at T∞ and θ = erfc(x/(2√(αt)))
// (Incropera 6th ed., section 5.7, case 1, from memory); Go's math.Erfc
// gives the reference.
func TestSemiInfiniteHoldsSurfaceAsHGrows(t *testing.T) {
	t.Parallel()
	for _, x := range []float64{0, 0.005, 0.02, 0.08} {
		want := math.Erfc(x / (2 * math.Sqrt(liningAlpha*liningTime)))
		if got := SemiInfiniteTheta(math.Inf(1), liningK, liningAlpha, liningTime, x); got != want {
			t.Errorf("h = ∞, x = %g: θ = %.16g, want %.16g", x, got, want)
		}
		// A finite h acts like an extra depth k/h ≈ 1.2e-9 m here.
		if got := SemiInfiniteTheta(1e9, liningK, liningAlpha, liningTime, x); math.Abs(got-want) > 1e-7 {
			t.Errorf("h = 1e9, x = %g: θ = %.16g, want %.16g", x, got, want)
		}
	}
}

// Where exp(hx/k + h²αt/k²) does not overflow, the textbook form
// erfc(η) − exp(hx/k + h²αt/k²)·erfc(η + h√(αt)/k) (Incropera 6th ed.,
// eq. 5.60, from memory) evaluated literally with Go's math.Exp and
// math.Erfc gives the reference; where it overflows, θ must stay finite
// and close to the h → ∞ limit.
func TestSemiInfiniteMatchesLiteralFormula(t *testing.T) {
	t.Parallel()
	for _, h := range []float64{1, 10, 100, 1000} {
		for _, x := range []float64{0, 0.001, 0.01, 0.05, 0.2} {
			s := math.Sqrt(liningAlpha * liningTime)
			literal := math.Erfc(x/(2*s)) - math.Exp(h*x/liningK+h*h*liningAlpha*liningTime/(liningK*liningK))*math.Erfc(x/(2*s)+h*s/liningK)
			if got := SemiInfiniteTheta(h, liningK, liningAlpha, liningTime, x); math.Abs(got-literal) > 1e-13 {
				t.Errorf("h = %g, x = %g: θ = %.16g, literal formula %.16g", h, x, got, literal)
			}
		}
	}
	const h, x = 2e5, 0.05 // hx/k ≈ 8300: exp overflows
	s := math.Sqrt(liningAlpha * liningTime)
	if literal := math.Exp(h*x/liningK) * math.Erfc(x/(2*s)+h*s/liningK); !math.IsNaN(literal) && !math.IsInf(literal, 0) {
		t.Fatalf("the case was meant to overflow the literal formula, got %g", literal)
	}
	got := SemiInfiniteTheta(h, liningK, liningAlpha, liningTime, x)
	limit := math.Erfc(x / (2 * s))
	if !(got >= 0 && got <= limit && limit-got < 1e-4) {
		t.Errorf("h = %g, x = %g: θ = %g, want finite, just below %g", h, x, got, limit)
	}
}

// The solution must obey the heat equation ∂θ/∂t = α ∂²θ/∂x² inside and
// the surface balance −k ∂θ/∂x = h(1 − θ) at x = 0, checked with finite
// differences of the function itself.
func TestSemiInfiniteObeysHeatEquationAndSurfaceBalance(t *testing.T) {
	t.Parallel()
	theta := func(h, time, x float64) float64 { return SemiInfiniteTheta(h, liningK, liningAlpha, time, x) }
	for _, h := range []float64{5, 50, 500} {
		s := math.Sqrt(liningAlpha * liningTime)
		dx := 1e-3 * s
		f := func(i float64) float64 { return theta(h, liningTime, i*dx) }
		// One-sided fourth-order difference at the surface.
		slope := (-25*f(0) + 48*f(1) - 36*f(2) + 16*f(3) - 3*f(4)) / (12 * dx)
		balance := h * (1 - f(0))
		if math.Abs(-liningK*slope-balance) > 1e-6*balance {
			t.Errorf("h = %g: conduction into the solid %.10g W/m² per K, convection %.10g", h, -liningK*slope, balance)
		}
		for _, x := range []float64{0.3 * s, s, 2 * s} {
			dxi, dt := 2e-3*s, 1e-4*liningTime
			dTheta := (theta(h, liningTime+dt, x) - theta(h, liningTime-dt, x)) / (2 * dt)
			curve := (theta(h, liningTime, x+dxi) - 2*theta(h, liningTime, x) + theta(h, liningTime, x-dxi)) / (dxi * dxi)
			if math.Abs(dTheta-liningAlpha*curve) > 2e-6*math.Abs(dTheta) {
				t.Errorf("h = %g, x = %g: ∂θ/∂t = %.8g, α∂²θ/∂x² = %.8g", h, x, dTheta, liningAlpha*curve)
			}
		}
	}
}

// At the surface θ = 1 − exp(β²)erfc(β), β = h√(αt)/k, whose expansions
// (Abramowitz and Stegun 7.1.8 and 7.1.23, from memory) are
// 2β/√π − β² + 4β³/(3√π) − … for small β and
// 1 − (1 − 1/(2β²) + 3/(4β⁴))/(β√π) for large β.
func TestSemiInfiniteSurfaceExpansions(t *testing.T) {
	t.Parallel()
	surface := func(beta float64) float64 {
		h := beta * liningK / math.Sqrt(liningAlpha*liningTime)
		return SemiInfiniteTheta(h, liningK, liningAlpha, liningTime, 0)
	}
	for _, beta := range []float64{1e-4, 1e-3, 1e-2} {
		want := 2*beta/math.Sqrt(math.Pi) - beta*beta + 4*beta*beta*beta/(3*math.Sqrt(math.Pi))
		if got := surface(beta); math.Abs(got-want) > beta*beta*beta*beta+1e-15 {
			t.Errorf("β = %g: θ(0) = %.16g, small-β series %.16g", beta, got, want)
		}
	}
	for _, beta := range []float64{30, 300, 3e4} {
		want := 1 - (1-1/(2*beta*beta)+3/(4*math.Pow(beta, 4)))/(beta*math.Sqrt(math.Pi))
		if got := surface(beta); math.Abs(got-want) > 15/(8*math.Pow(beta, 7))+1e-15 {
			t.Errorf("β = %g: θ(0) = %.16g, large-β series %.16g", beta, got, want)
		}
	}
}

// The heat taken in per unit area, ∫₀^∞ θ dx in units of k/h, integrated
// numerically with gonum's Gauss–Legendre quadrature against the closed
// form erfcx(β) − 1 + 2β/√π that the plane wall's short-time energy
// fraction uses (Incropera 6th ed., section 5.7, from memory).
func TestConvectiveRampMatchesIntegratedProfile(t *testing.T) {
	t.Parallel()
	s := math.Sqrt(liningAlpha * liningTime)
	for _, beta := range []float64{1e-3, 0.1, 0.49, 0.51, 2, 40} {
		h := beta * liningK / s
		absorbed := quad.Fixed(func(x float64) float64 {
			return SemiInfiniteTheta(h, liningK, liningAlpha, liningTime, x)
		}, 0, 14*s, 200, quad.Legendre{}, 0) // erfc(7) ≈ 4e-23
		if want := convectiveRamp(beta) * liningK / h; math.Abs(absorbed-want) > 1e-10*want {
			t.Errorf("β = %g: ∫θ dx = %.14g m, closed form %.14g m", beta, absorbed, want)
		}
	}
}

func TestSemiInfiniteRejectsBadInput(t *testing.T) {
	t.Parallel()
	for _, args := range [][5]float64{
		{-1, 1, 1e-6, 10, 0},
		{10, 0, 1e-6, 10, 0},
		{10, 1, -1e-6, 10, 0},
		{10, 1, 1e-6, -10, 0},
		{10, 1, 1e-6, 10, -0.1},
		{math.NaN(), 1, 1e-6, 10, 0},
	} {
		if got := SemiInfiniteTheta(args[0], args[1], args[2], args[3], args[4]); !math.IsNaN(got) {
			t.Errorf("SemiInfiniteTheta%v = %g, want NaN", args, got)
		}
	}
}
