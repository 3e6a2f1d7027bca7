package cli

import (
	"bytes"
	"context"
	"errors"
	"io"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"
	"google.golang.org/protobuf/types/known/timestamppb"

	"soakfarm/farmclient"
	"soakfarm/internal/localfarm"
	"soakfarm/jobspec"
	"soakfarm/pipeline"
	soakv1 "soakfarm/proto/soak/v1"
)

// Specs of the end-to-end tests: the demo's quickest case, and the
// furnace case that has more events to interrupt.
const (
	quickSpec = "../../examples/demo/bead-tray-oil-quench.yaml"
	longSpec  = "../../examples/demo/shaft-furnace-heatup.yaml"
)

// startLocalFarm runs a farm with two workers on loopback for one test.
func startLocalFarm(t *testing.T) *localfarm.Farm {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	f, err := localfarm.Start(ctx, localfarm.Config{
		DataDir: t.TempDir(), Workers: 2, WorkerConcurrency: 1,
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil)),
	})
	if err != nil {
		t.Fatalf("starting the local farm: %v", err)
	}
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
		defer cancel()
		if err := f.Close(ctx); err != nil {
			t.Errorf("closing the local farm: %v", err)
		}
	})
	return f
}

// soak runs the command line and returns its exit code and output.
func soak(ctx context.Context, args ...string) (code int, stdout, stderr string) {
	var out, errb bytes.Buffer
	code = Main(ctx, args, strings.NewReader(""), &out, &errb)
	return code, out.String(), errb.String()
}

func testContext(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	t.Cleanup(cancel)
	return ctx
}

// submitted returns the job ids `soak submit` printed, one per line.
func submitted(t *testing.T, stdout string) []string {
	t.Helper()
	var ids []string
	for _, line := range strings.Split(strings.TrimSpace(stdout), "\n") {
		if f := strings.Fields(line); len(f) > 0 {
			ids = append(ids, f[0])
		}
	}
	if len(ids) == 0 {
		t.Fatalf("soak submit printed no job id: %q", stdout)
	}
	return ids
}

// TestFarmResultEqualsLocalRun submits, watches and fetches a job on a real
// farm over loopback gRPC, and checks the files against pipeline.Run of
// the same spec on this machine: the farm must only move specs and files.
func TestFarmResultEqualsLocalRun(t *testing.T) {
	t.Parallel()
	ctx := testContext(t)
	farm := startLocalFarm(t)
	addr := farm.GRPCAddr()

	code, stdout, stderr := soak(ctx, "submit", quickSpec, "--watch", "--farm", addr)
	if code != ExitOK {
		t.Fatalf("soak submit --watch: exit %d\n%s", code, stderr)
	}
	id := submitted(t, stdout)[0]
	for _, want := range []string{"bead-tray-oil-quench: started on ", "bead-tray-oil-quench: milestone core-below-150 reached at ", "bead-tray-oil-quench: finished ("} {
		if !strings.Contains(stderr, want) {
			t.Errorf("soak submit --watch output lacks %q:\n%s", want, stderr)
		}
	}

	fetched := t.TempDir()
	code, stdout, stderr = soak(ctx, "fetch", id, "--out", fetched, "--farm", addr)
	if code != ExitOK {
		t.Fatalf("soak fetch: exit %d\n%s", code, stderr)
	}
	if !strings.Contains(stdout, "CAUTION:") {
		t.Errorf("soak fetch does not end with the result screen:\n%s", stdout)
	}

	spec, err := jobspec.Load(quickSpec)
	if err != nil {
		t.Fatal(err)
	}
	local := t.TempDir()
	if _, err := pipeline.Run(ctx, spec, local, pipeline.Options{}); err != nil {
		t.Fatalf("local run: %v", err)
	}

	localFiles, fetchedFiles := fileList(t, local), fileList(t, fetched)
	if !slices.Equal(localFiles, fetchedFiles) {
		t.Errorf("fetched files %v, a local run writes %v", fetchedFiles, localFiles)
	}
	if a, b := readFile(t, local, "probes.csv"), readFile(t, fetched, "probes.csv"); !bytes.Equal(a, b) {
		t.Errorf("probes.csv differs between the farm and a local run:\nfarm:\n%.600s\nlocal:\n%.600s", b, a)
	}
	localSum, farmSum := readSummary(t, local), readSummary(t, fetched)
	clearTimings(localSum.ProtoReflect())
	clearTimings(farmSum.ProtoReflect())
	if !proto.Equal(localSum, farmSum) {
		t.Errorf("summary.json differs beyond timings:\nfarm:  %v\nlocal: %v", farmSum, localSum)
	}

	// The record and the table agree with what the watch saw.
	code, stdout, stderr = soak(ctx, "jobs", "--farm", addr, "--state", "finished")
	if code != ExitOK || !strings.Contains(stdout, id) || !strings.Contains(stdout, "finished") {
		t.Errorf("soak jobs --state finished: exit %d, want a row for %s:\n%s%s", code, id, stdout, stderr)
	}
	// Watching an ended job replays its events and exits with its outcome.
	code, _, stderr = soak(ctx, "watch", "--farm", addr, id)
	if code != ExitOK || !strings.Contains(stderr, "milestone core-below-150") {
		t.Errorf("soak watch of a finished job: exit %d\n%s", code, stderr)
	}
}

