package faulttest

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"google.golang.org/protobuf/proto"

	"soakfarm/farmclient"
	soakv1 "soakfarm/proto/soak/v1"
)

// soakBin is the soak binary TestMain builds once for the package; it is
// set before any test runs and never changed after.
var soakBin string

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "soak-faulttest-")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	soakBin = filepath.Join(dir, "soak")
	if out, err := exec.Command("go", "build", "-o", soakBin, "soakfarm/cmd/soak").CombinedOutput(); err != nil {
		fmt.Fprintf(os.Stderr, "go build: %v\n%s", err, out)
		os.RemoveAll(dir)
		os.Exit(1)
	}
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

// lockedBuffer collects a process's output while the test reads it.
type lockedBuffer struct {
	mu  sync.Mutex
	buf bytes.Buffer
}

func (b *lockedBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.Write(p)
}

func (b *lockedBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.String()
}

// proc is one process of the farm under test.
type proc struct {
	name   string
	cmd    *exec.Cmd
	output *lockedBuffer
	exited chan struct{}
}

// startProc runs argv (the soak binary unless argv[0] says otherwise)
// until it is killed or the test ends.
func startProc(t *testing.T, name string, argv []string, env ...string) *proc {
	t.Helper()
	cmd := exec.Command(argv[0], argv[1:]...)
	cmd.Env = append(os.Environ(), env...)
	p := &proc{name: name, cmd: cmd, output: &lockedBuffer{}, exited: make(chan struct{})}
	cmd.Stdout, cmd.Stderr = p.output, p.output
	if err := cmd.Start(); err != nil {
		t.Fatalf("start %s: %v", name, err)
	}
	go func() {
		cmd.Wait()
		close(p.exited)
	}()
	t.Cleanup(p.kill)
	return p
}

// kill ends the process at once (SIGKILL; a frozen process dies too) and
// waits for it.
func (p *proc) kill() {
	select {
	case <-p.exited:
		return
	default:
	}
	p.cmd.Process.Signal(syscall.SIGKILL)
	<-p.exited
}

func (p *proc) signal(t *testing.T, sig os.Signal) {
	t.Helper()
	if err := p.cmd.Process.Signal(sig); err != nil {
		t.Fatalf("signal %v to %s: %v", sig, p.name, err)
	}
}

func (p *proc) alive() bool {
	select {
	case <-p.exited:
		return false
	default:
		return true
	}
}

