package cli

import (
	"encoding/json"
	"strings"
	"testing"
)

// TestBenchJSON runs the bench at a small size and checks the JSON array
// carries one object per case with the promised fields.
func TestBenchJSON(t *testing.T) {
	t.Parallel()
	code, stdout, stderr := runSoak(t, "bench", "--only", "10", "--part", "16", "--triad-size", "1", "--json")
	if code != ExitOK {
		t.Fatalf("exit %d, stderr %s", code, stderr)
	}
	var cases []map[string]any
	if err := json.Unmarshal([]byte(stdout), &cases); err != nil {
		t.Fatalf("output is not a JSON array: %v\n%s", err, stdout)
	}
	if len(cases) != 3 {
		t.Fatalf("%d cases, want 2 block steps and the part", len(cases))
	}
	for _, c := range cases {
		for _, key := range []string{"case", "n", "cell_fourier", "cells", "iterations", "seconds_per_step",
			"reference_seconds_per_step", "bandwidth_gbs", "cycle_gbs", "sweep_gbs", "pass_cycle_gbs", "fused_speedup", "triad_gbs"} {
			if _, ok := c[key]; !ok {
				t.Errorf("case %v lacks %q", c["case"], key)
			}
		}
	}
	if n := cases[0]["n"]; n != 10.0 {
		t.Errorf("first case has n = %v, want 10", n)
	}
}

func TestBenchRefusesBadFlags(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"bench", "--only", "2"}, "--only"},
		{[]string{"bench", "--part", "-1"}, "--part"},
		{[]string{"bench", "--triad-size", "0"}, "--triad-size"},
		{[]string{"bench", "--repeat", "0"}, "--repeat"},
	} {
		code, _, stderr := runSoak(t, tc.args...)
		if code != ExitUsage || !strings.Contains(stderr, tc.want) {
			t.Errorf("%v: exit %d, stderr %q; want %d naming %s", tc.args, code, stderr, ExitUsage, tc.want)
		}
	}
}
