package stl

import (
	"bytes"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"soakfarm/internal/partgen"
)

// partsDir holds the shared parts written by internal/partgen.
const partsDir = "../../testdata/parts"

func readPart(t testing.TB, name string, opt Options) *Mesh {
	t.Helper()
	f, err := os.Open(filepath.Join(partsDir, name))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	m, err := Read(f, opt)
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return m
}

func asciiOf(t testing.TB, blocks ...partgen.Block) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := partgen.WriteASCII(&b, blocks); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// Every broken file is refused, or warned about, with a message that names
// what is wrong and where.
func TestBrokenFiles(t *testing.T) {
	t.Parallel()
	tests := []struct {
		file     string
		readErr  string // fragment of Read's error, if Read must fail
		checkErr string // fragment of Check's Err
		warning  string // fragment of Check's warnings
		sentinel error
	}{
		{file: "broken_open_edge.stl", checkErr: "3 open edges (1 holes)", sentinel: ErrNotSolid},
		{file: "broken_nonmanifold_edge.stl", checkErr: "1 non-manifold edges (shared by more than two triangles) near (10, 10, 5) mm", sentinel: ErrNotSolid},
		{file: "broken_flipped_triangle.stl", checkErr: "1 triangles face the opposite way to their neighbours (3 edges", sentinel: ErrNotSolid},
		{file: "broken_inside_out.stl", checkErr: "inside-out", sentinel: ErrNotSolid},
		{file: "broken_degenerate_triangle.stl", warning: "1 degenerate triangles (zero or near-zero area), e.g. triangle 2 at (5, 0, 10) mm"},
		{file: "broken_truncated.stl", readErr: "triangle 7 is cut off", sentinel: ErrFormat},
		{file: "broken_garbage.stl", readErr: `line 5: vertex coordinate z is "banana"`, sentinel: ErrFormat},
		{file: "broken_no_endsolid.stl", readErr: `missing "endsolid"`, sentinel: ErrFormat},
	}
	for _, tc := range tests {
		t.Run(tc.file, func(t *testing.T) {
			t.Parallel()
			data, err := os.ReadFile(filepath.Join(partsDir, tc.file))
			if err != nil {
				t.Fatal(err)
			}
			m, err := Read(bytes.NewReader(data), Options{Units: "mm"})
			if tc.readErr != "" {
				if err == nil || !strings.Contains(err.Error(), tc.readErr) || !errors.Is(err, tc.sentinel) {
					t.Fatalf("Read error = %v, want %q wrapping %v", err, tc.readErr, tc.sentinel)
				}
				return
			}
			if err != nil {
				t.Fatalf("Read: %v", err)
			}
			rep := Check(m)
			err = rep.Err()
			if tc.checkErr == "" {
				if err != nil {
					t.Fatalf("Check error = %v, want none", err)
				}
			} else if err == nil || !strings.Contains(err.Error(), tc.checkErr) || !errors.Is(err, tc.sentinel) {
				t.Fatalf("Check error = %v, want %q", err, tc.checkErr)
			}
			if w := strings.Join(rep.Warnings(), "\n"); !strings.Contains(w, tc.warning) {
				t.Fatalf("warnings = %q, want %q", w, tc.warning)
			}
		})
	}
}

// The flipped triangle is the one partgen reversed (triangle 5), and the
// reported location is its centroid in the file's own coordinates even
// when the part is rotated and moved on reading.
func TestReportSpeaksFileCoordinates(t *testing.T) {
	t.Parallel()
	m := readPart(t, "broken_flipped_triangle.stl", Options{Units: "mm", RotateDeg: [3]float64{30, 0, 75}, Translate: [3]float64{5, -7, 2}})
	rep := Check(m)
	cube := partgen.Cube(partgen.BrokenCubeEdge)[5]
	want := [3]float64{}
	for _, v := range cube {
		for k := range 3 {
			want[k] += v[k] / 3
		}
	}
	if rep.FlippedTriangles.Count != 1 || rep.FlippedTriangles.Triangles[0] != 5 {
		t.Fatalf("flipped = %+v, want triangle 5 only", rep.FlippedTriangles)
	}
	got := rep.FlippedTriangles.Examples[0]
	for k := range 3 {
		if math.Abs(got[k]-want[k]) > 1e-9 {
			t.Fatalf("location %v, want %v (mm, file frame)", got, want)
		}
	}
}

