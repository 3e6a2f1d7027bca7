package farmclient_test

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"net"
	"os"
	"path/filepath"
	"slices"
	"sync"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"soakfarm/farmclient"
	soakv1 "soakfarm/proto/soak/v1"
)

// scriptedFarm is a FarmService whose answers the test scripts, to check
// the client's own logic (resume, checks) in isolation; the end-to-end
// tests in internal/cli run the client against the real scheduler.
type scriptedFarm struct {
	soakv1.UnimplementedFarmServiceServer
	events []*soakv1.JobEvent
	// dropAfter[i] is how many events the i-th WatchJob call sends before
	// failing with Unavailable; calls beyond the slice run to the end.
	dropAfter []int
	files     map[string][]byte
	recorded  []*soakv1.Artifact

	mu         sync.Mutex
	watchCalls int
	afterAsked []uint64
}

func (f *scriptedFarm) SubmitJob(_ context.Context, req *soakv1.SubmitJobRequest) (*soakv1.SubmitJobResponse, error) {
	if req.GetSpec().GetEndS() <= 0 {
		st, err := status.New(codes.InvalidArgument, "spec has problems").WithDetails(&errdetails.BadRequest{
			FieldViolations: []*errdetails.BadRequest_FieldViolation{
				{Field: "end_s", Description: "must be > 0, got 0"},
				{Field: "exposure[1].emissivity", Description: "must be in [0, 1], got 1.4"},
			},
		})
		if err != nil {
			return nil, err
		}
		return nil, st.Err()
	}
	return &soakv1.SubmitJobResponse{Job: &soakv1.Job{Id: "j1", Spec: req.GetSpec()}}, nil
}

func (f *scriptedFarm) WatchJob(req *soakv1.WatchJobRequest, stream grpc.ServerStreamingServer[soakv1.WatchJobResponse]) error {
	f.mu.Lock()
	call := f.watchCalls
	f.watchCalls++
	f.afterAsked = append(f.afterAsked, req.GetAfterSequence())
	f.mu.Unlock()
	if req.GetJobId() != "j1" {
		return status.Error(codes.NotFound, "no such job")
	}
	limit := len(f.events)
	if call < len(f.dropAfter) {
		limit = f.dropAfter[call]
	}
	sent := 0
	for _, ev := range f.events {
		if ev.GetSequence() <= req.GetAfterSequence() {
			continue
		}
		if sent == limit {
			return status.Error(codes.Unavailable, "scheduler restarting")
		}
		if err := stream.Send(&soakv1.WatchJobResponse{Event: ev}); err != nil {
			return err
		}
		sent++
	}
	return nil
}

// watchLog returns the after_sequence of every WatchJob call so far.
func (f *scriptedFarm) watchLog() []uint64 {
	f.mu.Lock()
	defer f.mu.Unlock()
	return slices.Clone(f.afterAsked)
}

func (f *scriptedFarm) GetJob(_ context.Context, req *soakv1.GetJobRequest) (*soakv1.GetJobResponse, error) {
	state := soakv1.JobState_JOB_STATE_FINISHED
	if req.GetJobId() == "running" {
		state = soakv1.JobState_JOB_STATE_RUNNING
	}
	return &soakv1.GetJobResponse{Job: &soakv1.Job{Id: req.GetJobId(), State: state, Artifacts: f.recorded}}, nil
}

func (f *scriptedFarm) FetchArtifact(req *soakv1.FetchArtifactRequest, stream grpc.ServerStreamingServer[soakv1.FetchArtifactResponse]) error {
	data, ok := f.files[req.GetName()]
	if !ok {
		return status.Error(codes.NotFound, "no such file")
	}
	// Small chunks so a file takes several messages.
	for off := 0; off < len(data); off += 7 {
		if err := stream.Send(&soakv1.FetchArtifactResponse{Chunk: data[off:min(off+7, len(data))]}); err != nil {
			return err
		}
	}
	return nil
}

