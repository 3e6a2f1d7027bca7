package worker_test

import (
	"bytes"
	"context"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	"soakfarm/internal/localfarm"
	"soakfarm/pipeline"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
	"soakfarm/worker"
)

// startFarm runs a one-process farm for a test and returns a client.
func startFarm(t *testing.T, cfg localfarm.Config) (*localfarm.Farm, soakv1.FarmServiceClient) {
	t.Helper()
	cfg.DataDir = t.TempDir()
	if cfg.Settings == (store.Settings{}) {
		cfg.Settings = store.DefaultSettings()
		cfg.Settings.AckWait = time.Second
	}
	farm, err := localfarm.Start(t.Context(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		if err := farm.Close(ctx); err != nil {
			t.Error(err)
		}
	})
	conn, err := grpc.NewClient(farm.GRPCAddr(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return farm, soakv1.NewFarmServiceClient(conn)
}

// sphere is a small real job: a 50 mm steel ball in a 600 °C furnace.
func sphere(name string) *soakv1.JobSpec {
	return &soakv1.JobSpec{
		Name:        name,
		Part:        &soakv1.Part{Shape: &soakv1.Part_Sphere{Sphere: &soakv1.Sphere{DiameterM: 0.05}}},
		CellsAcross: proto.Uint32(12),
		Material: &soakv1.Material{
			DensityKgM3: 7850, ConductivityWMk: proto.Float64(45), SpecificHeatJKgk: proto.Float64(480),
		},
		InitialC:   proto.Float64(20),
		Exposure:   []*soakv1.Exposure{{Surfaces: "all", HWM2K: 60, FluidC: proto.Float64(600)}},
		EndS:       300,
		Probes:     []*soakv1.Probe{{Name: "centre", AtM: []float64{0, 0, 0}}},
		Milestones: []*soakv1.Milestone{{Name: "centre-200", Probe: "centre", ReachesC: proto.Float64(200)}},
	}
}

func submit(t *testing.T, client soakv1.FarmServiceClient, spec *soakv1.JobSpec) string {
	t.Helper()
	resp, err := client.SubmitJob(t.Context(), &soakv1.SubmitJobRequest{Spec: spec})
	if err != nil {
		t.Fatal(err)
	}
	return resp.GetJob().GetId()
}

func watch(t *testing.T, client soakv1.FarmServiceClient, id string) []*soakv1.JobEvent {
	t.Helper()
	ctx, cancel := context.WithTimeout(t.Context(), 60*time.Second)
	defer cancel()
	stream, err := client.WatchJob(ctx, &soakv1.WatchJobRequest{JobId: id})
	if err != nil {
		t.Fatal(err)
	}
	var events []*soakv1.JobEvent
	for {
		resp, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return events
		}
		if err != nil {
			t.Fatalf("watch %s: %v", id, err)
		}
		events = append(events, resp.GetEvent())
	}
}

func fetch(t *testing.T, client soakv1.FarmServiceClient, id, name string) []byte {
	t.Helper()
	stream, err := client.FetchArtifact(t.Context(), &soakv1.FetchArtifactRequest{JobId: id, Name: name})
	if err != nil {
		t.Fatal(err)
	}
	var data bytes.Buffer
	for {
		resp, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return data.Bytes()
		}
		if err != nil {
			t.Fatalf("fetch %s: %v", name, err)
		}
		data.Write(resp.GetChunk())
	}
}

// TestFarmResultMatchesLocalRun runs a real job through the farm and the
// same spec through pipeline.Run here: the farm only moves specs, events
// and files, so both results agree.
func TestFarmResultMatchesLocalRun(t *testing.T) {
	t.Parallel()
	_, client := startFarm(t, localfarm.Config{Workers: 1})
	spec := sphere("farm-vs-local")
	id := submit(t, client, spec)
	events := watch(t, client, id)

	var progress []float64
	milestones := 0
	for _, ev := range events {
		if p := ev.GetProgress(); p != nil {
			progress = append(progress, p.GetSimTimeS())
		}
		if ev.GetMilestone().GetName() == "centre-200" {
			milestones++
		}
	}
	if len(progress) == 0 || !slices.IsSorted(progress) || milestones != 1 {
		t.Errorf("progress times %v, %d milestone events; want rising progress and one milestone", progress, milestones)
	}
	finished := events[len(events)-1].GetFinished()
	if finished == nil {
		t.Fatalf("last event %v, want finished", events[len(events)-1])
	}

	localDir := t.TempDir()
	local, err := pipeline.Run(t.Context(), spec, localDir, pipeline.Options{})
	if err != nil {
		t.Fatal(err)
	}
	localFiles, err := os.ReadDir(localDir)
	if err != nil {
		t.Fatal(err)
	}
	var want, got []string
	for _, f := range localFiles {
		want = append(want, f.Name())
	}
	for _, a := range finished.GetArtifacts() {
		got = append(got, a.GetName())
	}
	if !slices.Equal(got, want) {
		t.Errorf("farm artifacts %v, local files %v", got, want)
	}
	farmSummary := &soakv1.Summary{}
	if err := (protojson.UnmarshalOptions{DiscardUnknown: true}).Unmarshal(fetch(t, client, id, "summary.json"), farmSummary); err != nil {
		t.Fatalf("summary.json: %v", err)
	}
	for _, s := range []*soakv1.Summary{farmSummary, finished.GetSummary()} {
		if s.GetSteps() != local.GetSteps() || math.Abs(s.GetFinalMeanC()-local.GetFinalMeanC()) > 1e-9*math.Abs(local.GetFinalMeanC()) {
			t.Errorf("farm steps %d, mean %.12g °C; local %d, %.12g °C", s.GetSteps(), s.GetFinalMeanC(), local.GetSteps(), local.GetFinalMeanC())
		}
	}
}