func TestRepairHoles(t *testing.T) {
	t.Parallel()
	cube := partgen.Cube(partgen.BrokenCubeEdge)
	// Top face is cube[0:2]: dropping both leaves a square hole of 4 edges.
	square := asciiOf(t, partgen.Block{Name: "cube", Triangles: cube[2:]})
	triangle, err := os.ReadFile(filepath.Join(partsDir, "broken_open_edge.stl"))
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name      string
		data      []byte
		maxEdges  int
		repaired  int
		added     int
		wantClean bool
	}{
		{"triangle hole", triangle, 3, 1, 1, true},
		{"triangle hole too large", triangle, 2, 0, 0, false},
		{"square hole", square, 4, 1, 4, true},
		{"square hole too large", square, 3, 0, 0, false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			m, err := Read(bytes.NewReader(tc.data), Options{Units: "mm", RepairHoles: tc.maxEdges})
			if err != nil {
				t.Fatal(err)
			}
			rep := Check(m)
			if rep.RepairedHoles != tc.repaired || rep.AddedTriangles != tc.added {
				t.Fatalf("repaired %d holes with %d triangles, want %d with %d", rep.RepairedHoles, rep.AddedTriangles, tc.repaired, tc.added)
			}
			if (rep.Err() == nil) != tc.wantClean {
				t.Fatalf("Err() = %v, want clean %v", rep.Err(), tc.wantClean)
			}
			if tc.wantClean {
				// The repaired cube is the whole cube again: (10 mm)³.
				if v := rep.SignedVolume; math.Abs(v-1e-6) > 1e-18 {
					t.Fatalf("volume %g m³, want 1e-6", v)
				}
				if !strings.Contains(rep.String(), "repaired 1 holes") {
					t.Fatalf("report does not say what was repaired:\n%s", rep)
				}
			}
		})
	}
}

// Units scale, rotations apply about x then y then z, translation comes
// last, in the file's units.
func TestUnitsAndPlacement(t *testing.T) {
	t.Parallel()
	tet := partgen.Block{Name: "tet", Triangles: []partgen.Triangle{
		{{0, 0, 0}, {0, 1, 0}, {1, 0, 0}},
		{{0, 0, 0}, {0, 0, 1}, {0, 1, 0}},
		{{0, 0, 0}, {1, 0, 0}, {0, 0, 1}},
		{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}},
	}}
	data := asciiOf(t, tet)
	tests := []struct {
		name   string
		opt    Options
		corner [3]float64 // where the file's corner (0, 1, 0) must land, m
		scale  float64
	}{
		{"metres by default", Options{}, [3]float64{0, 1, 0}, 1},
		{"millimetres", Options{Units: "mm"}, [3]float64{0, 1e-3, 0}, 1e-3},
		// 1 in = 25.4 mm exactly (international inch, 1959).
		{"inches", Options{Units: "in"}, [3]float64{0, 0.0254, 0}, 0.0254},
		// x first: (0,1,0) → (0,0,1); then y: (0,0,1) → (1,0,0). The other
		// order would give (0,0,1).
		{"x then y", Options{Units: "mm", RotateDeg: [3]float64{90, 90, 0}}, [3]float64{1e-3, 0, 0}, 1e-3},
		{"z turn and shift", Options{Units: "mm", RotateDeg: [3]float64{0, 0, 90}, Translate: [3]float64{1, 2, 3}}, [3]float64{0, 2e-3, 3e-3}, 1e-3},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			m, err := Read(bytes.NewReader(data), tc.opt)
			if err != nil {
				t.Fatal(err)
			}
			// Corner (0, 1, 0) is the second corner of the first triangle.
			got := m.Vertices[m.Triangles[0][1]]
			for k := range 3 {
				if math.Abs(got[k]-tc.corner[k]) > 1e-15 {
					t.Fatalf("corner at %v, want %v", got, tc.corner)
				}
			}
			// Volume of the unit corner tetrahedron is 1/6, whatever the placement.
			want := math.Pow(tc.scale, 3) / 6
			if v := Check(m).SignedVolume; math.Abs(v-want) > 1e-12*want {
				t.Fatalf("volume %g, want %g", v, want)
			}
		})
	}
}