// startFarm serves farm on a loopback port and returns a client of it.
func startFarm(t *testing.T, farm *scriptedFarm, opts ...farmclient.Option) *farmclient.Client {
	t.Helper()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := grpc.NewServer()
	soakv1.RegisterFarmServiceServer(srv, farm)
	go srv.Serve(lis)
	t.Cleanup(srv.Stop)
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	c, err := farmclient.Dial(ctx, lis.Addr().String(), opts...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

func progressEvent(seq uint64, simTime float64) *soakv1.JobEvent {
	return &soakv1.JobEvent{Sequence: seq, Kind: &soakv1.JobEvent_Progress{Progress: &soakv1.JobProgress{SimTimeS: simTime, EndS: 100}}}
}

func jobEvents() []*soakv1.JobEvent {
	evs := []*soakv1.JobEvent{
		{Sequence: 1, Kind: &soakv1.JobEvent_Queued{Queued: &soakv1.JobQueued{}}},
		{Sequence: 2, Kind: &soakv1.JobEvent_Started{Started: &soakv1.JobStarted{Worker: "w1", Attempt: 1}}},
	}
	for i := uint64(3); i <= 8; i++ {
		evs = append(evs, progressEvent(i, float64(i)*10))
	}
	return append(evs, &soakv1.JobEvent{Sequence: 9, Kind: &soakv1.JobEvent_Finished{Finished: &soakv1.JobFinished{}}})
}

var fastRetry = farmclient.WithRetryPolicy(farmclient.RetryPolicy{MaxAttempts: 3, FirstDelay: time.Millisecond, MaxDelay: 10 * time.Millisecond})

func TestWatchResumesAfterDroppedStreams(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name      string
		afterSeq  uint64
		dropAfter []int
		wantAsked []uint64
	}{
		{name: "no drop", afterSeq: 0, dropAfter: nil, wantAsked: []uint64{0}},
		{name: "one drop", afterSeq: 0, dropAfter: []int{3}, wantAsked: []uint64{0, 3}},
		// Drops without progress count towards MaxAttempts (3) but the
		// events in between reset the count.
		{name: "repeated drops", afterSeq: 0, dropAfter: []int{2, 0, 0, 4, 0, 0}, wantAsked: []uint64{0, 2, 2, 2, 6, 6, 6}},
		{name: "resume from a given sequence", afterSeq: 5, dropAfter: []int{1}, wantAsked: []uint64{5, 6}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			farm := &scriptedFarm{events: jobEvents(), dropAfter: tc.dropAfter}
			c := startFarm(t, farm, fastRetry)
			var seen []uint64
			err := c.Watch(context.Background(), "j1", tc.afterSeq, func(ev *soakv1.JobEvent) error {
				seen = append(seen, ev.GetSequence())
				return nil
			})
			if err != nil {
				t.Fatalf("Watch: %v", err)
			}
			var want []uint64
			for s := tc.afterSeq + 1; s <= 9; s++ {
				want = append(want, s)
			}
			if !slices.Equal(seen, want) {
				t.Errorf("events seen %v, want each of %v once in order", seen, want)
			}
			if asked := farm.watchLog(); !slices.Equal(asked, tc.wantAsked) {
				t.Errorf("after_sequence asked %v, want %v", asked, tc.wantAsked)
			}
		})
	}
}

func TestWatchGivesUpAfterMaxAttempts(t *testing.T) {
	t.Parallel()
	farm := &scriptedFarm{events: jobEvents(), dropAfter: []int{0, 0, 0, 0, 0, 0}}
	c := startFarm(t, farm, fastRetry)
	err := c.Watch(context.Background(), "j1", 0, func(*soakv1.JobEvent) error { return nil })
	if status.Code(err) != codes.Unavailable {
		t.Fatalf("Watch error = %v, want the last Unavailable after giving up", err)
	}
	if n := len(farm.watchLog()); n != 4 {
		t.Errorf("%d stream attempts, want 1 + 3 retries", n)
	}
}

func TestWatchStopsOnPermanentErrors(t *testing.T) {
	t.Parallel()
	farm := &scriptedFarm{events: jobEvents()}
	c := startFarm(t, farm, fastRetry)

	err := c.Watch(context.Background(), "nope", 0, func(*soakv1.JobEvent) error { return nil })
	if n := len(farm.watchLog()); status.Code(err) != codes.NotFound || n != 1 {
		t.Errorf("unknown job: err %v after %d calls, want NotFound after 1", err, n)
	}

	stop := errors.New("seen enough")
	err = c.Watch(context.Background(), "j1", 0, func(ev *soakv1.JobEvent) error {
		if ev.GetSequence() == 4 {
			return stop
		}
		return nil
	})
	if err != stop {
		t.Errorf("callback error: Watch returned %v, want the callback's error unchanged", err)
	}
}

