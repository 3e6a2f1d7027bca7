package localfarm_test

import (
	"context"
	"errors"
	"io"
	"log/slog"
	"os"
	"path/filepath"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/protobuf/proto"

	"soakfarm/internal/localfarm"
	"soakfarm/pipeline"
	soakv1 "soakfarm/proto/soak/v1"
)

var quiet = slog.New(slog.NewTextHandler(io.Discard, nil))

func client(t testing.TB, farm *localfarm.Farm) soakv1.FarmServiceClient {
	t.Helper()
	conn, err := grpc.NewClient(farm.GRPCAddr(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return soakv1.NewFarmServiceClient(conn)
}

func closeFarm(t testing.TB, farm *localfarm.Farm) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	if err := farm.Close(ctx); err != nil {
		t.Error(err)
	}
}

func spec(name string) *soakv1.JobSpec {
	return &soakv1.JobSpec{
		Name:        name,
		Part:        &soakv1.Part{Shape: &soakv1.Part_Box{Box: &soakv1.Box{SizeM: []float64{0.1, 0.05, 0.02}}}},
		CellsAcross: proto.Uint32(4),
		Material: &soakv1.Material{
			DensityKgM3: 2700, ConductivityWMk: proto.Float64(167), SpecificHeatJKgk: proto.Float64(896),
		},
		InitialC: proto.Float64(180),
		Exposure: []*soakv1.Exposure{{Surfaces: "all", HWM2K: 10, FluidC: proto.Float64(20)}},
		EndS:     600,
	}
}

// trivialRunner writes one small file; it stands for a job whose solve
// costs nothing, so that what is measured or checked is the farm.
func trivialRunner(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
	if err := os.WriteFile(filepath.Join(outDir, "summary.json"), []byte(`{}`), 0o644); err != nil {
		return nil, err
	}
	return &soakv1.Summary{Name: spec.GetName()}, ctx.Err()
}

func waitEnd(ctx context.Context, c soakv1.FarmServiceClient, id string) error {
	stream, err := c.WatchJob(ctx, &soakv1.WatchJobRequest{JobId: id})
	if err != nil {
		return err
	}
	for {
		if _, err := stream.Recv(); err != nil {
			if errors.Is(err, io.EOF) {
				return nil
			}
			return err
		}
	}
}

// TestStateSurvivesFarmRestart closes the whole farm, NATS included, and
// starts it again on the same folder: finished jobs are still listed and a
// job queued before the restart runs after it.
func TestStateSurvivesFarmRestart(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	farm, err := localfarm.Start(t.Context(), localfarm.Config{DataDir: dir, Workers: 1, Runner: trivialRunner, Logger: quiet})
	if err != nil {
		t.Fatal(err)
	}
	c := client(t, farm)
	done, err := c.SubmitJob(t.Context(), &soakv1.SubmitJobRequest{Spec: spec("before"), ClientKey: "k1"})
	if err != nil {
		t.Fatal(err)
	}
	if err := waitEnd(t.Context(), c, done.GetJob().GetId()); err != nil {
		t.Fatal(err)
	}
	closeFarm(t, farm)

	// No workers: the job stays queued across the next restart.
	farm, err = localfarm.Start(t.Context(), localfarm.Config{DataDir: dir, Logger: quiet})
	if err != nil {
		t.Fatal(err)
	}
	c = client(t, farm)
	queued, err := c.SubmitJob(t.Context(), &soakv1.SubmitJobRequest{Spec: spec("queued")})
	if err != nil {
		t.Fatal(err)
	}
	closeFarm(t, farm)

	farm, err = localfarm.Start(t.Context(), localfarm.Config{DataDir: dir, Workers: 1, Runner: trivialRunner, Logger: quiet})
	if err != nil {
		t.Fatal(err)
	}
	defer closeFarm(t, farm)
	c = client(t, farm)
	again, err := c.SubmitJob(t.Context(), &soakv1.SubmitJobRequest{Spec: spec("before"), ClientKey: "k1"})
	if err != nil || !again.GetExisting() || again.GetJob().GetState() != soakv1.JobState_JOB_STATE_FINISHED {
		t.Errorf("resubmit after restarts: %v, %v; want the finished job", again, err)
	}
	if err := waitEnd(t.Context(), c, queued.GetJob().GetId()); err != nil {
		t.Fatal(err)
	}
	list, err := c.ListJobs(t.Context(), &soakv1.ListJobsRequest{States: []soakv1.JobState{soakv1.JobState_JOB_STATE_FINISHED}})
	if err != nil || len(list.GetJobs()) != 2 {
		t.Errorf("finished jobs after restarts: %d (%v), want 2", len(list.GetJobs()), err)
	}
}

func TestNATSListenerForRemoteWorkers(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name   string
		listen string
		want   bool
	}{
		{"in-process only", "", false},
		{"loopback port", "127.0.0.1:0", true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			farm, err := localfarm.Start(t.Context(), localfarm.Config{DataDir: t.TempDir(), NATSListen: tc.listen, Logger: quiet})
			if err != nil {
				t.Fatal(err)
			}
			defer closeFarm(t, farm)
			if got := farm.NATSURL() != ""; got != tc.want {
				t.Errorf("NATSURL() = %q with NATSListen %q", farm.NATSURL(), tc.listen)
			}
		})
	}
}