func fileList(t *testing.T, dir string) []string {
	t.Helper()
	var names []string
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		rel, err := filepath.Rel(dir, p)
		names = append(names, filepath.ToSlash(rel))
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	slices.Sort(names)
	return names
}

func readFile(t *testing.T, dir, name string) []byte {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, name))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func readSummary(t *testing.T, dir string) *soakv1.Summary {
	t.Helper()
	var s soakv1.Summary
	if err := protojson.Unmarshal(readFile(t, dir, "summary.json"), &s); err != nil {
		t.Fatalf("summary.json in %s: %v", dir, err)
	}
	return &s
}

// clearTimings zeroes every wall_seconds field, at any depth: they measure
// the machine, not the result.
func clearTimings(m protoreflect.Message) {
	m.Range(func(fd protoreflect.FieldDescriptor, v protoreflect.Value) bool {
		switch {
		case fd.Name() == "wall_seconds":
			m.Clear(fd)
		case fd.Message() == nil:
		case fd.IsList():
			for i := 0; i < v.List().Len(); i++ {
				clearTimings(v.List().Get(i).Message())
			}
		case !fd.IsMap():
			clearTimings(v.Message())
		}
		return true
	})
}

func TestSubmitSameKeyReturnsSameJob(t *testing.T) {
	t.Parallel()
	ctx := testContext(t)
	addr := startLocalFarm(t).GRPCAddr()
	code, first, stderr := soak(ctx, "submit", "--key", "tray-7", quickSpec, "--farm", addr)
	if code != ExitOK {
		t.Fatalf("first submit: exit %d\n%s", code, stderr)
	}
	code, again, stderr := soak(ctx, "submit", quickSpec, "--key", "tray-7", "--farm", addr)
	if code != ExitOK {
		t.Fatalf("second submit: exit %d\n%s", code, stderr)
	}
	if a, b := submitted(t, first)[0], submitted(t, again)[0]; a != b {
		t.Errorf("same key gave jobs %s and %s", a, b)
	}
	if !strings.Contains(again, "submitted before") {
		t.Errorf("the second submit does not say the job existed: %q", again)
	}
	code, other, _ := soak(ctx, "submit", quickSpec, "--key", "tray-8", "--farm", addr)
	if code != ExitOK || submitted(t, other)[0] == submitted(t, first)[0] {
		t.Errorf("a different key gave the same job (exit %d): %q", code, other)
	}
}

// linesWith returns the lines of text that contain sub.
func linesWith(text, sub string) []string {
	var out []string
	for _, l := range strings.Split(text, "\n") {
		if strings.Contains(l, sub) {
			out = append(out, l)
		}
	}
	return out
}

func TestSubmitShowsSpecProblemsOnePerLine(t *testing.T) {
	t.Parallel()
	ctx := testContext(t)

	// Checked here, before any farm is dialled (nothing listens on the
	// address given).
	code, _, stderr := soak(ctx, "submit", "../../testdata/specs/bad-many-problems.yaml", "--farm", "127.0.0.1:1")
	if code != ExitUsage {
		t.Errorf("bad spec: exit %d, want %d\n%s", code, ExitUsage, stderr)
	}
	for _, field := range []string{"part.cylinder.length_m: ", "initial_c: ", "time_stepping.scheme: "} {
		if got := linesWith(stderr, field); len(got) != 1 {
			t.Errorf("want one line about %q, got %q in\n%s", field, got, stderr)
		}
	}

	// Checked by the farm: a spec sent past the local check comes back
	// with one field violation per problem, shown one per line.
	addr := startLocalFarm(t).GRPCAddr()
	spec, err := jobspec.Load(quickSpec)
	if err != nil {
		t.Fatal(err)
	}
	spec.EndS = -5
	spec.Exposure[0].Emissivity = proto.Float64(1.4)
	c, err := farmclient.Dial(ctx, addr)
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	_, _, err = c.Submit(ctx, spec, "")
	msg := submitError("bead.yaml", err)
	var ee *exitError
	if !errors.As(msg, &ee) || ee.code != ExitUsage {
		t.Fatalf("farm refusal: %v, want a usage error", msg)
	}
	for _, want := range []struct{ field, value string }{{"end_s: ", "-5"}, {"exposure[0].emissivity: ", "1.4"}} {
		got := linesWith(msg.Error(), want.field)
		if len(got) != 1 || !strings.HasPrefix(got[0], want.field) || !strings.Contains(got[0], want.value) {
			t.Errorf("want one line starting %q naming %s, got %q in\n%s", want.field, want.value, got, msg)
		}
	}
}