func TestFieldViolations(t *testing.T) {
	t.Parallel()
	c := startFarm(t, &scriptedFarm{})
	_, _, err := c.Submit(context.Background(), &soakv1.JobSpec{Name: "bad"}, "")
	got := farmclient.FieldViolations(err)
	want := []farmclient.FieldViolation{
		{Field: "end_s", Description: "must be > 0, got 0"},
		{Field: "exposure[1].emissivity", Description: "must be in [0, 1], got 1.4"},
	}
	if !slices.Equal(got, want) {
		t.Errorf("FieldViolations = %v, want %v", got, want)
	}
	if farmclient.FieldViolations(errors.New("plain")) != nil {
		t.Error("a plain error has no field violations")
	}
}

func artifactOf(name string, data []byte) *soakv1.Artifact {
	sum := sha256.Sum256(data)
	return &soakv1.Artifact{Name: name, SizeBytes: uint64(len(data)), Sha256: hex.EncodeToString(sum[:])}
}

func TestFetch(t *testing.T) {
	t.Parallel()
	probes := []byte("time_s,core_c\n0,20\n10,55.5\n")
	summary := []byte(`{"name":"x"}`)
	snapshot := []byte("<VTKFile/>")
	good := []*soakv1.Artifact{artifactOf("probes.csv", probes), artifactOf("summary.json", summary), artifactOf("snapshots/t10.vti", snapshot)}
	files := map[string][]byte{"probes.csv": probes, "summary.json": summary, "snapshots/t10.vti": snapshot}

	tests := []struct {
		name     string
		job      string
		recorded []*soakv1.Artifact
		wantErr  error
	}{
		{name: "all files", job: "j1", recorded: good},
		{name: "size differs", job: "j1", recorded: []*soakv1.Artifact{{Name: "probes.csv", SizeBytes: 3, Sha256: good[0].Sha256}}, wantErr: farmclient.ErrArtifactMismatch},
		{name: "sha differs", job: "j1", recorded: []*soakv1.Artifact{{Name: "summary.json", SizeBytes: good[1].SizeBytes, Sha256: good[0].Sha256}}, wantErr: farmclient.ErrArtifactMismatch},
		{name: "not finished", job: "running", recorded: good, wantErr: farmclient.ErrNotFinished},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			c := startFarm(t, &scriptedFarm{files: files, recorded: tc.recorded})
			out := t.TempDir()
			paths, err := c.Fetch(context.Background(), tc.job, out)
			if tc.wantErr != nil {
				if !errors.Is(err, tc.wantErr) {
					t.Fatalf("Fetch error = %v, want %v", err, tc.wantErr)
				}
				left, _ := filepath.Glob(filepath.Join(out, "*"))
				if len(left) != 0 {
					t.Errorf("files left after a failed fetch: %v", left)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if len(paths) != len(tc.recorded) {
				t.Fatalf("paths %v, want %d", paths, len(tc.recorded))
			}
			for i, a := range tc.recorded {
				got, err := os.ReadFile(paths[i])
				if err != nil {
					t.Fatal(err)
				}
				if want := files[a.GetName()]; string(got) != string(want) || paths[i] != filepath.Join(out, filepath.FromSlash(a.GetName())) {
					t.Errorf("%s: wrote %q to %s", a.GetName(), got, paths[i])
				}
			}
		})
	}
}

func TestFetchRefusesPathsOutsideOutDir(t *testing.T) {
	t.Parallel()
	data := []byte("x")
	c := startFarm(t, &scriptedFarm{files: map[string][]byte{"../evil": data}, recorded: []*soakv1.Artifact{artifactOf("../evil", data)}})
	if _, err := c.Fetch(context.Background(), "j1", t.TempDir()); err == nil {
		t.Error("an artifact named ../evil was accepted")
	}
}

func TestDialReportsNothingListening(t *testing.T) {
	t.Parallel()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := lis.Addr().String()
	lis.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	if _, err := farmclient.Dial(ctx, addr); !errors.Is(err, farmclient.ErrUnreachable) {
		t.Errorf("Dial to a closed port: %v, want ErrUnreachable", err)
	}
	if _, err := farmclient.Dial(ctx, "no-port"); err == nil {
		t.Error("Dial accepted an address without a port")
	}
}
