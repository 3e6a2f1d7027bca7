package report

import (
	"encoding/base64"
	"encoding/binary"
	"encoding/xml"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/types/known/wrapperspb"

	soakv1 "soakfarm/proto/soak/v1"
)

// The snapshot follows the VTK XML image-data layout (VTK File Formats,
// "XML File Formats", Kitware, from memory): inline binary arrays are
// base64 of a UInt64 byte count followed by the little-endian values.
func TestSnapshotDecodes(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	s := Snapshot{Time: 12.5, N: [3]int{2, 2, 1}, Origin: [3]float64{-1, -1, -0.5}, CellSize: 1,
		TempC: []float64{100, 200, 300, 400}, Part: []uint8{1, 1, 0, 1}}
	name, err := WriteSnapshot(dir, s)
	if err != nil {
		t.Fatal(err)
	}
	if name != "snapshot-12_5s.vti" {
		t.Errorf("file name %q", name)
	}
	raw, err := os.ReadFile(filepath.Join(dir, name))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Image struct {
			Extent  string `xml:"WholeExtent,attr"`
			Spacing string `xml:"Spacing,attr"`
			Piece   struct {
				Arrays []struct {
					Name string `xml:"Name,attr"`
					Type string `xml:"type,attr"`
					Data string `xml:",chardata"`
				} `xml:"CellData>DataArray"`
			} `xml:"Piece"`
		} `xml:"ImageData"`
	}
	if err := xml.Unmarshal(raw, &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Image.Extent != "0 2 0 2 0 1" {
		t.Errorf("extent %q", doc.Image.Extent)
	}
	arrays := doc.Image.Piece.Arrays
	if len(arrays) != 2 || arrays[0].Name != "temperature_c" || arrays[1].Name != "part" {
		t.Fatalf("arrays %+v", arrays)
	}
	b, err := base64.StdEncoding.DecodeString(strings.TrimSpace(arrays[0].Data))
	if err != nil {
		t.Fatal(err)
	}
	if n := binary.LittleEndian.Uint64(b); n != 16 {
		t.Fatalf("byte count %d, want 16", n)
	}
	for c, want := range []float64{100, 200, math.NaN(), 400} {
		got := float64(math.Float32frombits(binary.LittleEndian.Uint32(b[8+4*c:])))
		if !(got == want || math.IsNaN(want) && math.IsNaN(got)) {
			t.Errorf("cell %d: %v, want %v", c, got, want)
		}
	}
}

// A milestone that was not reached shows time_s null, as the summary
// promises; the caution is always there.
func TestSummaryJSON(t *testing.T) {
	t.Parallel()
	b, err := MarshalSummary(&soakv1.Summary{
		Name:    "x",
		Caution: Caution,
		Milestones: []*soakv1.MilestoneResult{
			{Name: "reached", TimeS: wrapperspb.Double(12)},
			{Name: "missed"},
		},
	})
	if err != nil {
		t.Fatal(err)
	}
	// protojson varies its spacing on purpose; compare without it.
	s := strings.Join(strings.Fields(string(b)), "")
	for _, want := range []string{`"time_s":12`, `"time_s":null`, `"caution":"Engineeringestimateonly`, `"energy_imbalance":0`} {
		if !strings.Contains(s, want) {
			t.Errorf("summary lacks %s:\n%s", want, s)
		}
	}
}

func TestProbeWriter(t *testing.T) {
	t.Parallel()
	path := filepath.Join(t.TempDir(), ProbesFile)
	w, err := NewProbeWriter(path, []string{"core", "skin"})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write(Row{Time: 600, Probes: []float64{99.5, 50}, Min: 40, Max: 100, Mean: 70, EnergyFraction: 0.5}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	got, _ := os.ReadFile(path)
	want := "time_s,core_c,skin_c,min_c,max_c,mean_c,energy_fraction\n600,99.5000,50.0000,40.0000,100.0000,70.0000,0.500000\n"
	if string(got) != want {
		t.Errorf("got\n%s\nwant\n%s", got, want)
	}
}
