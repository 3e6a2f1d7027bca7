package exact

import (
	"errors"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
)

// An invented part: a 30 mm steel-like ball.
const (
	ballRadius = 0.015  // m
	ballRho    = 7850.0 // kg/m³
	ballCp     = 480.0  // J/(kg·K)
)

var (
	ballVolume = 4.0 / 3 * math.Pi * ballRadius * ballRadius * ballRadius
	ballArea   = 4 * math.Pi * ballRadius * ballRadius
)

// τ = ρcV/(hA) (Incropera 6th ed., section 5.2, from memory); for a sphere
// V/A = r/3, and after one time constant θ = 1/e.
func TestTimeConstantOfASphere(t *testing.T) {
	t.Parallel()
	const h = 25.0
	tau := TimeConstant(ballRho, ballCp, ballVolume, h, ballArea)
	if want := ballRho * ballCp * ballRadius / (3 * h); math.Abs(tau-want) > 1e-12*want {
		t.Errorf("τ = %.15g s, want ρcr/(3h) = %.15g s", tau, want)
	}
	if got := LumpedConvection(tau, tau); math.Abs(got-1/math.E) > 1e-15 {
		t.Errorf("θ after one time constant = %.16g, want 1/e", got)
	}
}

// The closed form against gonum's Gauss–Legendre quadrature of
// dt = −ρcV/(εσA)·dT/(T⁴ − Tsur⁴), the energy balance of the body
// integrated directly (Incropera 6th ed., section 5.3, from memory).
func TestLumpedRadiationTimeMatchesQuadrature(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name                  string
		emissivity            float64
		tSur, initial, target float64 // K
	}{
		{"cools in a room", 0.8, 300, 1200, 500},
		{"heats in a furnace", 0.6, 1200, 300, 1000},
		{"heats close to the furnace", 0.6, 1200, 300, 1190},
		{"cools into space", 0.9, 0, 900, 250},
		{"cools into a cold chamber", 0.9, 10, 900, 400},
		{"cools across T = 2·Tsur", 0.8, 300, 900, 500},
		{"barely moves", 0.5, 300, 800, 799.999},
	}
	for _, c := range cases {
		got, err := LumpedRadiationTime(ballRho, ballCp, ballVolume, ballArea, c.emissivity, c.tSur, c.initial, c.target)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		scale := ballRho * ballCp * ballVolume / (c.emissivity * stefanBoltzmann * ballArea)
		rate := func(temp float64) float64 { return 1 / (math.Pow(temp, 4) - math.Pow(c.tSur, 4)) }
		// quad.Fixed wants its lower limit first; cooling and heating both
		// integrate over [min, max] with the sign that makes t positive.
		lo, hi := math.Min(c.initial, c.target), math.Max(c.initial, c.target)
		want := math.Abs(scale * quad.Fixed(rate, lo, hi, 200, quad.Legendre{}, 0))
		if !(got > 0) || math.Abs(got-want) > 1e-9*want {
			t.Errorf("%s: closed form %.12g s, quadrature %.12g s", c.name, got, want)
		}
	}
}

// With Tsur = 0 the balance integrates to t = ρcV/(3εσA)·(1/T³ − 1/Ti³)
// and back to T = (1/Ti³ + 3εσAt/(ρcV))^(−1/3), by direct integration.
func TestLumpedRadiationIntoSpace(t *testing.T) {
	t.Parallel()
	const emissivity, initial = 0.85, 1000.0
	scale := ballRho * ballCp * ballVolume / (emissivity * stefanBoltzmann * ballArea)
	for _, target := range []float64{999, 700, 200, 20} {
		got, err := LumpedRadiationTime(ballRho, ballCp, ballVolume, ballArea, emissivity, 0, initial, target)
		if err != nil {
			t.Fatal(err)
		}
		if want := scale / 3 * (1/math.Pow(target, 3) - 1/math.Pow(initial, 3)); math.Abs(got-want) > 1e-12*want {
			t.Errorf("to %g K: t = %.15g s, want %.15g s", target, got, want)
		}
	}
	for _, after := range []float64{1, 600, 3600, 1e7} {
		got, err := LumpedRadiationTemperature(ballRho, ballCp, ballVolume, ballArea, emissivity, 0, initial, after)
		if err != nil {
			t.Fatal(err)
		}
		if want := math.Pow(1/math.Pow(initial, 3)+3*after/scale, -1.0/3); math.Abs(got-want) > 1e-12*want {
			t.Errorf("after %g s: T = %.15g K, want %.15g K", after, got, want)
		}
	}
}

// The temperature solver inverts the time formula: the time to reach the
// temperature it returns is the time asked for, and it never overshoots
// the surroundings.
func TestLumpedRadiationTemperatureInvertsTime(t *testing.T) {
	t.Parallel()
	for _, c := range []struct{ tSur, initial float64 }{{300, 1200}, {1200, 300}, {10, 900}} {
		previous := c.initial
		for _, after := range []float64{0, 10, 300, 3000, 3e4, 3e6} {
			temp, err := LumpedRadiationTemperature(ballRho, ballCp, ballVolume, ballArea, 0.7, c.tSur, c.initial, after)
			if err != nil {
				t.Fatal(err)
			}
			if !between(temp, previous, c.tSur) && temp != c.tSur {
				t.Errorf("Tsur %g, Ti %g, after %g s: T = %.12g K, not between %.12g K and Tsur", c.tSur, c.initial, after, temp, previous)
			}
			previous = temp
			if after == 0 || temp == c.tSur {
				continue
			}
			back, err := LumpedRadiationTime(ballRho, ballCp, ballVolume, ballArea, 0.7, c.tSur, c.initial, temp)
			if err != nil {
				t.Fatal(err)
			}
			// A relative error of 1e-15 in T moves t by up to
			// 1e-15·T/|dT/dt|; allow a thousand times that.
			rate := 0.7 * stefanBoltzmann * ballArea * math.Abs(math.Pow(temp, 4)-math.Pow(c.tSur, 4)) / (ballRho * ballCp * ballVolume)
			if math.Abs(back-after) > 1e-9*after+1e-12*temp/rate {
				t.Errorf("Tsur %g, Ti %g: T(%g s) = %.15g K, which takes %.15g s", c.tSur, c.initial, after, temp, back)
			}
		}
	}
}

func TestLumpedRadiationRejectsBadInput(t *testing.T) {
	t.Parallel()
	_, err := LumpedRadiationTime(ballRho, -1, ballVolume, ballArea, 1.4, 300, 1000, 500)
	if !errors.Is(err, ErrInvalidInput) {
		t.Fatalf("got %v, want ErrInvalidInput", err)
	}
	for _, f := range []string{"cp:", "emissivity:", "got 1.4"} {
		if !strings.Contains(err.Error(), f) {
			t.Errorf("error %q does not name %q", err, f)
		}
	}
	for _, target := range []float64{1100, 300, 250} {
		_, err := LumpedRadiationTime(ballRho, ballCp, ballVolume, ballArea, 0.8, 300, 1000, target)
		if !errors.Is(err, ErrInvalidInput) || !strings.Contains(err.Error(), "tTarget:") {
			t.Errorf("target %g K beyond 1000 K → 300 K: got %v, want an error naming tTarget", target, err)
		}
	}
	_, err = LumpedRadiationTemperature(ballRho, ballCp, ballVolume, 0, 0.8, -3, 1000, -1)
	for _, f := range []string{"area:", "tSur:", "t:"} {
		if !errors.Is(err, ErrInvalidInput) || !strings.Contains(err.Error(), f) {
			t.Errorf("error %v does not name %q", err, f)
		}
	}
}