// eventLog collects a watch's sequences and checks them as they come.
type eventLog struct {
	seqs  []uint64
	final bool
}

func (l *eventLog) add(ev *soakv1.JobEvent) error {
	l.seqs = append(l.seqs, ev.GetSequence())
	l.final = farmclient.IsFinal(ev)
	return nil
}

// contiguous reports whether the sequences are 1, 2, ... n: every event
// once, in order (the API numbers a job's events by one from 1).
func contiguous(seqs []uint64) bool {
	for i, s := range seqs {
		if s != uint64(i+1) {
			return false
		}
	}
	return len(seqs) > 0
}

// dropFirstStream makes the first WatchJob stream of a connection fail as
// a lost connection does, after `after` events.
func dropFirstStream(after int) grpc.StreamClientInterceptor {
	dropped := make(chan struct{}, 1)
	dropped <- struct{}{}
	return func(ctx context.Context, desc *grpc.StreamDesc, cc *grpc.ClientConn, method string, streamer grpc.Streamer, opts ...grpc.CallOption) (grpc.ClientStream, error) {
		s, err := streamer(ctx, desc, cc, method, opts...)
		if err != nil || !strings.HasSuffix(method, "/WatchJob") {
			return s, err
		}
		select {
		case <-dropped:
			return &droppingStream{ClientStream: s, left: after}, nil
		default:
			return s, nil
		}
	}
}

type droppingStream struct {
	grpc.ClientStream
	left int
}

func (d *droppingStream) RecvMsg(m any) error {
	if d.left == 0 {
		return status.Error(codes.Unavailable, "connection lost (test)")
	}
	d.left--
	return d.ClientStream.RecvMsg(m)
}

func TestWatchResumesOnRealFarm(t *testing.T) {
	t.Parallel()
	ctx := testContext(t)
	addr := startLocalFarm(t).GRPCAddr()
	spec, err := jobspec.Load(longSpec)
	if err != nil {
		t.Fatal(err)
	}

	// The client resumes on its own after the stream drops mid-job.
	c, err := farmclient.Dial(ctx, addr,
		farmclient.WithDialOptions(grpc.WithStreamInterceptor(dropFirstStream(4))),
		farmclient.WithRetryPolicy(farmclient.RetryPolicy{MaxAttempts: 5, FirstDelay: 10 * time.Millisecond, MaxDelay: 100 * time.Millisecond}))
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	job, _, err := c.Submit(ctx, spec, "")
	if err != nil {
		t.Fatal(err)
	}
	var auto eventLog
	if err := c.Watch(ctx, job.GetId(), 0, auto.add); err != nil {
		t.Fatalf("Watch across a dropped stream: %v", err)
	}
	if !auto.final || !contiguous(auto.seqs) || len(auto.seqs) <= 4 {
		t.Errorf("events across the drop: %v (final %v), want 1..n once each, n > 4", auto.seqs, auto.final)
	}

	// A caller that stopped watching picks up from its last sequence.
	var first, rest eventLog
	stopCtx, stop := context.WithCancel(ctx)
	err = c.Watch(stopCtx, job.GetId(), 0, func(ev *soakv1.JobEvent) error {
		first.add(ev)
		if len(first.seqs) == 3 {
			stop()
		}
		return nil
	})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("Watch after its context was cancelled: %v", err)
	}
	if err := c.Watch(ctx, job.GetId(), first.seqs[len(first.seqs)-1], rest.add); err != nil {
		t.Fatal(err)
	}
	if all := append(first.seqs, rest.seqs...); !slices.Equal(all, auto.seqs) {
		t.Errorf("stopped then resumed watch saw %v, an unbroken one %v", all, auto.seqs)
	}
}

