package farmclient_test

import (
	"context"
	"fmt"
	"log"
	"os"
	"time"

	"google.golang.org/protobuf/proto"

	"soakfarm/farmclient"
	soakv1 "soakfarm/proto/soak/v1"
)

// A script that queues one cool-down case, prints its progress and
// milestones, and downloads its result files. It needs a running farm
// (`soak serve`), so it is compiled but not run by go test.
func Example() {
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Minute)
	defer cancel()

	c, err := farmclient.Dial(ctx, "127.0.0.1:7431")
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()

	spec := &soakv1.JobSpec{
		Name:        "steel disc cooling in still air",
		Part:        &soakv1.Part{Shape: &soakv1.Part_Cylinder{Cylinder: &soakv1.Cylinder{DiameterM: 0.2, LengthM: 0.04}}},
		CellsAcross: proto.Uint32(8),
		Material: &soakv1.Material{
			DensityKgM3: 7850, ConductivityWMk: proto.Float64(45), SpecificHeatJKgk: proto.Float64(480),
		},
		InitialC: proto.Float64(600),
		Exposure: []*soakv1.Exposure{{Surfaces: "all", HWM2K: 10, FluidC: proto.Float64(20), Emissivity: proto.Float64(0.8)}},
		EndS:     7200,
		Probes:   []*soakv1.Probe{{Name: "centre", AtM: []float64{0, 0, 0}}},
	}
	// The key makes a retried submit return the same job.
	job, _, err := c.Submit(ctx, spec, "example/steel-disc")
	if err != nil {
		for _, v := range farmclient.FieldViolations(err) {
			fmt.Fprintf(os.Stderr, "%s: %s\n", v.Field, v.Description)
		}
		log.Fatal(err)
	}

	err = c.Watch(ctx, job.GetId(), 0, func(ev *soakv1.JobEvent) error {
		switch k := ev.GetKind().(type) {
		case *soakv1.JobEvent_Progress:
			fmt.Printf("t = %.0f of %.0f s\n", k.Progress.GetSimTimeS(), k.Progress.GetEndS())
		case *soakv1.JobEvent_Milestone:
			fmt.Printf("%s at %.0f s\n", k.Milestone.GetName(), k.Milestone.GetTimeS())
		case *soakv1.JobEvent_Failed:
			return fmt.Errorf("job failed: %s", k.Failed.GetReason())
		}
		return nil
	})
	if err != nil {
		log.Fatal(err)
	}

	files, err := c.Fetch(ctx, job.GetId(), "results/steel-disc")
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(files)
}
