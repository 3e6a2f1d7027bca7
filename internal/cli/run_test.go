package cli

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"soakfarm/report"
)

func runSoak(t *testing.T, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var out, errb bytes.Buffer
	code = Main(context.Background(), args, strings.NewReader(""), &out, &errb)
	return code, out.String(), errb.String()
}

// Bad specs end with exit code 2 and a message naming the field and value.
func TestRunRefusesBadSpecs(t *testing.T) {
	t.Parallel()
	cases := []struct {
		file string
		want []string
	}{
		{"bad-emissivity-above-one.yaml", []string{"exposure[1].emissivity", "1.4"}},
		{"bad-unknown-keys.yaml", []string{"part.sphere.diamter_m: unknown key"}},
		{"bad-many-problems.yaml", []string{"part.cylinder.length_m", "-0.1", "initial_c", "-300", "time_stepping.scheme"}},
		{"bad-probe-outside-part.yaml", []string{"probes[1].at_m"}},
		{"bad-grid-too-fine.yaml", []string{"GiB", "--max-memory"}},
		{"does-not-exist.yaml", []string{"does-not-exist.yaml"}},
	}
	for _, c := range cases {
		t.Run(c.file, func(t *testing.T) {
			t.Parallel()
			out := t.TempDir()
			code, _, stderr := runSoak(t, "run", filepath.Join("..", "..", "testdata", "specs", c.file), "--out", out, "-q")
			if code != ExitUsage {
				t.Errorf("exit code %d, want %d; stderr:\n%s", code, ExitUsage, stderr)
			}
			for _, w := range c.want {
				if !strings.Contains(stderr, w) {
					t.Errorf("stderr lacks %q:\n%s", w, stderr)
				}
			}
			if entries, _ := os.ReadDir(out); len(entries) != 0 {
				t.Errorf("a refused spec left files behind: %v", entries)
			}
		})
	}
}

// A good spec writes every result file, with flags after the spec path
// as users type them.
func TestRunWritesResults(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	spec := filepath.Join(dir, "pebble.yaml")
	const yaml = `name: pebble-cooling
part:
  sphere: {diameter_m: 0.01}
cells_across: 8
material: {density_kg_m3: 2500, conductivity_w_mk: 1.2, specific_heat_j_kgk: 800}
initial_c: 300
exposure:
  - {surfaces: all, h_w_m2k: 40, fluid_c: 20, emissivity: 0.9}
end_s: 120
probes: [{name: core, at_m: [0, 0, 0]}]
milestones: [{name: core-below-100, probe: core, reaches_c: 100}]
snapshots_s: [60]
`
	if err := os.WriteFile(spec, []byte(yaml), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "out")
	code, stdout, stderr := runSoak(t, "run", spec, "--out", out, "--quiet")
	if code != ExitOK {
		t.Fatalf("exit code %d; stderr:\n%s", code, stderr)
	}
	for _, f := range []string{report.ProbesFile, report.SummaryFile, report.HistoryFile, report.SnapshotFile(60)} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("missing %s: %v", f, err)
		}
	}
	for _, w := range []string{"core-below-100", "CAUTION", "Biot number"} {
		if !strings.Contains(stdout, w) {
			t.Errorf("final screen lacks %q:\n%s", w, stdout)
		}
	}
}
