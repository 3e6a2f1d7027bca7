package scheduler_test

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"soakfarm/pipeline"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
	"soakfarm/worker"
)

func TestSubmitWatchFetch(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	_, client := startScheduler(t, nc, testSettings())
	startWorker(t, nc, worker.Config{Name: "w1", Runner: quickRunner, ProgressInterval: time.Nanosecond})

	job := submit(t, client, sphereSpec("ball"), "")
	if job.GetState() != soakv1.JobState_JOB_STATE_QUEUED || !store.ValidJobID(job.GetId()) {
		t.Fatalf("submitted job = %v", job)
	}
	events, err := watchAll(t.Context(), client, job.GetId(), 0)
	if err != nil {
		t.Fatalf("watch: %v", err)
	}
	checkSequence(t, events, 1)
	// queued, started, 3 progress, milestone, finished.
	wantKinds := []string{"Queued", "Started", "Progress", "Progress", "Progress", "Milestone", "Finished"}
	if len(events) != len(wantKinds) {
		t.Fatalf("events %v, want kinds %v", kinds(events), wantKinds)
	}
	for i, ev := range events {
		if got := fmt.Sprintf("%T", ev.GetKind()); !strings.HasSuffix(got, "_"+wantKinds[i]) {
			t.Errorf("event %d is %s, want %s", i+1, got, wantKinds[i])
		}
	}
	if s := events[1].GetStarted(); s.GetWorker() != "w1" || s.GetAttempt() != 1 {
		t.Errorf("started = %v, want worker w1 attempt 1", s)
	}

	// A watch of a finished job replays and ends; one after the last
	// event ends at once.
	replay, err := watchAll(t.Context(), client, job.GetId(), 4)
	if err != nil {
		t.Fatal(err)
	}
	checkSequence(t, replay, 5)
	if len(replay) != 3 {
		t.Errorf("replay after 4 = %v, want 3 events", kinds(replay))
	}
	if rest, err := watchAll(t.Context(), client, job.GetId(), 7); err != nil || len(rest) != 0 {
		t.Errorf("watch after the final event = %v, %v; want no events", kinds(rest), err)
	}

	final := getJob(t, client, job.GetId())
	if final.GetState() != soakv1.JobState_JOB_STATE_FINISHED || final.GetSummary().GetName() != "ball" ||
		len(final.GetAttempts()) != 1 || final.GetAttempts()[0].GetEndTime() == nil || final.GetEndTime() == nil {
		t.Fatalf("final record = %v", final)
	}
	if !proto.Equal(events[6].GetFinished().GetSummary(), final.GetSummary()) {
		t.Errorf("finished event summary differs from the record")
	}
	if len(final.GetArtifacts()) != len(resultFiles) {
		t.Fatalf("artifacts = %v, want %d", final.GetArtifacts(), len(resultFiles))
	}
	for _, a := range final.GetArtifacts() {
		want := resultFiles[a.GetName()]
		data, info := fetch(t, client, job.GetId(), a.GetName())
		sum := sha256.Sum256([]byte(want))
		if string(data) != want || info.GetSizeBytes() != uint64(len(want)) || info.GetSha256() != hex.EncodeToString(sum[:]) {
			t.Errorf("fetched %s = %q (%v), want %q", a.GetName(), data, info, want)
		}
	}
	_, err = fetchErr(t, client, job.GetId(), "missing.csv")
	if status.Code(err) != codes.NotFound {
		t.Errorf("fetch of an unknown file: %v, want NotFound", err)
	}
}

func fetch(t *testing.T, client soakv1.FarmServiceClient, id, name string) ([]byte, *soakv1.Artifact) {
	t.Helper()
	resps, err := fetchErr(t, client, id, name)
	if err != nil {
		t.Fatalf("fetch %s: %v", name, err)
	}
	var data bytes.Buffer
	for _, r := range resps {
		data.Write(r.GetChunk())
	}
	return data.Bytes(), resps[0].GetArtifact()
}

