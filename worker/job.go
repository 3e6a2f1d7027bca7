package worker

import (
	"context"
	"crypto/rand"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"sort"
	"sync"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"soakfarm/pipeline"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

// queue is what handling a message needs to know about the queue.
type queue struct {
	store      *store.Store
	ackWait    time.Duration
	maxDeliver int
}

// bookkeepingTimeout bounds each lease, event or queue call of a job. It
// does not derive from the worker's context, so that a shutting-down
// worker still hands its jobs back.
const bookkeepingTimeout = 10 * time.Second

// endRetryLimit is how long a worker keeps asking for a job to be ended
// while no scheduler answers (one restarting, say) before it lets the
// queue deliver the job again. The job's heartbeat runs meanwhile.
const endRetryLimit = time.Minute

// startRetryLimit is how long a worker keeps asking to start a job while
// no scheduler answers. A start whose reply was lost may have been done:
// asking again with the same token gets the record it made, where giving
// up would leave the job running without anyone computing it.
const startRetryLimit = 30 * time.Second

// errSchedulerTrouble: a scheduler answered but could not do the call
// (its NATS link failing, say); the call may have been done.
var errSchedulerTrouble = errors.New("scheduler could not do the call")

// Refusals of lease calls.
var (
	errAlreadyEnded  = errors.New("job already ended")
	errHeldElsewhere = errors.New("job is running on another delivery")
	errNotOurs       = errors.New("job record moved on without this attempt")
)

// claim is one job this worker has taken.
type claim struct {
	id      string
	attempt uint32
	worker  string
	token   []byte // the attempt's lease token
	msg     jetstream.Msg
	last    bool // the queue will not deliver the job again
	log     *slog.Logger
}

func bookkeeping() (context.Context, context.CancelFunc) {
	return context.WithTimeout(context.Background(), bookkeepingTimeout)
}

// handle takes one queue message through to an acknowledgement.
func (w *Worker) handle(runCtx context.Context, q queue, msg jetstream.Msg) {
	id := string(msg.Data())
	log := w.log.With("job", id)
	md, err := msg.Metadata()
	if err != nil {
		log.Error("queue message without metadata", "err", err)
		return
	}
	c := &claim{
		id: id, worker: w.cfg.Name, msg: msg, log: log, token: make([]byte, 32),
		last: q.maxDeliver > 0 && md.NumDelivered >= uint64(q.maxDeliver),
	}
	rand.Read(c.token) // never fails (crypto/rand documents it)
	if md.NumDelivered > 1 {
		w.cfg.Metrics.redeliveries.Inc()
	}
	job, err := w.claim(q, c, md.NumDelivered)
	switch {
	case errors.Is(err, store.ErrJobNotFound):
		log.Warn("queue message for a job without record; dropping it")
		terminate(msg, log)
		return
	case errors.Is(err, errAlreadyEnded), errors.Is(err, errHeldElsewhere):
		log.Info("dropping queue message", "why", err)
		ack(msg, log)
		return
	case err != nil:
		log.Warn("claim job", "err", err)
		nak(msg, 2*time.Second, log)
		return
	}
	if store.IsFinal(job.GetState()) { // cancelled while queued
		w.ended(q, c, job)
		return
	}
	// From here a cancel notice reaches the run; one sent between the
	// claim and now is caught by the first heartbeat.
	jobCtx, cancel := context.WithCancelCause(runCtx)
	defer cancel(nil)
	w.cfg.Metrics.running.Inc()
	defer w.cfg.Metrics.running.Dec()
	defer w.track(id, cancel)()
	log.Info("job started", "attempt", c.attempt, "delivery", md.NumDelivered)
	c.appendEvent(q, &soakv1.JobEvent{Kind: &soakv1.JobEvent_Started{Started: &soakv1.JobStarted{Worker: c.worker, Attempt: c.attempt}}})
	heartbeatDone := make(chan struct{})
	var heartbeats sync.WaitGroup
	heartbeats.Go(func() { c.heartbeat(q, cancel, heartbeatDone) })
	defer func() {
		close(heartbeatDone)
		heartbeats.Wait()
	}()

	if err := w.checkMemory(job.GetSpec()); err != nil {
		w.failAttempt(q, c, err)
		return
	}
	outDir, err := os.MkdirTemp(w.cfg.WorkDir, "soak-"+id+"-")
	if err != nil {
		w.failAttempt(q, c, fmt.Errorf("output folder: %w", err))
		return
	}
	defer os.RemoveAll(outDir)
	publish := c.progressPublisher(q, w.cfg.ProgressInterval)
	var diskChecked time.Time
	summary, runErr := w.cfg.Runner(jobCtx, job.GetSpec(), outDir, pipeline.Options{
		Progress: func(p *soakv1.JobProgress) {
			publish(p)
			// Snapshots grow the folder while the job runs; a look
			// once a second stops a runaway job early.
			if w.cfg.MaxJobDisk > 0 && time.Since(diskChecked) >= time.Second {
				diskChecked = time.Now()
				if err := w.checkDisk(outDir); err != nil {
					cancel(err)
				}
			}
		},
		Milestone: func(m *soakv1.MilestoneReached) {
			c.appendEvent(q, &soakv1.JobEvent{Kind: &soakv1.JobEvent_Milestone{Milestone: m}})
		},
		Threads: w.cfg.Threads,
	})
	cause := context.Cause(jobCtx)
	if runErr == nil {
		// The last files are written at the end of the run.
		runErr = w.checkDisk(outDir)
	}
	var limit *limitError
	switch {
	case runErr == nil:
		w.finish(q, c, summary, outDir)
	case runCtx.Err() != nil:
		w.handBack(q, c)
	case errors.Is(cause, errCancelRequested):
		w.cancelled(q, c)
	case errors.Is(cause, errSuperseded):
		// Another delivery owns the job; its worker acknowledges.
		log.Warn("job taken over elsewhere; dropping this attempt")
	case errors.As(cause, &limit):
		w.failAttempt(q, c, cause)
	default:
		w.failAttempt(q, c, runErr)
	}
}

// claim asks a scheduler to move the record to running under a new
// attempt held by c's token, or to say why the message is not to be run.
// A job cancelled while queued is ended by the call.
func (w *Worker) claim(q queue, c *claim, delivery uint64) (*soakv1.Job, error) {
	job, err := c.retry(q, store.LeaseStart, &soakv1.LeaseRequest{Delivery: delivery}, startRetryLimit, func() {
		// Keep the message while asking, so no other worker gets it.
		if err := c.msg.InProgress(); err != nil {
			c.log.Warn("heartbeat", "err", err)
		}
	})
	if err == nil && !store.IsFinal(job.GetState()) {
		c.attempt = store.LastAttempt(job).GetNumber()
	}
	return job, err
}

// lease makes a lease call for c and turns a refusal into an error.
func (c *claim) lease(ctx context.Context, q queue, op store.LeaseOp, req *soakv1.LeaseRequest) (*soakv1.Job, error) {
	req.JobId, req.Worker, req.Token = c.id, c.worker, c.token
	reply, err := q.store.Lease(ctx, op, req)
	if err != nil {
		return nil, err
	}
	switch reply.GetRefusal() {
	case soakv1.LeaseRefusal_LEASE_REFUSAL_UNSPECIFIED:
		return reply.GetJob(), nil
	case soakv1.LeaseRefusal_LEASE_REFUSAL_NOT_FOUND:
		return nil, fmt.Errorf("job %s: %w", c.id, store.ErrJobNotFound)
	case soakv1.LeaseRefusal_LEASE_REFUSAL_ENDED:
		return nil, errAlreadyEnded
	case soakv1.LeaseRefusal_LEASE_REFUSAL_HELD_ELSEWHERE:
		return nil, errHeldElsewhere
	case soakv1.LeaseRefusal_LEASE_REFUSAL_NOT_HOLDER:
		return nil, errNotOurs
	default:
		return nil, fmt.Errorf("lease %s of job %s: %w: %s", op, c.id, errSchedulerTrouble, reply.GetError())
	}
}

// end makes a finish or fail call, asking again for up to endRetryLimit
// while no scheduler does it.
func (c *claim) end(q queue, op store.LeaseOp, req *soakv1.LeaseRequest) (*soakv1.Job, error) {
	return c.retry(q, op, req, endRetryLimit, func() {})
}

// retry makes a lease call, and again after a second, calling before
// each repeat, while no scheduler answers or one cannot do the call, for
// up to limit. A scheduler takes a repeat of a call already done for the
// same token as done.
func (c *claim) retry(q queue, op store.LeaseOp, req *soakv1.LeaseRequest, limit time.Duration, before func()) (*soakv1.Job, error) {
	giveUp := time.Now().Add(limit)
	for {
		ctx, done := bookkeeping()
		job, err := c.lease(ctx, q, op, req)
		done()
		notDone := errors.Is(err, store.ErrNoScheduler) || errors.Is(err, errSchedulerTrouble)
		if !notDone || time.Now().After(giveUp) {
			return job, err
		}
		c.log.Warn("lease call not done; asking again", "op", op, "err", err)
		time.Sleep(time.Second)
		before()
	}
}

// heartbeat tells the server the job is in progress every AckWait/3 and
// renews the lease, stopping the run when a cancel notice was missed or
// another delivery took the job over.
func (c *claim) heartbeat(q queue, cancel context.CancelCauseFunc, done <-chan struct{}) {
	tick := time.NewTicker(max(q.ackWait/3, 100*time.Millisecond))
	defer tick.Stop()
	for {
		select {
		case <-done:
			return
		case <-tick.C:
		}
		if err := c.msg.InProgress(); err != nil {
			c.log.Warn("heartbeat", "err", err)
		}
		ctx, stop := bookkeeping()
		job, err := c.lease(ctx, q, store.LeaseRenew, &soakv1.LeaseRequest{})
		stop()
		switch {
		case errors.Is(err, errNotOurs):
			cancel(errSuperseded)
		case err != nil:
			c.log.Warn("heartbeat: renew lease", "err", err)
		case job.GetCancelRequested():
			cancel(errCancelRequested)
		}
	}
}

// progressPublisher returns a Progress hook that appends at most one
// progress event per interval.
func (c *claim) progressPublisher(q queue, interval time.Duration) func(*soakv1.JobProgress) {
	var last time.Time
	return func(p *soakv1.JobProgress) {
		if now := time.Now(); now.Sub(last) >= interval {
			last = now
			c.appendEvent(q, &soakv1.JobEvent{Kind: &soakv1.JobEvent_Progress{Progress: p}})
		}
	}
}

// appendEvent adds a non-final event to the job's log; a failure only
// costs watchers an event, so it is logged, not returned.
func (c *claim) appendEvent(q queue, ev *soakv1.JobEvent) {
	ctx, done := bookkeeping()
	defer done()
	if _, err := q.store.AppendEvent(ctx, c.id, ev); err != nil && !errors.Is(err, store.ErrJobEnded) {
		c.log.Warn("publish event", "err", err)
	}
}

// finish uploads the result files and ends the job as finished, unless
// the attempt lost the job or a cancel came in.
func (w *Worker) finish(q queue, c *claim, summary *soakv1.Summary, outDir string) {
	ctx, done := bookkeeping()
	job, err := c.lease(ctx, q, store.LeaseRenew, &soakv1.LeaseRequest{})
	done()
	switch {
	case errors.Is(err, errNotOurs):
		c.log.Warn("job taken over elsewhere; discarding this result")
		return
	case err != nil:
		// No scheduler now, say: upload anyway, the end call asks again.
		c.log.Warn("renew lease before upload", "err", err)
	case job.GetCancelRequested():
		w.cancelled(q, c)
		return
	}
	artifacts, err := upload(q.store, c, outDir)
	if err != nil {
		w.failAttempt(q, c, err)
		return
	}
	job, err = c.end(q, store.LeaseFinish, &soakv1.LeaseRequest{Summary: summary, Artifacts: artifacts})
	if errors.Is(err, errNotOurs) {
		c.log.Warn("job taken over elsewhere; discarding this result")
		return
	}
	if err != nil {
		c.log.Error("end job", "err", err)
		nak(c.msg, 2*time.Second, c.log)
		return
	}
	if job.GetState() == soakv1.JobState_JOB_STATE_FINISHED {
		w.cfg.Metrics.finished(summary)
	}
	c.log.Info("job finished", "state", job.GetState().String(), "artifacts", len(artifacts))
	w.ended(q, c, job)
}

// upload puts every regular file of outDir into the result store, in name
// order, and lists them.
func upload(st *store.Store, c *claim, outDir string) ([]*soakv1.Artifact, error) {
	entries, err := os.ReadDir(outDir)
	if err != nil {
		return nil, fmt.Errorf("list results: %w", err)
	}
	sort.Slice(entries, func(i, j int) bool { return entries[i].Name() < entries[j].Name() })
	var artifacts []*soakv1.Artifact
	for _, e := range entries {
		if !e.Type().IsRegular() {
			continue
		}
		// Each file gets its own deadline: result files may be large.
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
		a, err := st.PutArtifact(ctx, c.id, c.attempt, filepath.Join(outDir, e.Name()))
		cancel()
		if err != nil {
			return nil, err
		}
		artifacts = append(artifacts, a)
	}
	return artifacts, nil
}

// cancelled ends the job as cancelled after its run stopped.
func (w *Worker) cancelled(q queue, c *claim) {
	// A fail call ends the job cancelled: the record asks for the cancel.
	job, err := c.end(q, store.LeaseFail, &soakv1.LeaseRequest{Error: "cancelled"})
	if errors.Is(err, errNotOurs) {
		return
	}
	if err != nil {
		c.log.Error("end job", "err", err)
		nak(c.msg, 2*time.Second, c.log)
		return
	}
	c.log.Info("job cancelled")
	w.ended(q, c, job)
}

// failAttempt records a failed attempt. On the last delivery, or when
// the job is over one of the worker's limits, the job fails with every
// attempt's reason; otherwise it goes back to the queue after a delay that
// grows with the attempts.
func (w *Worker) failAttempt(q queue, c *claim, runErr error) {
	var limit *limitError
	permanent := errors.As(runErr, &limit)
	job, err := c.end(q, store.LeaseFail, &soakv1.LeaseRequest{Error: runErr.Error(), Final: c.last || permanent})
	if errors.Is(err, errNotOurs) {
		return
	}
	w.cfg.Metrics.failedAttempts.Inc()
	if err != nil {
		c.log.Error("record failed attempt", "err", err)
		nak(c.msg, 2*time.Second, c.log)
		return
	}
	c.log.Warn("attempt failed", "attempt", c.attempt, "err", runErr, "state", job.GetState().String())
	if store.IsFinal(job.GetState()) {
		w.ended(q, c, job)
		return
	}
	nak(c.msg, time.Duration(c.attempt)*w.cfg.RetryDelay, c.log)
}

// handBack returns a job to the queue when the worker shuts down, or
// ends it if a cancel came in. It asks a scheduler once: without one the
// redelivery closes the attempt.
func (w *Worker) handBack(q queue, c *claim) {
	ctx, done := bookkeeping()
	job, err := c.lease(ctx, q, store.LeaseFail, &soakv1.LeaseRequest{Error: errShutdown.Error()})
	done()
	if err != nil && !errors.Is(err, errNotOurs) {
		c.log.Warn("hand back job", "err", err)
	}
	if err == nil && store.IsFinal(job.GetState()) {
		w.ended(q, c, job)
		return
	}
	c.log.Info("job handed back to the queue")
	nak(c.msg, 0, c.log)
}

// ended closes the log of an ended job and removes its queue message.
func (w *Worker) ended(q queue, c *claim, job *soakv1.Job) {
	w.cfg.Metrics.ended(job)
	ctx, done := bookkeeping()
	defer done()
	if err := q.store.EnsureFinalEvent(ctx, job); err != nil {
		c.log.Warn("final event", "err", err)
	}
	if err := c.msg.DoubleAck(ctx); err != nil {
		c.log.Warn("ack", "err", err)
	}
}

func ack(msg jetstream.Msg, log *slog.Logger) {
	ctx, done := bookkeeping()
	defer done()
	if err := msg.DoubleAck(ctx); err != nil {
		log.Warn("ack", "err", err)
	}
}

func nak(msg jetstream.Msg, delay time.Duration, log *slog.Logger) {
	var err error
	if delay > 0 {
		err = msg.NakWithDelay(delay)
	} else {
		err = msg.Nak()
	}
	if err != nil {
		log.Warn("nak", "err", err)
	}
}

func terminate(msg jetstream.Msg, log *slog.Logger) {
	if err := msg.Term(); err != nil {
		log.Warn("term", "err", err)
	}
}
