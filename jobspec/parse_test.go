package jobspec_test

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	"soakfarm/jobspec"
	soakv1 "soakfarm/proto/soak/v1"
)

func readSpec(t *testing.T, name string) []byte {
	t.Helper()
	data, err := os.ReadFile(specDir + name)
	if err != nil {
		t.Fatal(err)
	}
	return data
}

// parseProblems parses data and returns the problems of the
// *ValidationError it must fail with, one formatted line each.
func parseProblems(t *testing.T, data []byte, format string) []string {
	t.Helper()
	spec, err := jobspec.Parse(data, format)
	var verr *jobspec.ValidationError
	if !errors.As(err, &verr) {
		t.Fatalf("Parse = %v, %v; want a *ValidationError", spec, err)
	}
	if spec != nil {
		t.Error("Parse returned a spec along with its error")
	}
	lines := make([]string, len(verr.Problems))
	for i, p := range verr.Problems {
		lines[i] = p.String()
	}
	return lines
}

func TestParseExampleValues(t *testing.T) {
	t.Parallel()
	spec, err := jobspec.Parse(readSpec(t, "bead-tray-quench.yaml"), "yaml")
	if err != nil {
		t.Fatal(err)
	}
	// Expected values are those typed in the file.
	checks := []struct {
		what      string
		got, want any
	}{
		{"name", spec.GetName(), "bead-tray-quench"},
		{"diameter", spec.GetPart().GetSphere().GetDiameterM(), 0.02},
		{"cells_across", spec.GetCellsAcross(), uint32(40)},
		{"cell_size_m set", spec.CellSizeM != nil, false},
		{"density", spec.GetMaterial().GetDensityKgM3(), 2230.0},
		{"conductivity", spec.GetMaterial().GetConductivityWMk(), 1.1},
		{"initial", spec.GetInitialC(), 500.0},
		{"exposure count", len(spec.GetExposure()), 1},
		{"surfaces", spec.GetExposure()[0].GetSurfaces(), "all"},
		{"h", spec.GetExposure()[0].GetHWM2K(), 60.0},
		{"emissivity", spec.GetExposure()[0].GetEmissivity(), 0.9},
		{"end", spec.GetEndS(), 600.0},
		{"probe", spec.GetProbes()[0].GetName(), "core"},
		{"probe at", fmt.Sprint(spec.GetProbes()[0].GetAtM()), "[0 0 0]"},
		{"milestone probe", spec.GetMilestones()[0].GetProbe(), "core"},
		{"milestone temperature", spec.GetMilestones()[0].GetReachesC(), 100.0},
		{"energy fraction", spec.GetMilestones()[1].GetEnergyFraction(), 0.9},
		{"stop", spec.GetStopAtMilestones(), false},
	}
	for _, c := range checks {
		if c.got != c.want {
			t.Errorf("%s = %v, want %v", c.what, c.got, c.want)
		}
	}
}

func TestParseYAMLAndJSONAgree(t *testing.T) {
	t.Parallel()
	fromYAML, err := jobspec.Parse(readSpec(t, "bead-tray-quench.yaml"), "yaml")
	if err != nil {
		t.Fatal(err)
	}
	jsonText := readSpec(t, "bead-tray-quench.json")
	for _, format := range []string{"json", ""} {
		fromJSON, err := jobspec.Parse(jsonText, format)
		if err != nil {
			t.Fatalf("format %q: %v", format, err)
		}
		if !proto.Equal(fromYAML, fromJSON) {
			t.Errorf("format %q: YAML gives %v\nJSON gives %v", format, fromYAML, fromJSON)
		}
	}
}

// TestParseRoundTrip writes each good spec back out with protojson and
// reads it again.
func TestParseRoundTrip(t *testing.T) {
	t.Parallel()
	for _, name := range []string{"bead-tray-quench.yaml", "flange-furnace-heatup.yaml", "aluminium-block-air.yaml", "ceramic-carrier-kiln.json"} {
		spec, err := jobspec.Load(specDir + name)
		if err != nil {
			t.Fatal(err)
		}
		assertRoundTrip(t, spec)
	}
}

