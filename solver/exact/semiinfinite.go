package exact

import "math"

// SemiInfiniteTheta returns (T − Ti)/(T∞ − Ti) at depth x and time t in a
// semi-infinite solid, initially at Ti, whose surface meets a fluid at T∞
// with heat transfer coefficient h (+Inf for a surface held at T∞):
//
//	erfc(η) − exp(hx/k + h²αt/k²)·erfc(η + h√(αt)/k),  η = x/(2√(αt)).
//
// The exponential overflows long before the product does, so the second
// term is evaluated as exp(−η²)·erfcx(η + h√(αt)/k) with erfcx(z) =
// exp(z²)·erfc(z), which is the same number. It returns NaN for h < 0,
// k ≤ 0, α ≤ 0, t < 0 or x < 0, and 0 at t = 0.
func SemiInfiniteTheta(h, k, alpha, t, x float64) float64 {
	if !(h >= 0 && k > 0 && alpha > 0 && t >= 0 && x >= 0) || math.IsInf(k, 1) || math.IsInf(alpha, 1) || math.IsInf(t, 1) {
		return math.NaN()
	}
	if t == 0 || h == 0 {
		return 0
	}
	spread := math.Sqrt(alpha * t)
	return semiInfiniteResponse(x/(2*spread), h*spread/k)
}

// semiInfiniteResponse is the semi-infinite solution in terms of
// η = x/(2√(αt)) and β = h√(αt)/k.
func semiInfiniteResponse(eta, beta float64) float64 {
	if math.IsInf(beta, 1) {
		return math.Erfc(eta)
	}
	return math.Erfc(eta) - math.Exp(-eta*eta)*erfcx(eta+beta)
}

// erfcxAsymptotic is where erfcx switches to its asymptotic series: at
// x ≥ 10 twenty terms of it are exact to double precision, and below it
// exp(x²) ≤ e¹⁰⁰ cannot overflow.
const erfcxAsymptotic = 10

// erfcx returns exp(x²)·erfc(x) for x ≥ 0 without overflow; above
// erfcxAsymptotic from the asymptotic series
// 1/(x√π)·Σ (−1)^m (2m−1)!!/(2x²)^m.
func erfcx(x float64) float64 {
	if x < erfcxAsymptotic {
		return math.Exp(x*x) * math.Erfc(x)
	}
	inverse := 1 / (2 * x * x)
	sum, term := 1.0, 1.0
	for m := 1; m < 30 && math.Abs(term) > 0.25*epsilon; m++ {
		term *= -float64(2*m-1) * inverse
		sum += term
	}
	return sum / (x * math.Sqrt(math.Pi))
}

// convectiveRamp returns erfcx(β) − 1 + 2β/√π, the heat a semi-infinite
// solid has taken in through surface convection, ∫₀^∞ θ dx, in units of
// k/h. Below β = 0.5 it comes from the power series
// erfcx(β) = Σ (−β)^n/Γ(n/2 + 1), whose first two terms cancel exactly.
func convectiveRamp(beta float64) float64 {
	if beta >= 0.5 {
		return erfcx(beta) - 1 + 2*beta/math.Sqrt(math.Pi)
	}
	sum := 0.0
	for n := 2; n < 60; n++ {
		term := math.Pow(-beta, float64(n)) / math.Gamma(float64(n)/2+1)
		sum += term
		if math.Abs(term) <= 0.25*epsilon*math.Abs(sum) {
			break
		}
	}
	return sum
}

// wallShortTimeTheta is θ of a plane wall at small Fo: the fluid has
// reached each face's semi-infinite solid, but the two have not yet felt
// each other.
func wallShortTimeTheta(bi, fo, xi float64) float64 {
	spread := 2 * math.Sqrt(fo)
	beta := bi * math.Sqrt(fo)
	return 1 - semiInfiniteResponse((1-xi)/spread, beta) - semiInfiniteResponse((1+xi)/spread, beta)
}

// wallShortTimeEnergy is Q/Qmax of a plane wall at small Fo, the heat
// taken in by the two faces' semi-infinite solids.
func wallShortTimeEnergy(bi, fo float64) float64 {
	if math.IsInf(bi, 1) {
		return 2 * math.Sqrt(fo/math.Pi)
	}
	return convectiveRamp(bi*math.Sqrt(fo)) / bi
}