func fetchErr(t *testing.T, client soakv1.FarmServiceClient, id, name string) ([]*soakv1.FetchArtifactResponse, error) {
	stream, err := client.FetchArtifact(t.Context(), &soakv1.FetchArtifactRequest{JobId: id, Name: name})
	if err != nil {
		return nil, err
	}
	var out []*soakv1.FetchArtifactResponse
	for {
		r, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return out, nil
		}
		if err != nil {
			return nil, err
		}
		out = append(out, r)
	}
}

func TestFetchLargeFileInChunks(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	_, client := startScheduler(t, nc, testSettings())
	big := bytes.Repeat([]byte("0123456789abcdef"), 40_000) // 640 000 bytes
	startWorker(t, nc, worker.Config{Name: "w1", Runner: func(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
		return &soakv1.Summary{}, writeFile(outDir, "snapshot.vti", big)
	}})
	job := submit(t, client, sphereSpec("big"), "")
	if _, err := watchAll(t.Context(), client, job.GetId(), 0); err != nil {
		t.Fatal(err)
	}
	resps, err := fetchErr(t, client, job.GetId(), "snapshot.vti")
	if err != nil {
		t.Fatal(err)
	}
	var data []byte
	for _, r := range resps {
		if len(r.GetChunk()) > 256<<10 {
			t.Errorf("chunk of %d bytes, want at most 256 KiB", len(r.GetChunk()))
		}
		data = append(data, r.GetChunk()...)
	}
	if len(resps) != 3 || !bytes.Equal(data, big) {
		t.Errorf("got %d chunks, %d bytes; want 3 chunks of the %d bytes written", len(resps), len(data), len(big))
	}
}

func TestSubmitWithSameClientKeyReturnsSameJob(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	_, client := startScheduler(t, nc, testSettings())

	first := submit(t, client, sphereSpec("a"), "batch-7/shaft")
	again, err := client.SubmitJob(t.Context(), &soakv1.SubmitJobRequest{Spec: sphereSpec("a"), ClientKey: "batch-7/shaft"})
	if err != nil {
		t.Fatal(err)
	}
	if !again.GetExisting() || again.GetJob().GetId() != first.GetId() {
		t.Errorf("resubmit = %s existing=%v, want %s existing=true", again.GetJob().GetId(), again.GetExisting(), first.GetId())
	}
	other := submit(t, client, sphereSpec("a"), "batch-7/flange")
	if other.GetId() == first.GetId() {
		t.Error("a different client key got the same job")
	}

	// Concurrent retries: one job, made by exactly one of them.
	const n = 6
	var wg sync.WaitGroup
	resps := make([]*soakv1.SubmitJobResponse, n)
	for i := range n {
		wg.Go(func() {
			r, err := client.SubmitJob(t.Context(), &soakv1.SubmitJobRequest{Spec: sphereSpec("c"), ClientKey: "concurrent"})
			if err != nil {
				t.Error(err)
			}
			resps[i] = r
		})
	}
	wg.Wait()
	made := 0
	for _, r := range resps {
		if r.GetJob().GetId() != resps[0].GetJob().GetId() {
			t.Errorf("concurrent submits gave jobs %s and %s", r.GetJob().GetId(), resps[0].GetJob().GetId())
		}
		if !r.GetExisting() {
			made++
		}
	}
	if made != 1 {
		t.Errorf("%d of %d concurrent submits report a new job, want 1", made, n)
	}
	list, err := client.ListJobs(t.Context(), &soakv1.ListJobsRequest{})
	if err != nil || len(list.GetJobs()) != 3 {
		t.Errorf("jobs after the submits: %d (%v), want 3", len(list.GetJobs()), err)
	}
}