func TestConcurrencyBoundsJobsInHand(t *testing.T) {
	t.Parallel()
	var running, peak atomic.Int32
	release := make(chan struct{})
	runner := func(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
		n := running.Add(1)
		defer running.Add(-1)
		for {
			p := peak.Load()
			if n <= p || peak.CompareAndSwap(p, n) {
				break
			}
		}
		select {
		case <-release:
			return &soakv1.Summary{}, nil
		case <-ctx.Done():
			return nil, ctx.Err()
		}
	}
	_, client := startFarm(t, localfarm.Config{Workers: 1, WorkerConcurrency: 2, Runner: runner})
	var ids []string
	for range 5 {
		ids = append(ids, submit(t, client, sphere("wait")))
	}
	deadline := time.Now().Add(10 * time.Second)
	for running.Load() < 2 && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	time.Sleep(100 * time.Millisecond) // room for a third job to start, were it allowed
	list, err := client.ListJobs(t.Context(), &soakv1.ListJobsRequest{States: []soakv1.JobState{soakv1.JobState_JOB_STATE_RUNNING}})
	if err != nil {
		t.Fatal(err)
	}
	if running.Load() != 2 || len(list.GetJobs()) != 2 {
		t.Errorf("%d runs in progress, %d jobs running; want 2 and 2", running.Load(), len(list.GetJobs()))
	}
	close(release)
	for _, id := range ids {
		watch(t, client, id)
	}
	if peak.Load() != 2 {
		t.Errorf("peak of %d jobs at once, want 2", peak.Load())
	}
}

func TestStoppedWorkerHandsJobBack(t *testing.T) {
	t.Parallel()
	farm, client := startFarm(t, localfarm.Config{})
	started := make(chan struct{}, 1)
	var stoppedCause error
	var mu sync.Mutex
	blocking := func(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
		started <- struct{}{}
		<-ctx.Done()
		mu.Lock()
		stoppedCause = context.Cause(ctx)
		mu.Unlock()
		return nil, ctx.Err()
	}
	first := worker.New(farm.Conn(), worker.Config{Name: "first", Runner: blocking, WorkDir: t.TempDir()})
	ctx, stop := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- first.Run(ctx) }()

	id := submit(t, client, sphere("handed-back"))
	<-started
	stop()
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	mu.Lock()
	if stoppedCause == nil {
		t.Error("the run's context was not cancelled when its worker stopped")
	}
	mu.Unlock()
	resp, err := client.GetJob(t.Context(), &soakv1.GetJobRequest{JobId: id})
	if err != nil {
		t.Fatal(err)
	}
	if job := resp.GetJob(); job.GetState() != soakv1.JobState_JOB_STATE_QUEUED || job.GetAttempts()[0].GetError() != "worker shut down" {
		t.Fatalf("job after its worker stopped: %v", job)
	}

	second := worker.New(farm.Conn(), worker.Config{Name: "second", WorkDir: t.TempDir(),
		Runner: func(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
			return &soakv1.Summary{}, os.WriteFile(filepath.Join(outDir, "summary.json"), []byte("{}"), 0o644)
		}})
	ctx2, stop2 := context.WithCancel(context.Background())
	defer stop2()
	go second.Run(ctx2)
	watch(t, client, id)
	resp, err = client.GetJob(t.Context(), &soakv1.GetJobRequest{JobId: id})
	if err != nil {
		t.Fatal(err)
	}
	attempts := resp.GetJob().GetAttempts()
	if resp.GetJob().GetState() != soakv1.JobState_JOB_STATE_FINISHED || len(attempts) != 2 || attempts[1].GetWorker() != "second" {
		t.Errorf("job after the second worker: %v", resp.GetJob())
	}
}
