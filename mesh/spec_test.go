package mesh

import (
	"reflect"
	"strings"
	"testing"

	soakv1 "soakfarm/proto/soak/v1"
)

func TestSolidFromSpec(t *testing.T) {
	t.Parallel()
	sphere := func(d float64) *soakv1.Part {
		return &soakv1.Part{Shape: &soakv1.Part_Sphere{Sphere: &soakv1.Sphere{DiameterM: d}}}
	}
	cylinder := func(d, l float64, axis string) *soakv1.Part {
		return &soakv1.Part{Shape: &soakv1.Part_Cylinder{Cylinder: &soakv1.Cylinder{DiameterM: d, LengthM: l, Axis: axis}}}
	}
	box := func(size ...float64) *soakv1.Part {
		return &soakv1.Part{Shape: &soakv1.Part_Box{Box: &soakv1.Box{SizeM: size}}}
	}
	tests := []struct {
		name    string
		part    *soakv1.Part
		want    Solid
		wantErr []string
	}{
		{"sphere", sphere(0.05), Sphere{Diameter: 0.05}, nil},
		{"cylinder, default axis z", cylinder(0.03, 0.2, ""), Cylinder{Diameter: 0.03, Length: 0.2, Axis: 2}, nil},
		{"cylinder along x", cylinder(0.03, 0.2, "x"), Cylinder{Diameter: 0.03, Length: 0.2, Axis: 0}, nil},
		{"box", box(0.1, 0.2, 0.3), Box{Size: [3]float64{0.1, 0.2, 0.3}}, nil},
		{"missing part", nil, nil, []string{"part: missing"}},
		{"no shape", &soakv1.Part{}, nil, []string{"part: no shape given"}},
		{"negative diameter", sphere(-0.05), nil, []string{"part.sphere.diameter_m", "got -0.05"}},
		{"every cylinder problem at once", cylinder(0, -1, "w"), nil,
			[]string{"part.cylinder.diameter_m", "got 0", "part.cylinder.length_m", "got -1", "part.cylinder.axis", `got "w"`}},
		{"box with two edges", box(0.1, 0.2), nil, []string{"part.box.size_m", "3 edge lengths", "got 2"}},
		{"box with a zero edge", box(0.1, 0, 0.3), nil, []string{"part.box.size_m[1]", "got 0"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got, err := SolidFromSpec(tt.part)
			if tt.wantErr == nil {
				if err != nil || got != tt.want {
					t.Errorf("got %#v, %v; want %#v", got, err, tt.want)
				}
				return
			}
			if err == nil {
				t.Fatalf("no error; got %#v", got)
			}
			for _, w := range tt.wantErr {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not mention %q", err, w)
				}
			}
		})
	}
}

func TestSelectorsFromSpec(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name      string
		exposures []*soakv1.Exposure
		want      []Selector
		wantErr   []string
	}{
		{"none", nil, []Selector{}, nil},
		{"all then facing", []*soakv1.Exposure{{Surfaces: "all"}, {Facing: []string{"+z", "-x"}}},
			[]Selector{{All: true}, {Facing: []int{PlusZ, MinusX}}}, nil},
		{"unknown surfaces", []*soakv1.Exposure{{Surfaces: "top"}}, nil, []string{"exposure[0].surfaces", `got "top"`}},
		{"unknown direction", []*soakv1.Exposure{{Surfaces: "all"}, {Facing: []string{"+y", "up"}}}, nil,
			[]string{"exposure[1].facing[1]", `got "up"`}},
		{"both", []*soakv1.Exposure{{Surfaces: "all", Facing: []string{"+x"}}}, nil, []string{"exposure[0]: give either"}},
		{"neither", []*soakv1.Exposure{{HWM2K: 10}}, nil, []string{"exposure[0]: selects no surface"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			got, err := SelectorsFromSpec(tt.exposures)
			if tt.wantErr == nil {
				if err != nil || !reflect.DeepEqual(got, tt.want) {
					t.Errorf("got %+v, %v; want %+v", got, err, tt.want)
				}
				return
			}
			if err == nil {
				t.Fatalf("no error; got %+v", got)
			}
			for _, w := range tt.wantErr {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not mention %q", err, w)
				}
			}
		})
	}
}