func TestInvalidSpecIsRejectedWithFieldViolations(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	_, client := startScheduler(t, nc, testSettings())
	var ran atomic.Int32
	startWorker(t, nc, worker.Config{Name: "w1", Runner: func(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
		ran.Add(1)
		return &soakv1.Summary{}, nil
	}})

	bad := sphereSpec("bad")
	bad.EndS = 0
	bad.Exposure[0].Emissivity = proto.Float64(1.4)
	tests := []struct {
		name       string
		spec       *soakv1.JobSpec
		wantFields []string
	}{
		{"two problems", bad, []string{"end_s", "exposure[0].emissivity"}},
		{"no spec", nil, []string{"spec"}},
	}
	for _, tc := range tests {
		_, err := client.SubmitJob(t.Context(), &soakv1.SubmitJobRequest{Spec: tc.spec})
		st := status.Convert(err)
		if st.Code() != codes.InvalidArgument {
			t.Errorf("%s: %v, want InvalidArgument", tc.name, err)
			continue
		}
		var fields []string
		for _, d := range st.Details() {
			if br, ok := d.(*errdetails.BadRequest); ok {
				for _, v := range br.GetFieldViolations() {
					fields = append(fields, v.GetField())
					if v.GetDescription() == "" {
						t.Errorf("%s: violation of %s has no description", tc.name, v.GetField())
					}
				}
			}
		}
		for _, f := range tc.wantFields {
			if !slices.Contains(fields, f) {
				t.Errorf("%s: violations %v lack %s", tc.name, fields, f)
			}
		}
	}
	// A good job submitted after the bad ones runs; the bad ones never
	// reached the queue.
	good := submit(t, client, sphereSpec("good"), "")
	if _, err := watchAll(t.Context(), client, good.GetId(), 0); err != nil {
		t.Fatal(err)
	}
	if ran.Load() != 1 {
		t.Errorf("runner called %d times, want 1 (the good job)", ran.Load())
	}
	list, err := client.ListJobs(t.Context(), &soakv1.ListJobsRequest{})
	if err != nil || len(list.GetJobs()) != 1 {
		t.Errorf("jobs = %d (%v), want only the good one", len(list.GetJobs()), err)
	}
}

// blockingRunner reports each start on started and blocks until its
// context ends, then reports how long after cancelAt that was.
type blockingRunner struct {
	started chan string
	stopped chan error
}

func newBlockingRunner() *blockingRunner {
	return &blockingRunner{started: make(chan string, 10), stopped: make(chan error, 10)}
}

func (b *blockingRunner) run(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
	b.started <- spec.GetName()
	<-ctx.Done()
	b.stopped <- context.Cause(ctx)
	return nil, ctx.Err()
}

func TestCancelRunningJob(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	// A long acknowledgement wait: the heartbeat's record check comes
	// too late, so the cancel can only arrive by its notice.
	settings := testSettings()
	settings.AckWait = 30 * time.Second
	_, client := startScheduler(t, nc, settings)
	runner := newBlockingRunner()
	startWorker(t, nc, worker.Config{Name: "w1", Runner: runner.run})

	job := submit(t, client, sphereSpec("long"), "")
	<-runner.started
	resp, err := client.CancelJob(t.Context(), &soakv1.CancelJobRequest{JobId: job.GetId(), Reason: "wrong furnace"})
	if err != nil {
		t.Fatal(err)
	}
	if !resp.GetJob().GetCancelRequested() {
		t.Errorf("cancel response = %v, want cancel_requested", resp.GetJob())
	}
	// The requirement is that a cancel reaches the computation within a
	// second.
	select {
	case <-runner.stopped:
	case <-time.After(time.Second):
		t.Fatal("runner's context not cancelled within a second of the cancel")
	}
	events, err := watchAll(t.Context(), client, job.GetId(), 0)
	if err != nil {
		t.Fatal(err)
	}
	last := events[len(events)-1]
	if last.GetCancelled().GetReason() != "wrong furnace" {
		t.Errorf("last event = %v, want cancelled with the reason", last)
	}
	final := getJob(t, client, job.GetId())
	if final.GetState() != soakv1.JobState_JOB_STATE_CANCELLED || final.GetAttempts()[0].GetEndTime() == nil {
		t.Errorf("record = %v, want cancelled with its attempt closed", final)
	}
	// Cancelling an ended job changes nothing.
	again, err := client.CancelJob(t.Context(), &soakv1.CancelJobRequest{JobId: job.GetId()})
	if err != nil || again.GetJob().GetState() != soakv1.JobState_JOB_STATE_CANCELLED {
		t.Errorf("second cancel = %v, %v", again.GetJob(), err)
	}
}