func assertRoundTrip(t *testing.T, spec *soakv1.JobSpec) {
	t.Helper()
	js, err := protojson.MarshalOptions{UseProtoNames: true}.Marshal(spec)
	if err != nil {
		t.Fatal(err)
	}
	again, err := jobspec.Parse(js, "")
	if err != nil {
		t.Fatalf("reading back %s: %v", js, err)
	}
	if !proto.Equal(spec, again) {
		t.Errorf("round trip changed the spec:\n%v\n%v", spec, again)
	}
}

func TestParseUnknownKeys(t *testing.T) {
	t.Parallel()
	got := parseProblems(t, readSpec(t, "bad-unknown-keys.yaml"), "")
	want := []string{
		"line 4: part.sphere.diamter_m: unknown key; did you mean diameter_m?",
		"line 5: cellsAcross: unknown key; write it as cells_across",
		"line 16: exposure[0].schedule[0].fluid_temp_c: unknown key",
		"line 17: end_time: unknown key",
	}
	if strings.Join(got, "\n") != strings.Join(want, "\n") {
		t.Errorf("got:\n%s\nwant:\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"))
	}
}

func TestParseWrongTypes(t *testing.T) {
	t.Parallel()
	got := parseProblems(t, readSpec(t, "bad-wrong-types.yaml"), "yaml")
	want := []string{
		`line 3: part.box.size_m[2]: must be a number, got "0.05"`,
		"line 4: cells_across: must be a whole number from 0 to 4294967295, got 12.5",
		`line 12: exposure[0].h_w_m2k: must be a number, got "sixty"`,
		`line 14: exposure[0].facing: must be a list, got "+z"`,
		"line 17: probes[0].name: must be text (put it in quotes), got 7",
		`line 18: stop_at_milestones: must be true or false, got "yes"`,
		`line 19: time_stepping: must be a mapping of keys to values, got "bdf2"`,
	}
	if strings.Join(got, "\n") != strings.Join(want, "\n") {
		t.Errorf("got:\n%s\nwant:\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"))
	}
}

func TestParseProblems(t *testing.T) {
	t.Parallel()
	const base = "name: x\n"
	cases := []struct {
		name, input, format string
		want                []string
	}{
		{"duplicate key", string(readSpec(t, "bad-duplicate-key.yaml")), "",
			[]string{"line 9: material.density_kg_m3: key given twice (first on line 6)"}},
		{"two shapes", string(readSpec(t, "bad-two-shapes.yaml")), "",
			[]string{"line 4: part.box: part takes only one of sphere, cylinder, box; sphere is already given"}},
		{"duplicate key in JSON", `{"end_s": 1, "end_s": 2}`, "json",
			[]string{"line 1: end_s: key given twice (first on line 1)"}},
		{"unknown key in JSON", "{\n  \"part\": {\"sphere\": {\"radius_m\": 1}}\n}", "json",
			[]string{"line 2: part.sphere.radius_m: unknown key"}},
		{"negative count", base + "cells_across: -1\n", "",
			[]string{"line 2: cells_across: must be a whole number from 0 to 4294967295, got -1"}},
		{"count too large", base + "cells_across: 4294967296\n", "",
			[]string{"line 2: cells_across: must be a whole number from 0 to 4294967295, got 4294967296"}},
		{"text for a count", base + "cells_across: forty\n", "",
			[]string{`line 2: cells_across: must be a number, got "forty"`}},
		{"list for a name", base + "probes: [{name: [a, b]}]\n", "",
			[]string{"line 2: probes[0].name: must be text (put it in quotes), got a list"}},
		{"mapping for a number", base + "end_s: {s: 3}\n", "",
			[]string{"line 2: end_s: must be a number, got a mapping"}},
		{"null list element", base + "exposure: [~]\n", "",
			[]string{"line 2: exposure[0]: must be a mapping of keys to values, got null"}},
		{"key not text", base + "? [a, b]\n: 1\n", "",
			[]string{"line 2: a key must be plain text, got a list"}},
		{"custom tag", base + "end_s: !minutes 10\n", "",
			[]string{"line 2: end_s: must be a number, got 10"}},
		{"merge key", base + "material:\n  <<: {density_kg_m3: 1}\n", "",
			[]string{"line 3: material.<<: merge keys are not supported; write the keys out, or alias a whole value"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			got := parseProblems(t, []byte(tc.input), tc.format)
			if strings.Join(got, "\n") != strings.Join(tc.want, "\n") {
				t.Errorf("got:\n%s\nwant:\n%s", strings.Join(got, "\n"), strings.Join(tc.want, "\n"))
			}
		})
	}
}

