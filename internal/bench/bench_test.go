package bench

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"
)

// TestRunSmall runs every kind of case at a small size and checks what can
// be known without a clock: the cell counts against geometry, and that
// multigrid needs fewer iterations than the Jacobi reference.
func TestRunSmall(t *testing.T) {
	t.Parallel()
	const n, across = 12, 24
	var seen int
	var triads []float64
	results, err := Run(context.Background(), Options{Sizes: []int{n}, PartCells: across, TriadElements: 1 << 16},
		func(r Result) error { seen++; triads = append(triads, r.TriadGBs); return nil })
	if err != nil {
		t.Fatal(err)
	}
	if len(results) != 3 || seen != 3 {
		t.Fatalf("%d results, %d reported; want 2 block steps and the part", len(results), seen)
	}
	// Each result is reported with the triad it is read against.
	for i, r := range results {
		if !(r.TriadGBs > 0) || r.TriadGBs != triads[i] {
			t.Errorf("%s: triad %g GB/s, reported with %g", r.Case, r.TriadGBs, triads[i])
		}
	}
	for _, r := range results {
		for name, v := range map[string]float64{
			"iterations": r.Iterations, "seconds_per_step": r.SecondsPerStep, "reference_seconds_per_step": r.ReferenceSecondsPerStep,
			"bandwidth_gbs": r.BandwidthGBs, "cycle_gbs": r.CycleGBs, "sweep_gbs": r.SweepGBs, "triad_gbs": r.TriadGBs, "bytes_per_cell": r.BytesPerCell,
			"cell_iterations_per_second": r.CellIterationsPerSecond,
		} {
			if !(v > 0) || math.IsInf(v, 0) {
				t.Errorf("%s: %s = %g, want a positive number", r.Case, name, v)
			}
		}
		// Counted pass by pass, the cycles move more than their fused
		// sweeps do.
		if r.CycleGBs < 2*r.SweepGBs {
			t.Errorf("%s: cycles %g GB/s counted pass by pass, %g GB/s by their sweeps", r.Case, r.CycleGBs, r.SweepGBs)
		}
		if r.Iterations >= r.ReferenceIterations {
			t.Errorf("%s: multigrid %g iterations per step, Jacobi %g", r.Case, r.Iterations, r.ReferenceIterations)
		}
	}
	for i, fo := range []float64{20, 2000} {
		// The block steps carry the pass-by-pass reference of the cycles.
		if r := results[i]; !(r.PassCycleGBs > 0) || !(r.FusedSpeedup > 0) {
			t.Errorf("block case %d: pass-by-pass cycles %g GB/s, fused speed-up %g", i, r.PassCycleGBs, r.FusedSpeedup)
		}
		if r := results[i]; r.N != n || r.Cells != n*n*n || r.CellFourier != fo || r.Steps != 1 {
			t.Errorf("block case %d: n %d, %d cells, Fo %g, %d steps; want %d, %d, %g, 1", i, r.N, r.Cells, r.CellFourier, r.Steps, n, n*n*n, fo)
		}
	}
	// A ball of radius R with a bore of radius a through its centre keeps
	// π·h³/6 with h = 2·√(R² − a²), whatever R (the napkin-ring volume,
	// from memory). The voxel count may differ by a few per cent at 24
	// cells across.
	part := results[2]
	R, a := float64(across)/2, 0.15*float64(across)
	h := 2 * math.Sqrt(R*R-a*a)
	if want := math.Pi * h * h * h / 6; math.Abs(float64(part.Cells)/want-1) > 0.05 {
		t.Errorf("part has %d cells, napkin ring %.0f", part.Cells, want)
	}
	if part.Steps < partSteps {
		t.Errorf("part run took %d steps, want at least %d", part.Steps, partSteps)
	}
}

func TestRunRefusesSmallBlock(t *testing.T) {
	t.Parallel()
	_, err := Run(context.Background(), Options{Sizes: []int{8, 3}, TriadElements: 1 << 10}, nil)
	if err == nil || !strings.Contains(err.Error(), "sizes[1]") || !strings.Contains(err.Error(), "got 3") {
		t.Errorf("error %v, want one naming sizes[1] and 3", err)
	}
}

func TestTriad(t *testing.T) {
	t.Parallel()
	gbs, err := Triad(context.Background(), 2, 1<<16)
	if err != nil || !(gbs > 0) {
		t.Errorf("triad %g GB/s, error %v", gbs, err)
	}
	if _, err := Triad(context.Background(), 0, 10); err == nil {
		t.Error("no error for zero threads")
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Triad(ctx, 1, 1<<10); !errors.Is(err, context.Canceled) {
		t.Errorf("error %v after cancel, want context.Canceled", err)
	}
}