func TestOptionsAndLimits(t *testing.T) {
	t.Parallel()
	sphere, err := os.ReadFile(filepath.Join(partsDir, "sphere.stl"))
	if err != nil {
		t.Fatal(err)
	}
	cylinder, err := os.ReadFile(filepath.Join(partsDir, "cylinder.stl"))
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name     string
		data     []byte
		opt      Options
		want     string
		sentinel error
	}{
		{"unknown unit", sphere, Options{Units: "ft"}, `units: must be "m", "mm" or "in", got "ft"`, ErrOptions},
		{"rotation not finite", sphere, Options{RotateDeg: [3]float64{0, math.NaN(), 0}}, "rotate_deg[1]: must be finite", ErrOptions},
		{"binary over triangle limit", sphere, Options{MaxTriangles: 100}, "5120 triangles, more than max_triangles = 100; raise max_triangles", ErrLimit},
		{"ascii over triangle limit", cylinder, Options{MaxTriangles: 100}, "more than max_triangles = 100 triangles; raise max_triangles", ErrLimit},
		{"over byte limit", sphere, Options{MaxBytes: 1000}, "larger than 1000 bytes (max_bytes); raise max_bytes", ErrLimit},
		{"empty", nil, Options{}, "holds no triangles", ErrFormat},
		{"binary with extra bytes", append(append([]byte(nil), sphere...), 1, 2, 3), Options{}, "(3 extra)", ErrFormat},
		{"short binary", []byte("\x00\x01 not text"), Options{}, "fewer than a binary STL's 84-byte header, and does not begin with \"solid\"", ErrFormat},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			_, err := Read(bytes.NewReader(tc.data), tc.opt)
			if err == nil || !strings.Contains(err.Error(), tc.want) || !errors.Is(err, tc.sentinel) {
				t.Fatalf("error = %v, want %q wrapping %v", err, tc.want, tc.sentinel)
			}
		})
	}
}

// The sphere's binary header begins with "solid", as many exporters'
// headers do; the size 84 + 50·n still marks it binary.
func TestFormatDetectionAndNames(t *testing.T) {
	t.Parallel()
	tests := []struct {
		file, format string
		names        []string
		triangles    int
	}{
		{"sphere.stl", "binary", []string{"sphere"}, 20 * 256},
		{"tube.stl", "binary", []string{"body"}, 4 * partgen.TubeSides * 2},
		{"bracket.stl", "ascii", []string{"bracket", "mounting_face"}, 52},
		{"cylinder.stl", "ascii", []string{"cylinder"}, 4 * partgen.CylinderSides},
	}
	for _, tc := range tests {
		t.Run(tc.file, func(t *testing.T) {
			t.Parallel()
			m := readPart(t, tc.file, Options{Units: "mm"})
			if m.Format != tc.format || strings.Join(m.SolidNames, ",") != strings.Join(tc.names, ",") || len(m.Triangles) != tc.triangles {
				t.Fatalf("format %s, names %q, %d triangles; want %s, %q, %d", m.Format, m.SolidNames, len(m.Triangles), tc.format, tc.names, tc.triangles)
			}
			if err := Check(m).Err(); err != nil {
				t.Fatal(err)
			}
		})
	}
}
