// Package worker takes jobs from the farm's JetStream work queue and runs
// them through the pipeline: it asks a scheduler to start the job,
// heartbeats while computing, publishes progress and milestones, uploads
// the result files and asks a scheduler to end the job. Only schedulers
// write job records; a worker's lease token for the attempt it runs is
// what lets it change that job's record (see store.LeaseOp). A worker
// holds nothing a restart would lose: a job it was running when it died
// goes back to the queue when its heartbeat stops. Its NATS connection
// needs the option store.WorkerInbox.
package worker

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"runtime"
	"sync"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"soakfarm/internal/pause"
	"soakfarm/pipeline"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

// Runner computes one job into outDir; pipeline.Run is the real one.
type Runner func(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error)

// Config configures a worker.
type Config struct {
	// Name identifies the worker in job records; default host-pid.
	Name string
	// Concurrency is how many jobs the worker runs at once; default 1.
	Concurrency int
	// Threads bounds the solver goroutines of each job; default the
	// cores divided among the concurrent jobs.
	Threads int
	// Runner computes a job; default pipeline.Run.
	Runner Runner
	// WorkDir holds each running job's output folder until it is
	// uploaded; default the system temporary folder.
	WorkDir string
	// ProgressInterval is the shortest time between two progress events
	// of a job; default 250 ms.
	ProgressInterval time.Duration
	// RetryDelay is how long a failed job waits before its next attempt,
	// times the attempt number; default 2 s.
	RetryDelay time.Duration
	// MaxJobMemory, when positive, fails a job whose grid memory estimate
	// (mesh.EstimateBytes) is larger, before it is meshed.
	MaxJobMemory int64
	// MaxJobDisk, when positive, fails a job whose result files grow
	// larger. Either limit fails the job at once, without a retry.
	MaxJobDisk int64
	// Metrics receives the worker's series; nil keeps them unregistered.
	Metrics *Metrics
	Logger  *slog.Logger
}

// Worker runs jobs from the queue.
type Worker struct {
	nc  *nats.Conn
	cfg Config
	log *slog.Logger

	mu      sync.Mutex
	running map[string]*runningJob
}

// runningJob is a job in hand. A pointer identifies one run, since a
// redelivery may hand this worker a job it still runs.
type runningJob struct{ cancel context.CancelCauseFunc }

// Why a running job's context ends.
var (
	errCancelRequested = errors.New("cancel requested")
	errSuperseded      = errors.New("job taken over by another delivery")
	errShutdown        = errors.New("worker shut down")
)

// New returns a worker that takes jobs through nc once Run is called.
func New(nc *nats.Conn, cfg Config) *Worker {
	if cfg.Name == "" {
		cfg.Name = DefaultName()
	}
	if cfg.Concurrency <= 0 {
		cfg.Concurrency = 1
	}
	if cfg.Threads <= 0 {
		cfg.Threads = max(1, runtime.NumCPU()/cfg.Concurrency)
	}
	if cfg.Runner == nil {
		cfg.Runner = pipeline.Run
	}
	if cfg.WorkDir == "" {
		cfg.WorkDir = os.TempDir()
	}
	if cfg.ProgressInterval <= 0 {
		cfg.ProgressInterval = 250 * time.Millisecond
	}
	if cfg.RetryDelay <= 0 {
		cfg.RetryDelay = 2 * time.Second
	}
	if cfg.Logger == nil {
		cfg.Logger = slog.Default()
	}
	if cfg.Metrics == nil {
		cfg.Metrics, _ = NewMetrics(nil) // cannot fail unregistered
	}
	return &Worker{
		nc: nc, cfg: cfg,
		log:     cfg.Logger.With("worker", cfg.Name),
		running: make(map[string]*runningJob),
	}
}

// DefaultName names a worker by its host and process id.
func DefaultName() string {
	host, _ := os.Hostname()
	return fmt.Sprintf("%s-%d", host, os.Getpid())
}

// Name is the worker's name in job records.
func (w *Worker) Name() string { return w.cfg.Name }

// Run takes jobs until ctx ends. It then cancels the jobs in hand, hands
// them back to the queue, and returns once they are handed back. It waits
// for a scheduler to set the queue up if needed.
func (w *Worker) Run(ctx context.Context) error {
	st, cons, err := w.bind(ctx)
	if err != nil {
		return err
	}
	info := cons.CachedInfo()
	q := queue{
		store:      st,
		ackWait:    info.Config.AckWait,
		maxDeliver: info.Config.MaxDeliver,
	}
	sub, err := st.SubscribeCancels(func(id string) { w.cancel(id, errCancelRequested) })
	if err != nil {
		return err
	}
	defer sub.Unsubscribe()
	w.log.Info("worker taking jobs", "concurrency", w.cfg.Concurrency, "ack_wait", q.ackWait, "max_deliver", q.maxDeliver)

	// One slot per job in hand; a message is fetched only for a free slot,
	// so none waits in this process while its acknowledgement time runs.
	slots := make(chan struct{}, w.cfg.Concurrency)
	var jobs sync.WaitGroup
	defer jobs.Wait()
	for {
		select {
		case slots <- struct{}{}:
		case <-ctx.Done():
			return nil
		}
		msg, err := fetchOne(ctx, cons)
		if err != nil {
			<-slots
			if ctx.Err() != nil {
				return nil
			}
			if !errors.Is(err, nats.ErrTimeout) && !errors.Is(err, context.DeadlineExceeded) {
				w.log.Warn("fetch", "err", err)
				_ = pause.For(ctx, time.Second)
			}
			continue
		}
		jobs.Go(func() {
			defer func() { <-slots }()
			w.handle(ctx, q, msg)
		})
	}
}

// bind opens the store and the queue consumer, waiting for a scheduler to
// create them.
func (w *Worker) bind(ctx context.Context) (*store.Store, jetstream.Consumer, error) {
	logged := false
	for {
		st, err := store.Open(ctx, w.nc)
		var cons jetstream.Consumer
		if err == nil {
			cons, err = st.QueueConsumer(ctx)
		}
		if err == nil {
			return st, cons, nil
		}
		if !errors.Is(err, store.ErrNotSetUp) {
			return nil, nil, fmt.Errorf("worker: %w", err)
		}
		if !logged {
			w.log.Info("waiting for a scheduler to set up the queue", "err", err)
			logged = true
		}
		if pause.For(ctx, time.Second) != nil {
			return nil, nil, ctx.Err()
		}
	}
}

// fetchOne pulls at most one message, waiting up to a few seconds.
func fetchOne(ctx context.Context, cons jetstream.Consumer) (jetstream.Msg, error) {
	fctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	return cons.Next(jetstream.FetchContext(fctx))
}

// track registers a running job's cancel function; the returned func
// unregisters it.
func (w *Worker) track(id string, cancel context.CancelCauseFunc) func() {
	run := &runningJob{cancel: cancel}
	w.mu.Lock()
	w.running[id] = run
	w.mu.Unlock()
	return func() {
		w.mu.Lock()
		if w.running[id] == run {
			delete(w.running, id)
		}
		w.mu.Unlock()
	}
}

// cancel stops the job id if this worker runs it.
func (w *Worker) cancel(id string, cause error) {
	w.mu.Lock()
	run := w.running[id]
	w.mu.Unlock()
	if run != nil {
		run.cancel(cause)
	}
}
