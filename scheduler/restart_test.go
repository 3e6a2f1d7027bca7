package scheduler_test

import (
	"context"
	"os"
	"path/filepath"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"soakfarm/pipeline"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/worker"
)

func writeFile(dir, name string, data []byte) error {
	return os.WriteFile(filepath.Join(dir, name), data, 0o644)
}

func TestSchedulerRestartKeepsJobsAndWatchResumes(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	first, client := startScheduler(t, nc, testSettings())
	release := make(chan struct{})
	// The runner reports progress until released.
	runner := func(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
		tick := time.NewTicker(10 * time.Millisecond)
		defer tick.Stop()
		for step := uint32(1); ; step++ {
			select {
			case <-ctx.Done():
				return nil, ctx.Err()
			case <-release:
				return &soakv1.Summary{Name: spec.GetName()}, writeFile(outDir, "summary.json", []byte("{}"))
			case <-tick.C:
				opt.Progress(&soakv1.JobProgress{Step: step})
			}
		}
	}
	startWorker(t, nc, worker.Config{Name: "w1", Concurrency: 2, Runner: runner, ProgressInterval: time.Nanosecond})
	a := submit(t, client, sphereSpec("a"), "")
	b := submit(t, client, sphereSpec("b"), "")

	stream, err := client.WatchJob(t.Context(), &soakv1.WatchJobRequest{JobId: a.GetId()})
	if err != nil {
		t.Fatal(err)
	}
	var seen []*soakv1.JobEvent
	for len(seen) < 5 {
		resp, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		seen = append(seen, resp.GetEvent())
	}
	ctx, cancel := context.WithTimeout(t.Context(), 5*time.Second)
	defer cancel()
	if err := first.Close(ctx); err != nil {
		t.Fatal(err)
	}
	// The open watch ends with UNAVAILABLE, after any events in flight.
	for {
		resp, err := stream.Recv()
		if err != nil {
			if status.Code(err) != codes.Unavailable {
				t.Errorf("watch across the shutdown ended with %v, want Unavailable", err)
			}
			break
		}
		seen = append(seen, resp.GetEvent())
	}

	_, client = startScheduler(t, nc, testSettings())
	for _, id := range []string{a.GetId(), b.GetId()} {
		if got := getJob(t, client, id); got.GetState() != soakv1.JobState_JOB_STATE_RUNNING {
			t.Errorf("job %s after the restart: %v, want running", id, got.GetState())
		}
	}
	// Let more events pass while nobody watches, then finish.
	time.Sleep(50 * time.Millisecond)
	close(release)
	rest, err := watchAll(t.Context(), client, a.GetId(), seen[len(seen)-1].GetSequence())
	if err != nil {
		t.Fatal(err)
	}
	all := append(seen, rest...)
	checkSequence(t, all, 1)
	if all[len(all)-1].GetFinished() == nil {
		t.Errorf("last event %v, want finished", kinds(all[len(all)-1:]))
	}
	if _, err := watchAll(t.Context(), client, b.GetId(), 0); err != nil {
		t.Fatal(err)
	}
	if got := getJob(t, client, b.GetId()); got.GetState() != soakv1.JobState_JOB_STATE_FINISHED {
		t.Errorf("job b: %v, want finished", got.GetState())
	}
}