// waitOutput waits for a line starting with prefix and returns the rest
// of it.
func (p *proc) waitOutput(t *testing.T, prefix string, within time.Duration) string {
	t.Helper()
	deadline := time.Now().Add(within)
	for {
		for line := range strings.Lines(p.output.String()) {
			if rest, ok := strings.CutPrefix(line, prefix); ok {
				return strings.TrimSpace(rest)
			}
		}
		if !p.alive() || time.Now().After(deadline) {
			t.Fatalf("%s did not print %q within %s:\n%s", p.name, prefix, within, tail(p.output.String()))
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// waitLog waits for a log line matching re.
func (p *proc) waitLog(t *testing.T, re *regexp.Regexp, within time.Duration) []string {
	t.Helper()
	deadline := time.Now().Add(within)
	for {
		if m := re.FindStringSubmatch(p.output.String()); m != nil {
			return m
		}
		if time.Now().After(deadline) {
			t.Fatalf("%s logged nothing matching %s within %s:\n%s", p.name, re, within, tail(p.output.String()))
		}
		time.Sleep(5 * time.Millisecond)
	}
}

func tail(s string) string {
	const keep = 8000
	if len(s) > keep {
		return "..." + s[len(s)-keep:]
	}
	return s
}

// Worker log lines the tests read.
var (
	startedLog  = regexp.MustCompile(`msg="job started" worker=\S+ job=(\S+)`)
	finishedLog = regexp.MustCompile(`msg="job finished" worker=\S+ job=(\S+) state=JOB_STATE_FINISHED`)
	discardLog  = regexp.MustCompile(`msg="job taken over elsewhere; (?:discarding this result|dropping this attempt)" worker=\S+ job=(\S+)`)
)

// heldJob is the job a worker's log shows it running: started and not
// yet finished; "" if none.
func heldJob(output string) string {
	started := startedLog.FindAllStringSubmatch(output, -1)
	if len(started) == 0 {
		return ""
	}
	id := started[len(started)-1][1]
	if strings.Contains(output, `msg="job finished" worker=`) {
		for _, m := range finishedLog.FindAllStringSubmatch(output, -1) {
			if m[1] == id {
				return ""
			}
		}
	}
	return id
}

// farmOptions shape the farm of one test.
type farmOptions struct {
	// ackWait and maxAttempts are the scheduler's queue settings.
	ackWait     time.Duration
	maxAttempts int
	// natsHost is the broker's listen address; default 127.0.0.1.
	natsHost string
	// natsUser and natsPassword, when set, are required of NATS clients.
	natsUser, natsPassword string
}

// farm is a farm of separate processes: broker, scheduler and workers.
type farm struct {
	t       *testing.T
	opts    farmOptions
	dataDir string
	natsURL string
	apiAddr string
	broker  *proc
	sched   *proc
	mu      sync.Mutex
	procs   []*proc // every process started, killed ones included
	client  *farmclient.Client
	// submitted numbers the client keys of submits.
	submitted atomic.Int64
}

func freePort(t *testing.T, host string) string {
	t.Helper()
	lis, err := net.Listen("tcp", net.JoinHostPort(host, "0"))
	if err != nil {
		t.Fatal(err)
	}
	defer lis.Close()
	return lis.Addr().String()
}

// newFarm starts a broker and a scheduler on fixed loopback ports, so
// that restarts come back where clients look, and dials the API.
func newFarm(t *testing.T, opts farmOptions) *farm {
	t.Helper()
	if opts.natsHost == "" {
		opts.natsHost = "127.0.0.1"
	}
	f := &farm{t: t, opts: opts, dataDir: t.TempDir()}
	natsAddr := freePort(t, opts.natsHost)
	f.natsURL = "nats://" + natsAddr
	f.apiAddr = freePort(t, "127.0.0.1")
	f.startBroker()
	f.startScheduler()
	ctx, cancel := context.WithTimeout(t.Context(), 20*time.Second)
	defer cancel()
	c, err := farmclient.Dial(ctx, f.apiAddr, farmclient.WithRetryPolicy(farmclient.RetryPolicy{
		MaxAttempts: 100, FirstDelay: 100 * time.Millisecond, MaxDelay: time.Second,
	}))
	if err != nil {
		t.Fatal(err)
	}
	f.client = c
	t.Cleanup(func() {
		c.Close()
		if t.Failed() {
			f.dumpLogs()
		}
	})
	return f
}

func (f *farm) start(name string, args ...string) *proc {
	f.t.Helper()
	var env []string
	if f.opts.natsPassword != "" {
		env = append(env, "SOAK_NATS_PASSWORD="+f.opts.natsPassword)
	}
	p := startProc(f.t, name, args, env...)
	f.mu.Lock()
	f.procs = append(f.procs, p)
	f.mu.Unlock()
	return p
}

func (f *farm) natsArgs() []string {
	args := []string{"--nats", f.natsURL}
	if f.opts.natsUser != "" {
		args = append(args, "--nats-user", f.opts.natsUser)
	}
	return args
}

// startBroker starts (or restarts) NATS on the farm's folder and port.
func (f *farm) startBroker() {
	f.t.Helper()
	args := []string{soakBin, "broker", "--data", f.dataDir, "--listen", strings.TrimPrefix(f.natsURL, "nats://")}
	if f.opts.natsUser != "" {
		args = append(args, "--nats-user", f.opts.natsUser)
	}
	f.broker = f.start("broker", args...)
	f.broker.waitOutput(f.t, "NATS on ", 20*time.Second)
}

// startScheduler starts (or restarts) the scheduler on the farm's port.
func (f *farm) startScheduler() {
	f.t.Helper()
	args := append([]string{soakBin, "scheduler", "--listen", f.apiAddr,
		"--ack-wait", f.opts.ackWait.String(), "--max-attempts", fmt.Sprint(f.opts.maxAttempts)}, f.natsArgs()...)
	f.sched = f.start("scheduler", args...)
	f.sched.waitOutput(f.t, "farm API on ", 20*time.Second)
}

// startWorker starts a worker with one solver thread, waiting until it
// takes jobs. prefix runs it through another command (ip netns exec).
func (f *farm) startWorker(name string, prefix []string, extra ...string) *proc {
	f.t.Helper()
	args := append(slices.Clone(prefix), soakBin, "worker", "--name", name, "--threads", "1", "--work-dir", f.t.TempDir())
	args = append(append(args, f.natsArgs()...), extra...)
	w := f.start(name, args...)
	w.waitLog(f.t, regexp.MustCompile(`msg="worker taking jobs"`), 20*time.Second)
	return w
}

func (f *farm) dumpLogs() {
	f.mu.Lock()
	defer f.mu.Unlock()
	for _, p := range f.procs {
		f.t.Logf("--- %s (%s):\n%s", p.name, strings.Join(p.cmd.Args[1:], " "), tail(p.output.String()))
	}
}

// completions counts, per job, the completions the workers logged; the
// job record accepts one such completion per job.
func (f *farm) completions() map[string]int {
	f.mu.Lock()
	defer f.mu.Unlock()
	n := map[string]int{}
	for _, p := range f.procs {
		for _, m := range finishedLog.FindAllStringSubmatch(p.output.String(), -1) {
			n[m[1]]++
		}
	}
	return n
}

// submit queues specs, each under its own client key so that a retried
// submit cannot queue a job twice, retrying while the API is unreachable.
func (f *farm) submit(ctx context.Context, specs ...*soakv1.JobSpec) []string {
	f.t.Helper()
	ids := make([]string, len(specs))
	for i, spec := range specs {
		key := fmt.Sprintf("%s/%d", f.t.Name(), f.submitted.Add(1))
		for {
			job, _, err := f.client.Submit(ctx, spec, key)
			if err == nil {
				ids[i] = job.GetId()
				break
			}
			if ctx.Err() != nil {
				f.t.Fatalf("submit %s: %v", spec.GetName(), err)
			}
			time.Sleep(100 * time.Millisecond)
		}
	}
	return ids
}

// get reads a job record, retrying while the API is unreachable.
func (f *farm) get(ctx context.Context, id string) *soakv1.Job {
	f.t.Helper()
	for {
		job, err := f.client.Get(ctx, id)
		if err == nil {
			return job
		}
		if ctx.Err() != nil {
			f.t.Fatalf("get %s: %v", id, err)
		}
		time.Sleep(100 * time.Millisecond)
	}
}

// watches follows jobs' event streams to their final events.
type watches struct {
	mu       sync.Mutex
	events   map[string][]*soakv1.JobEvent
	errs     map[string]error
	finished chan string // one send per final event seen
	finals   atomic.Int64
	wg       sync.WaitGroup
}

// watch starts one watcher per job; each resumes by itself after a
// dropped stream.
func (f *farm) watch(ctx context.Context, ids []string) *watches {
	w := &watches{events: map[string][]*soakv1.JobEvent{}, errs: map[string]error{}, finished: make(chan string, len(ids))}
	for _, id := range ids {
		w.wg.Go(func() {
			err := f.client.Watch(ctx, id, 0, func(ev *soakv1.JobEvent) error {
				w.mu.Lock()
				w.events[id] = append(w.events[id], ev)
				w.mu.Unlock()
				if farmclient.IsFinal(ev) {
					w.finals.Add(1)
					w.finished <- id
				}
				return nil
			})
			if err != nil {
				w.mu.Lock()
				w.errs[id] = err
				w.mu.Unlock()
			}
		})
	}
	return w
}

// waitFinals waits for n final events.
func (w *watches) waitFinals(t *testing.T, ctx context.Context, n int) {
	t.Helper()
	for range n {
		select {
		case <-w.finished:
		case <-ctx.Done():
			t.Fatalf("waiting for final events: %v", ctx.Err())
		}
	}
}

// wait waits for every watcher to end.
func (w *watches) wait(t *testing.T, ctx context.Context) {
	t.Helper()
	done := make(chan struct{})
	go func() {
		w.wg.Wait()
		close(done)
	}()
	select {
	case <-done:
	case <-ctx.Done():
		t.Fatalf("watchers still running: %v", ctx.Err())
	}
}

// tally is what a run's records, streams and logs say about its jobs.
type tally struct {
	jobs, finished, lost, duplicates int
}

// checkExactlyOnce checks each job from three sides: its event stream is
// numbered 1, 2, ... without gap or repeat and ends in one finished
// event; its record is finished by the worker of its last attempt; and
// the workers' logs hold exactly one completion of it.
func (f *farm) checkExactlyOnce(ctx context.Context, ids []string, w *watches) tally {
	t := f.t
	t.Helper()
	completions := f.completions()
	tl := tally{jobs: len(ids)}
	w.mu.Lock()
	defer w.mu.Unlock()
	for _, id := range ids {
		if err := w.errs[id]; err != nil {
			t.Errorf("job %s: watch ended with %v", id, err)
		}
		events := w.events[id]
		finishedEvents, started := 0, 0
		var lastStarted *soakv1.JobStarted
		for i, ev := range events {
			if ev.GetSequence() != uint64(i+1) {
				t.Errorf("job %s: event %d has sequence %d", id, i+1, ev.GetSequence())
				break
			}
			switch {
			case ev.GetStarted() != nil:
				started++
				lastStarted = ev.GetStarted()
			case ev.GetFinished() != nil:
				finishedEvents++
			case ev.GetFailed() != nil:
				t.Errorf("job %s failed: %s", id, ev.GetFailed().GetReason())
			}
		}
		job := f.get(ctx, id)
		attempts := job.GetAttempts()
		// A worker killed between claiming the job and announcing the
		// start leaves an attempt without a started event.
		ok := job.GetState() == soakv1.JobState_JOB_STATE_FINISHED && finishedEvents == 1 && started >= 1 && started <= len(attempts) &&
			len(attempts) > 0 && lastStarted.GetWorker() == attempts[len(attempts)-1].GetWorker() &&
			job.GetWorker() == lastStarted.GetWorker() && completions[id] == 1
		if job.GetState() == soakv1.JobState_JOB_STATE_FINISHED {
			tl.finished++
		} else {
			tl.lost++
		}
		if finishedEvents > 1 || completions[id] > 1 {
			tl.duplicates++
		}
		if !ok {
			t.Errorf("job %s: state %s, %d attempts, %d started and %d finished events, %d completions in the worker logs; want finished once",
				id, job.GetState(), len(attempts), started, finishedEvents, completions[id])
		}
	}
	return tl
}

// sphere is a small real job: a steel ball of diameter 50 mm put into a
// 600 °C furnace, cells across the diameter and simulated seconds as given.
// Solve times with one thread on the 2-core CI machine: 6 cells for 60 s
// about 0.1 s, 12 cells for 900 s about 0.4 s, 24 cells for 4000 s about
// 4 s.
func sphere(name string, cells uint32, endS float64) *soakv1.JobSpec {
	return &soakv1.JobSpec{
		Name:        name,
		Part:        &soakv1.Part{Shape: &soakv1.Part_Sphere{Sphere: &soakv1.Sphere{DiameterM: 0.05}}},
		CellsAcross: proto.Uint32(cells),
		Material: &soakv1.Material{
			DensityKgM3: 7850, ConductivityWMk: proto.Float64(45), SpecificHeatJKgk: proto.Float64(480),
		},
		InitialC: proto.Float64(20),
		Exposure: []*soakv1.Exposure{{Surfaces: "all", HWM2K: 60, FluidC: proto.Float64(600)}},
		EndS:     endS,
		Probes:   []*soakv1.Probe{{Name: "centre", AtM: []float64{0, 0, 0}}},
	}
}

// longJob is a job of several seconds' solving on one thread (about 3 s
// on a 2-core machine of 2026), long enough to freeze or cut off its
// worker a second into it with time to spare: the solver has grown faster
// more than once, and a job that ends before the fault tests nothing.
func longJob(name string) *soakv1.JobSpec { return sphere(name, 40, 4000) }

func spheres(prefix string, n int, cells uint32, endS float64) []*soakv1.JobSpec {
	specs := make([]*soakv1.JobSpec, n)
	for i := range specs {
		specs[i] = sphere(fmt.Sprintf("%s-%03d", prefix, i), cells, endS)
	}
	return specs
}

// startedBy returns the first Started event of the job by a worker other
// than except, waiting for it until ctx ends.
func (w *watches) startedBy(ctx context.Context, id, except string) (*soakv1.JobEvent, error) {
	for {
		w.mu.Lock()
		for _, ev := range w.events[id] {
			if s := ev.GetStarted(); s != nil && s.GetWorker() != except {
				w.mu.Unlock()
				return ev, nil
			}
		}
		w.mu.Unlock()
		select {
		case <-ctx.Done():
			return nil, fmt.Errorf("job %s: no start by a worker other than %s: %w", id, except, ctx.Err())
		case <-time.After(10 * time.Millisecond):
		}
	}
}

// errTimeout marks a bounded wait that ran out.
var errTimeout = errors.New("timed out")

// until polls cond every 10 ms for up to d.
func until(d time.Duration, cond func() bool) error {
	deadline := time.Now().Add(d)
	for !cond() {
		if time.Now().After(deadline) {
			return errTimeout
		}
		time.Sleep(10 * time.Millisecond)
	}
	return nil
}
