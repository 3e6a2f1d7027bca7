package cli

import (
	"path/filepath"
	"strings"
	"testing"
)

// TestEstimatePrintsHandNumbers checks the figures against a hand
// calculation for the glass-bead quench (20 mm sphere, k = 1.1, h = 60,
// ε = 0.9, 500 °C into 25 °C): Lc = D/6 = 0.003333 m; h_rad =
// 0.9·σ·(535.65² + 298.15²)·(535.65 + 298.15) = 15.99 W/m²K at the mean
// 535.65 K; Bi = (60 + 15.99)·0.003333/1.1 = 0.2303, so lumped capacitance
// does not apply (Bi < 0.1, common practice).
func TestEstimatePrintsHandNumbers(t *testing.T) {
	t.Parallel()
	tests := []struct {
		spec string
		want []string
	}{
		{"bead-tray-quench.yaml", []string{
			"bead-tray-quench", "Lc = V/As 0.003333 m", "15.99 (radiation)", "Biot number 0.2303",
			"lumped capacitance does not apply", "no: Bi = 0.23 is not below 0.1", "sphere-one-term",
			"h_rad = εσ(Tm²+Tsur²)(Tm+Tsur)", "mean of the initial and surroundings temperatures",
		}},
		{"flange-furnace-heatup.yaml", []string{
			"Properties vary with temperature", "values at the mean", "schedule",
			"no: Bi = 0.272 is not below 0.1", "different fluid or surroundings temperatures",
		}},
	}
	for _, tc := range tests {
		t.Run(tc.spec, func(t *testing.T) {
			t.Parallel()
			code, stdout, stderr := runSoak(t, "estimate", filepath.Join("..", "..", "testdata", "specs", tc.spec))
			if code != ExitOK {
				t.Fatalf("exit %d, stderr %s", code, stderr)
			}
			for _, w := range tc.want {
				if !strings.Contains(stdout, w) {
					t.Errorf("output lacks %q:\n%s", w, stdout)
				}
			}
		})
	}
}

func TestEstimateRefusesBadSpecs(t *testing.T) {
	t.Parallel()
	code, _, stderr := runSoak(t, "estimate", filepath.Join("..", "..", "testdata", "specs", "bad-emissivity-above-one.yaml"))
	if code != ExitUsage || !strings.Contains(stderr, "exposure[1].emissivity") {
		t.Errorf("exit %d, stderr %q; want %d naming exposure[1].emissivity", code, stderr, ExitUsage)
	}
}
