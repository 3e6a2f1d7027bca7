package scheduler_test

import (
	"bytes"
	"encoding/binary"
	"errors"
	"strings"
	"testing"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"soakfarm/farmclient"
	"soakfarm/jobspec"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler"
)

// binaryCubeSTL is a closed 10 mm cube of 12 triangles in binary STL
// (84-byte header and count, 50 bytes per triangle).
func binaryCubeSTL() []byte {
	v := func(i int) [3]float32 { // corner i: bits are x, y, z
		return [3]float32{float32(i & 1 * 10), float32(i >> 1 & 1 * 10), float32(i >> 2 & 1 * 10)}
	}
	// Two triangles per face, wound counter-clockwise seen from outside.
	faces := [][4]int{{0, 2, 3, 1}, {4, 5, 7, 6}, {0, 1, 5, 4}, {2, 6, 7, 3}, {0, 4, 6, 2}, {1, 3, 7, 5}}
	var b bytes.Buffer
	b.Write(make([]byte, 80))
	binary.Write(&b, binary.LittleEndian, uint32(12))
	for _, f := range faces {
		for _, tri := range [][3]int{{f[0], f[1], f[2]}, {f[0], f[2], f[3]}} {
			binary.Write(&b, binary.LittleEndian, [3]float32{}) // normal: readers recompute it
			for _, c := range tri {
				binary.Write(&b, binary.LittleEndian, v(c))
			}
			binary.Write(&b, binary.LittleEndian, uint16(0))
		}
	}
	return b.Bytes()
}

func stlSpec(data []byte) *soakv1.JobSpec {
	spec := sphereSpec("stl-part")
	spec.Part = &soakv1.Part{Bodies: []*soakv1.Body{{
		Name:  "cube",
		Shape: &soakv1.Body_Stl{Stl: &soakv1.StlFile{File: "cube.stl", Units: "mm", Data: data}},
	}}}
	return spec
}

// TestLimitRefusalsNameTheirFlag submits one spec over each limit and
// expects the refusal to name the field, the limit and the scheduler flag
// that raises it.
func TestLimitRefusalsNameTheirFlag(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	limits := scheduler.Limits{
		Spec:            jobspec.Limits{MaxCells: 100_000, MaxMemoryBytes: 1 << 20, MaxSteps: 1000},
		MaxSTLBytes:     4 << 10,
		MaxSTLTriangles: 10,
	}
	srv := startSchedulerWith(t, connect(t, ns), scheduler.Config{Settings: testSettings(), Limits: limits})
	client := dial(t, srv.Addr().String())

	withCells := func(n uint32) *soakv1.JobSpec {
		s := sphereSpec("fine")
		s.CellsAcross = proto.Uint32(n)
		return s
	}
	manySteps := sphereSpec("short-steps")
	manySteps.TimeStepping = &soakv1.TimeStepping{MaxStepS: proto.Float64(0.1)} // 300 s / 0.1 s = 3000 steps
	tests := []struct {
		name  string
		spec  *soakv1.JobSpec
		field string
		want  []string
	}{
		// 50³ = 125 000 cells, over 100 000 (and over the memory limit).
		{"cells", withCells(50), "cells_across", []string{"limit of", "--max-cells raises it"}},
		// 25³ cells × 120 bytes = 1.9 MB, over 1 MiB; under the cell limit.
		{"memory", withCells(25), "cells_across", []string{"--max-memory raises it"}},
		{"steps", manySteps, "time_stepping.max_step_s", []string{"over the limit of 1000", "--max-steps raises it"}},
		{"STL bytes", stlSpec(append(binaryCubeSTL(), make([]byte, 4<<10)...)), "part.bodies[0].stl.data", []string{"over the farm's limit of 4096 bytes", "--max-stl-bytes raises it"}},
		{"STL triangles", stlSpec(binaryCubeSTL()), "part.bodies[0].stl.data", []string{"limit of 10 triangles", "--max-stl-triangles raises it"}},
		{"STL without its data", stlSpec(nil), "part.bodies[0].stl.data", []string{"farm workers read no files", "cube.stl"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			_, err := client.SubmitJob(t.Context(), &soakv1.SubmitJobRequest{Spec: tc.spec})
			st := status.Convert(err)
			if st.Code() != codes.InvalidArgument {
				t.Fatalf("submit: %v, want InvalidArgument", err)
			}
			for _, d := range st.Details() {
				br, ok := d.(*errdetails.BadRequest)
				if !ok {
					continue
				}
				for _, v := range br.GetFieldViolations() {
					if v.GetField() != tc.field {
						continue
					}
					missing := false
					for _, w := range tc.want {
						missing = missing || !strings.Contains(v.GetDescription(), w)
					}
					if !missing {
						return
					}
				}
			}
			t.Errorf("no violation of %s saying %q in %v", tc.field, tc.want, st.Details())
		})
	}
}

// TestMessageLimitNamesItsFlag sends a spec larger than the scheduler's
// message limit, and one larger than the client's own.
func TestMessageLimitNamesItsFlag(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	srv := startSchedulerWith(t, connect(t, ns), scheduler.Config{Settings: testSettings(), MaxMessageBytes: 1 << 20})
	big := stlSpec(make([]byte, 2<<20))
	tests := []struct {
		name      string
		clientMax int
		want      []string
	}{
		{"over the scheduler's limit", 8 << 20, []string{"ResourceExhausted", "1048576", "scheduler's --max-message-bytes"}},
		{"over the client's limit", 1 << 20, []string{"over this client's limit of 1048576 bytes", "--max-message-bytes"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			c, err := farmclient.Dial(t.Context(), srv.Addr().String(), farmclient.WithMaxMessageBytes(tc.clientMax))
			if err != nil {
				t.Fatal(err)
			}
			defer c.Close()
			_, _, err = c.Submit(t.Context(), big, "")
			if err == nil {
				t.Fatal("accepted")
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q lacks %q", err, w)
				}
			}
			if tc.clientMax == 1<<20 && !errors.Is(err, farmclient.ErrTooLarge) {
				t.Errorf("error %v is not ErrTooLarge", err)
			}
		})
	}
}