func TestCancelEndsWatchWithExitThree(t *testing.T) {
	t.Parallel()
	ctx := testContext(t)
	addr := startLocalFarm(t).GRPCAddr()
	// A job far too long to end by itself within the test.
	spec, err := jobspec.Load(longSpec)
	if err != nil {
		t.Fatal(err)
	}
	spec.EndS = 200_000
	spec.StopAtMilestones = false
	spec.TimeStepping = &soakv1.TimeStepping{MaxStepS: proto.Float64(1)}
	specPath := filepath.Join(t.TempDir(), "endless.json")
	data, err := protojson.MarshalOptions{UseProtoNames: true}.Marshal(spec)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(specPath, data, 0o644); err != nil {
		t.Fatal(err)
	}
	code, stdout, stderr := soak(ctx, "submit", specPath, "--farm", addr)
	if code != ExitOK {
		t.Fatalf("submit: exit %d\n%s", code, stderr)
	}
	id := submitted(t, stdout)[0]
	code, stdout, stderr = soak(ctx, "cancel", id, "--farm", addr, "--reason", "test over")
	if code != ExitOK || !strings.Contains(stdout, id) {
		t.Fatalf("cancel: exit %d\n%s%s", code, stdout, stderr)
	}
	code, _, stderr = soak(ctx, "watch", id, "--farm", addr)
	if code != ExitCancelled || !strings.Contains(stderr, "cancelled") {
		t.Errorf("watch of a cancelled job: exit %d, want %d\n%s", code, ExitCancelled, stderr)
	}
	code, _, stderr = soak(ctx, "fetch", id, "--farm", addr, "--out", t.TempDir())
	if code != ExitUsage || !strings.Contains(stderr, "not finished") {
		t.Errorf("fetch of a cancelled job: exit %d, want %d\n%s", code, ExitUsage, stderr)
	}
}

func TestPrintJobTable(t *testing.T) {
	t.Parallel()
	t0 := time.Date(2026, 3, 1, 8, 0, 0, 0, time.Local)
	at := func(d time.Duration) *timestamppb.Timestamp { return timestamppb.New(t0.Add(d)) }
	jobs := []*soakv1.Job{
		{Id: "j3", Spec: &soakv1.JobSpec{Name: "queued-one"}, State: soakv1.JobState_JOB_STATE_QUEUED, SubmitTime: at(0)},
		{Id: "j2", Spec: &soakv1.JobSpec{Name: "running-one"}, State: soakv1.JobState_JOB_STATE_RUNNING, SubmitTime: at(0), StartTime: at(time.Second), Worker: "w2"},
		{Id: "j1", Spec: &soakv1.JobSpec{Name: "done-one"}, State: soakv1.JobState_JOB_STATE_FINISHED, SubmitTime: at(0), StartTime: at(2 * time.Second), EndTime: at(92 * time.Second), Worker: "w1"},
	}
	var b bytes.Buffer
	printJobTable(&b, jobs, t0.Add(31*time.Second))
	tests := []struct{ id, want string }{
		{"j3", "j3  queued-one   queued    2026-03-01 08:00:00  -       -"},
		{"j2", "j2  running-one  running   2026-03-01 08:00:00  w2      30s"},
		{"j1", "j1  done-one     finished  2026-03-01 08:00:00  w1      1m30s"},
	}
	for _, tc := range tests {
		got := linesWith(b.String(), tc.id+" ")
		if len(got) != 1 || strings.TrimSpace(got[0]) != tc.want {
			t.Errorf("row %s = %q, want %q", tc.id, got, tc.want)
		}
	}
}

func TestBatchExitCode(t *testing.T) {
	t.Parallel()
	done, failed, cancelled := soakv1.JobState_JOB_STATE_FINISHED, soakv1.JobState_JOB_STATE_FAILED, soakv1.JobState_JOB_STATE_CANCELLED
	tests := []struct {
		states []soakv1.JobState
		want   int
	}{
		{[]soakv1.JobState{done, done}, ExitOK},
		{[]soakv1.JobState{done, cancelled}, ExitCancelled},
		{[]soakv1.JobState{cancelled, failed, done}, ExitFailure},
	}
	for _, tc := range tests {
		outcomes := make([]outcome, len(tc.states))
		for i, st := range tc.states {
			outcomes[i] = outcome{id: "j", name: "n", state: st}
		}
		got := ExitOK
		var ee *exitError
		if err := outcomeError(outcomes); errors.As(err, &ee) {
			got = ee.code
		}
		if got != tc.want {
			t.Errorf("states %v: exit %d, want %d", tc.states, got, tc.want)
		}
	}
}