func TestCancelQueuedJobNeverRuns(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	_, client := startScheduler(t, nc, testSettings())

	job := submit(t, client, sphereSpec("queued"), "")
	resp, err := client.CancelJob(t.Context(), &soakv1.CancelJobRequest{JobId: job.GetId()})
	if err != nil {
		t.Fatal(err)
	}
	if resp.GetJob().GetState() != soakv1.JobState_JOB_STATE_CANCELLED {
		t.Fatalf("queued job after cancel: %v", resp.GetJob().GetState())
	}
	events, err := watchAll(t.Context(), client, job.GetId(), 0)
	if err != nil || len(events) != 2 || events[1].GetCancelled() == nil {
		t.Fatalf("events = %v, %v; want queued, cancelled", kinds(events), err)
	}

	var ran atomic.Int32
	startWorker(t, nc, worker.Config{Name: "w1", Runner: func(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
		ran.Add(1)
		return &soakv1.Summary{}, nil
	}})
	// The worker takes the queue message, sees the ended record and drops
	// the message without running.
	queue, err := nc.JetStream()
	if err != nil {
		t.Fatal(err)
	}
	waitFor(t, "the queue to empty", func() bool {
		info, err := queue.StreamInfo(store.QueueStream)
		return err == nil && info.State.Msgs == 0
	})
	if ran.Load() != 0 {
		t.Errorf("a job cancelled while queued ran %d times", ran.Load())
	}
}

func TestJobFailingEveryDeliveryFailsWithEachReason(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	_, client := startScheduler(t, nc, testSettings())
	var calls atomic.Int32
	startWorker(t, nc, worker.Config{Name: "w1", Runner: func(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
		return nil, fmt.Errorf("solver diverged on try %d", calls.Add(1))
	}})

	job := submit(t, client, sphereSpec("doomed"), "")
	events, err := watchAll(t.Context(), client, job.GetId(), 0)
	if err != nil {
		t.Fatal(err)
	}
	checkSequence(t, events, 1)
	final := getJob(t, client, job.GetId())
	maxDeliver := testSettings().MaxDeliver
	if final.GetState() != soakv1.JobState_JOB_STATE_FAILED || len(final.GetAttempts()) != maxDeliver || int(calls.Load()) != maxDeliver {
		t.Fatalf("record %v after %d runs, want failed after %d attempts", final, calls.Load(), maxDeliver)
	}
	for i, a := range final.GetAttempts() {
		reason := fmt.Sprintf("solver diverged on try %d", i+1)
		if a.GetError() != reason || !strings.Contains(final.GetFailureReason(), reason) {
			t.Errorf("attempt %d error %q, failure reason %q; want both to hold %q", i+1, a.GetError(), final.GetFailureReason(), reason)
		}
	}
	if got := events[len(events)-1].GetFailed().GetReason(); got != final.GetFailureReason() {
		t.Errorf("failed event reason %q, want the record's %q", got, final.GetFailureReason())
	}
	started := 0
	for _, ev := range events {
		if ev.GetStarted() != nil {
			started++
		}
	}
	if started != maxDeliver {
		t.Errorf("%d started events, want %d", started, maxDeliver)
	}
}