// TestParseErrors covers input that is not a spec at all.
func TestParseErrors(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name, input, format, want string
	}{
		{"YAML syntax", string(readSpec(t, "bad-syntax.yaml")), "yaml", "reading spec as YAML: yaml: line "},
		{"JSON syntax", string(readSpec(t, "bad-syntax.json")), "", "reading spec as JSON: line 4: invalid character"},
		{"JSON syntax at the end", `{"end_s": 1`, "json", "reading spec as JSON: line 1: unexpected end of JSON input"},
		{"empty", "", "", "spec is empty"},
		{"only a comment", "# nothing\n", "yaml", "spec is empty"},
		{"top-level list", "- a\n- b\n", "", "line 1: a spec is a mapping of keys to values, not a list"},
		{"top-level number", "42", "", "not 42"},
		{"unknown format", "name: x", "toml", `unknown spec format "toml"`},
		{"two documents", "name: a\n---\nname: b\n", "", "line 2: a spec file holds one YAML document"},
		{"syntax error in a second document", "name: a\n---\nname: [b\n", "", "holds one YAML document"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			spec, err := jobspec.Parse([]byte(tc.input), tc.format)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("Parse = %v, %v; want an error with %q", spec, err, tc.want)
			}
			var verr *jobspec.ValidationError
			if errors.As(err, &verr) {
				t.Errorf("got a ValidationError for input that is no spec: %v", err)
			}
		})
	}
}

func TestParseValues(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name, input string
		check       func(s *soakv1.JobSpec) bool
	}{
		{"null leaves a field unset", "initial_c: ~\nexposure:\n  - fluid_c:\n", func(s *soakv1.JobSpec) bool {
			return s.InitialC == nil && s.GetExposure()[0].FluidC == nil
		}},
		{"whole number written as a decimal", "cells_across: 40.0", func(s *soakv1.JobSpec) bool { return s.GetCellsAcross() == 40 }},
		{"YAML integer forms", "cells_across: 0x28\nend_s: 1_000", func(s *soakv1.JobSpec) bool {
			return s.GetCellsAcross() == 40 && s.GetEndS() == 1000
		}},
		{"NaN and infinity pass through to Validate", "end_s: .nan\ninitial_c: -.inf", func(s *soakv1.JobSpec) bool {
			return math.IsNaN(s.GetEndS()) && math.IsInf(s.GetInitialC(), -1)
		}},
		{"zero that is set", "cell_size_m: 0", func(s *soakv1.JobSpec) bool { return s.CellSizeM != nil && *s.CellSizeM == 0 }},
		{"alias repeats a block", "exposure:\n  - &air {surfaces: all, h_w_m2k: 8, fluid_c: 20}\n  - *air\n", func(s *soakv1.JobSpec) bool {
			e := s.GetExposure()
			return len(e) == 2 && proto.Equal(e[0], e[1]) && e[1].GetHWM2K() == 8
		}},
		{"quoted text", `name: "tray: 3 of 4"`, func(s *soakv1.JobSpec) bool { return s.GetName() == "tray: 3 of 4" }},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			spec, err := jobspec.Parse([]byte(tc.input), "yaml")
			if err != nil {
				t.Fatal(err)
			}
			if !tc.check(spec) {
				t.Errorf("got %v", spec)
			}
		})
	}
}