// inParallel calls fn(0..n-1) on at most width goroutines and returns the
// first error.
func inParallel(width, n int, fn func(i int) error) error {
	next := make(chan int)
	errs := make(chan error, n)
	var wg sync.WaitGroup
	for range width {
		wg.Go(func() {
			for i := range next {
				if err := fn(i); err != nil {
					errs <- err
				}
			}
		})
	}
	for i := range n {
		next <- i
	}
	close(next)
	wg.Wait()
	close(errs)
	return <-errs
}

// BenchmarkDispatch measures the farm's cost per job: 500 trivial jobs
// submitted over gRPC, run by two local workers of four slots each, and
// watched to their end, against calling the same runner directly in the
// same run. Reported: jobs/s through the farm, and farm time per job over
// direct time per job.
func BenchmarkDispatch(b *testing.B) {
	const jobs = 500
	farm, err := localfarm.Start(b.Context(), localfarm.Config{
		DataDir: b.TempDir(), Workers: 2, WorkerConcurrency: 4, Runner: trivialRunner, Logger: quiet,
	})
	if err != nil {
		b.Fatal(err)
	}
	defer closeFarm(b, farm)
	c := client(b, farm)
	var farmTime, directTime time.Duration
	for b.Loop() {
		start := time.Now()
		ids := make([]string, jobs)
		// Sixteen clients at a time, as a script pool would.
		if err := inParallel(16, jobs, func(i int) error {
			resp, err := c.SubmitJob(b.Context(), &soakv1.SubmitJobRequest{Spec: spec("bench")})
			ids[i] = resp.GetJob().GetId()
			return err
		}); err != nil {
			b.Fatal(err)
		}
		if err := inParallel(16, jobs, func(i int) error { return waitEnd(b.Context(), c, ids[i]) }); err != nil {
			b.Fatal(err)
		}
		farmTime += time.Since(start)

		start = time.Now()
		for range jobs {
			dir, err := os.MkdirTemp(b.TempDir(), "direct-")
			if err != nil {
				b.Fatal(err)
			}
			if _, err := trivialRunner(b.Context(), spec("bench"), dir, pipeline.Options{}); err != nil {
				b.Fatal(err)
			}
		}
		directTime += time.Since(start)
	}
	b.ReportMetric(float64(b.N*jobs)/farmTime.Seconds(), "jobs/s")
	b.ReportMetric(float64(b.N*jobs)/directTime.Seconds(), "direct-jobs/s")
	b.ReportMetric(farmTime.Seconds()/directTime.Seconds(), "farm/direct")
	b.ReportMetric(0, "ns/op")
}