func TestJobOfWorkersLostOnEveryDeliveryFails(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	settings := testSettings()
	settings.MaxDeliver = 2
	_, client := startScheduler(t, nc, settings)
	job := submit(t, client, sphereSpec("unlucky"), "")

	// Each worker dies while holding the job: its NATS connection drops
	// and its computation hangs.
	for i := 1; i <= settings.MaxDeliver; i++ {
		runner := newBlockingRunner()
		dying := connect(t, ns)
		startWorker(t, dying, worker.Config{Name: fmt.Sprintf("lost-%d", i), Runner: runner.run})
		<-runner.started
		dying.Close()
	}
	// A healthy worker keeps pulling; the server then finds the message
	// out of deliveries and announces it.
	var ran atomic.Int32
	startWorker(t, nc, worker.Config{Name: "healthy", Runner: func(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
		ran.Add(1)
		return &soakv1.Summary{}, nil
	}})
	events, err := watchAll(t.Context(), client, job.GetId(), 0)
	if err != nil {
		t.Fatal(err)
	}
	checkSequence(t, events, 1)
	final := getJob(t, client, job.GetId())
	if final.GetState() != soakv1.JobState_JOB_STATE_FAILED || len(final.GetAttempts()) != 2 || ran.Load() != 0 {
		t.Fatalf("record %v, healthy runs %d; want failed after 2 lost attempts", final, ran.Load())
	}
	for _, a := range final.GetAttempts() {
		if !strings.Contains(a.GetError(), "stopped responding") {
			t.Errorf("attempt %d error %q, want the lost-worker reason", a.GetNumber(), a.GetError())
		}
	}
	queue, err := nc.JetStream()
	if err != nil {
		t.Fatal(err)
	}
	waitFor(t, "the spent message to leave the queue", func() bool {
		info, err := queue.StreamInfo(store.QueueStream)
		return err == nil && info.State.Msgs == 0
	})
}

func TestListJobsNewestFirstPagedAndFiltered(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	_, client := startScheduler(t, nc, testSettings())
	var ids []string
	for i := range 5 {
		ids = append(ids, submit(t, client, sphereSpec(fmt.Sprintf("job-%d", i)), "").GetId())
		time.Sleep(2 * time.Millisecond) // ids order by the millisecond
	}
	if _, err := client.CancelJob(t.Context(), &soakv1.CancelJobRequest{JobId: ids[1]}); err != nil {
		t.Fatal(err)
	}
	var got []string
	token := ""
	for range 10 {
		page, err := client.ListJobs(t.Context(), &soakv1.ListJobsRequest{PageSize: 2, PageToken: token})
		if err != nil {
			t.Fatal(err)
		}
		if len(page.GetJobs()) > 2 {
			t.Fatalf("page of %d jobs, asked for 2", len(page.GetJobs()))
		}
		for _, j := range page.GetJobs() {
			got = append(got, j.GetId())
		}
		if token = page.GetNextPageToken(); token == "" {
			break
		}
	}
	want := slices.Clone(ids)
	slices.Reverse(want)
	if !slices.Equal(got, want) {
		t.Errorf("paged list = %v, want newest first %v", got, want)
	}
	cancelled, err := client.ListJobs(t.Context(), &soakv1.ListJobsRequest{States: []soakv1.JobState{soakv1.JobState_JOB_STATE_CANCELLED}})
	if err != nil || len(cancelled.GetJobs()) != 1 || cancelled.GetJobs()[0].GetId() != ids[1] {
		t.Errorf("cancelled jobs = %v, %v; want only %s", cancelled.GetJobs(), err, ids[1])
	}
	if _, err := client.ListJobs(t.Context(), &soakv1.ListJobsRequest{PageToken: "not/a*token"}); status.Code(err) != codes.InvalidArgument {
		t.Errorf("bad page token: %v, want InvalidArgument", err)
	}
	if _, err := client.GetJob(t.Context(), &soakv1.GetJobRequest{JobId: store.NewJobID(time.Now())}); status.Code(err) != codes.NotFound {
		t.Errorf("unknown job: %v, want NotFound", err)
	}
}