// TestParseAliasExpansion checks that a small file cannot expand into an
// enormous spec through aliases: 1000 exposures sharing a 1000-entry
// schedule would be 3 million values.
func TestParseAliasExpansion(t *testing.T) {
	t.Parallel()
	var b strings.Builder
	b.WriteString("exposure:\n  - surfaces: all\n    schedule: &s\n")
	for i := range 1000 {
		fmt.Fprintf(&b, "      - {at_s: %d, h_w_m2k: 1}\n", i+1)
	}
	for range 999 {
		b.WriteString("  - {surfaces: all, schedule: *s}\n")
	}
	got := parseProblems(t, []byte(b.String()), "yaml")
	if len(got) != 1 || !strings.Contains(got[0], "expands to more than 1000000 values") {
		t.Errorf("got %v", got)
	}
}

func TestParseSizeLimit(t *testing.T) {
	t.Parallel()
	data := append([]byte("name: big\n"), bytes.Repeat([]byte("# padding\n"), jobspec.MaxSpecBytes/10)...)
	_, err := jobspec.Parse(data, "")
	if !errors.Is(err, jobspec.ErrSpecTooLarge) || !strings.Contains(err.Error(), "4 MiB") {
		t.Errorf("Parse of %d bytes: %v; want ErrSpecTooLarge naming the 4 MiB limit", len(data), err)
	}
	path := filepath.Join(t.TempDir(), "big.yaml")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := jobspec.Load(path); !errors.Is(err, jobspec.ErrSpecTooLarge) {
		t.Errorf("Load: %v; want ErrSpecTooLarge", err)
	}
}

func TestLoad(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	yamlText := readSpec(t, "bead-tray-quench.yaml")
	for _, name := range []string{"a.yml", "b.YAML", "c.txt"} {
		if err := os.WriteFile(filepath.Join(dir, name), yamlText, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := jobspec.Parse(yamlText, "yaml")
	if err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{"a.yml", "b.YAML"} {
		got, err := jobspec.Load(filepath.Join(dir, name))
		if err != nil || !proto.Equal(got, want) {
			t.Errorf("Load(%s) = %v, %v", name, got, err)
		}
	}
	if _, err := jobspec.Load(filepath.Join(dir, "c.txt")); err == nil || !strings.Contains(err.Error(), ".yaml, .yml or .json") {
		t.Errorf("Load(c.txt): %v; want an error naming the extensions", err)
	}
	if _, err := jobspec.Load(filepath.Join(dir, "missing.yaml")); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("Load(missing.yaml): %v; want fs.ErrNotExist", err)
	}
	// Problems stay reachable through the file name Load adds.
	_, err = jobspec.Load(specDir + "bad-unknown-keys.yaml")
	var verr *jobspec.ValidationError
	if !errors.As(err, &verr) || !strings.HasPrefix(err.Error(), "spec "+specDir+"bad-unknown-keys.yaml: line 4: ") {
		t.Errorf("Load(bad-unknown-keys.yaml): %v", err)
	}
}

// TestParseJSONStrings checks text read from JSON against the standard
// library's JSON decoder, for the escapes and characters that JSON and
// YAML spell differently.
func TestParseJSONStrings(t *testing.T) {
	t.Parallel()
	for _, literal := range []string{
		`"plain"`,
		`"a\/b"`,                    // escaped slash
		`"\ud83d\ude00 joined"`,     // surrogate pair
		`"\ud83d lone high"`,        // lone surrogate
		`"\ude00\ud83d reversed"`,   // pair in the wrong order
		`"\u00e9\t\n\b\f\\\"\r"`,    // the short escapes
		"\"raw\u007fdel\"",          // DEL, raw
		"\"raw\u0085nel \u0090c1\"", // C1 controls, raw
		"\"bad \xff utf-8\"",        // invalid UTF-8
		"\"\uFEFF zero width\"",     // byte order mark inside text
	} {
		input := `{"name":` + "\t" + literal + `}`
		var want struct{ Name string }
		if err := json.Unmarshal([]byte(input), &want); err != nil {
			t.Fatalf("%s: %v", input, err)
		}
		spec, err := jobspec.Parse([]byte(input), "json")
		if err != nil {
			t.Errorf("%s: %v", input, err)
			continue
		}
		if spec.GetName() != want.Name {
			t.Errorf("%s: name %q, encoding/json reads %q", input, spec.GetName(), want.Name)
		}
	}
}
