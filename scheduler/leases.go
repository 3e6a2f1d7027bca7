package scheduler

import (
	"context"
	"crypto/sha256"
	"crypto/subtle"
	"errors"
	"fmt"
	"sync"
	"time"

	"google.golang.org/protobuf/types/known/timestamppb"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

// Only schedulers write job records. A worker asks by lease calls: start
// moves a job it took from the queue to running under a new attempt held
// by a token the worker picked, and renew, finish and fail are done only
// for the token of the record's running attempt. The record keeps the
// token's SHA-256, so a restarted scheduler checks tokens as well.

// leaseTokenBytes is the length of a lease token: 256 random bits.
const leaseTokenBytes = 32

// leaseCallTimeout bounds the record work of one lease call.
const leaseCallTimeout = 10 * time.Second

// maxLeaseCalls bounds the lease calls in progress at once.
const maxLeaseCalls = 32

// leaseDesk runs lease calls off the NATS delivery goroutine, at most
// maxLeaseCalls at once, and lets a closing scheduler wait for the calls
// in progress.
type leaseDesk struct {
	slots chan struct{}
	mu    sync.Mutex
	shut  bool
	calls sync.WaitGroup
}

func newLeaseDesk() *leaseDesk {
	return &leaseDesk{slots: make(chan struct{}, maxLeaseCalls)}
}

// run runs call unless the desk is closed; a call it drops times out at
// the worker, which asks again.
func (d *leaseDesk) run(call func()) {
	d.mu.Lock()
	defer d.mu.Unlock()
	if d.shut {
		return
	}
	d.calls.Go(func() {
		d.slots <- struct{}{}
		defer func() { <-d.slots }()
		call()
	})
}

// close takes no more calls and waits for those in progress.
func (d *leaseDesk) close() {
	d.mu.Lock()
	d.shut = true
	d.mu.Unlock()
	d.calls.Wait()
}

// Why a lease call is refused.
var (
	errLeaseEnded     = errors.New("job already ended")
	errHeldElsewhere  = errors.New("job is running on another delivery")
	errNotLeaseHolder = errors.New("lease token does not hold the job's running attempt")
)

// serveLease answers one lease call.
func (s *service) serveLease(op store.LeaseOp, req *soakv1.LeaseRequest, answer func(*soakv1.LeaseReply)) {
	ctx, cancel := context.WithTimeout(context.Background(), leaseCallTimeout)
	defer cancel()
	var (
		job *soakv1.Job
		err error
	)
	switch op {
	case store.LeaseStart:
		job, err = s.startLease(ctx, req)
	case store.LeaseRenew:
		job, err = s.renewLease(ctx, req)
	case store.LeaseFinish:
		job, err = s.holderUpdate(ctx, req, func(job *soakv1.Job, now time.Time) {
			if job.GetCancelRequested() {
				store.CloseOpenAttempt(job, now, "cancelled")
				store.End(job, soakv1.JobState_JOB_STATE_CANCELLED, now, job.GetFailureReason())
				return
			}
			store.LastAttempt(job).EndTime = timestamppb.New(now)
			store.End(job, soakv1.JobState_JOB_STATE_FINISHED, now, "")
			job.Summary = req.GetSummary()
			job.Artifacts = req.GetArtifacts()
		})
	case store.LeaseFail:
		job, err = s.holderUpdate(ctx, req, func(job *soakv1.Job, now time.Time) {
			store.CloseOpenAttempt(job, now, req.GetError())
			switch {
			case job.GetCancelRequested():
				store.End(job, soakv1.JobState_JOB_STATE_CANCELLED, now, job.GetFailureReason())
			case req.GetFinal():
				store.End(job, soakv1.JobState_JOB_STATE_FAILED, now, store.AttemptsReport(job))
			default:
				job.State = soakv1.JobState_JOB_STATE_QUEUED
			}
		})
	default:
		err = fmt.Errorf("unknown lease call %q", op)
	}
	reply := &soakv1.LeaseReply{Job: job}
	switch {
	case err == nil:
	case errors.Is(err, store.ErrJobNotFound):
		reply.Refusal = soakv1.LeaseRefusal_LEASE_REFUSAL_NOT_FOUND
	case errors.Is(err, errLeaseEnded):
		reply.Refusal = soakv1.LeaseRefusal_LEASE_REFUSAL_ENDED
	case errors.Is(err, errHeldElsewhere):
		reply.Refusal = soakv1.LeaseRefusal_LEASE_REFUSAL_HELD_ELSEWHERE
	case errors.Is(err, errNotLeaseHolder):
		reply.Refusal = soakv1.LeaseRefusal_LEASE_REFUSAL_NOT_HOLDER
	default:
		reply.Refusal = soakv1.LeaseRefusal_LEASE_REFUSAL_ERROR
		s.log.Warn("lease call", "op", op, "job", req.GetJobId(), "err", err)
	}
	if err != nil {
		reply.Job = nil // the record is the holder's business only
		reply.Error = err.Error()
	}
	answer(reply)
}

// startLease moves the record to running under a new attempt held by
// req's token, or says why the queue message is not to be run. A job
// cancelled while queued is ended here.
func (s *service) startLease(ctx context.Context, req *soakv1.LeaseRequest) (*soakv1.Job, error) {
	if len(req.GetToken()) != leaseTokenBytes {
		return nil, fmt.Errorf("lease token: want %d bytes, got %d", leaseTokenBytes, len(req.GetToken()))
	}
	if checkJobID(req.GetJobId()) != nil {
		// No record can have such an id: the queue message is dropped.
		return nil, fmt.Errorf("job %q: %w", req.GetJobId(), store.ErrJobNotFound)
	}
	hash := sha256.Sum256(req.GetToken())
	job, err := s.store.UpdateJob(ctx, req.GetJobId(), func(job *soakv1.Job) error {
		if holds(job, req) {
			// A repeat of this start, its reply lost.
			return errNoChange
		}
		if store.IsFinal(job.GetState()) {
			return errLeaseEnded
		}
		if job.GetState() == soakv1.JobState_JOB_STATE_RUNNING && req.GetDelivery() <= 1 {
			// A first delivery finding the job running is a second
			// message for the job, not a redelivery.
			return errHeldElsewhere
		}
		now := time.Now()
		// A running record on a redelivery: the previous worker is gone.
		store.CloseOpenAttempt(job, now, lostWorkerReason)
		if job.GetCancelRequested() {
			store.End(job, soakv1.JobState_JOB_STATE_CANCELLED, now, job.GetFailureReason())
			return nil
		}
		job.Attempts = append(job.Attempts, &soakv1.Attempt{
			Number: uint32(len(job.GetAttempts()) + 1), Worker: req.GetWorker(),
			StartTime: timestamppb.New(now), LeaseSha256: hash[:],
		})
		job.State = soakv1.JobState_JOB_STATE_RUNNING
		job.Worker = req.GetWorker()
		if job.GetStartTime() == nil {
			job.StartTime = timestamppb.New(now)
		}
		return nil
	})
	if errors.Is(err, errNoChange) {
		return job, nil
	}
	return job, err
}

// renewLease reports the state of a job its caller holds, without the
// spec: a heartbeat needs only cancel_requested.
func (s *service) renewLease(ctx context.Context, req *soakv1.LeaseRequest) (*soakv1.Job, error) {
	job, _, err := s.store.Job(ctx, req.GetJobId())
	if err != nil {
		return nil, err
	}
	if !holds(job, req) {
		return nil, errNotLeaseHolder
	}
	return &soakv1.Job{Id: job.GetId(), State: job.GetState(), CancelRequested: job.GetCancelRequested(), FailureReason: job.GetFailureReason()}, nil
}

// holderUpdate changes the record if req's token holds its running
// attempt. A call whose token belongs to the job's last attempt, already
// ended, is taken for a repeat of the call that ended it, whose reply was
// lost (NATS going down between the write and the reply, say): it gets
// the record as it is, so the worker acknowledges the queue message.
func (s *service) holderUpdate(ctx context.Context, req *soakv1.LeaseRequest, change func(job *soakv1.Job, now time.Time)) (*soakv1.Job, error) {
	job, err := s.store.UpdateJob(ctx, req.GetJobId(), func(job *soakv1.Job) error {
		if holds(job, req) {
			change(job, time.Now())
			return nil
		}
		if a := store.LastAttempt(job); a != nil && a.GetEndTime() != nil && job.GetState() != soakv1.JobState_JOB_STATE_RUNNING && tokenOf(a, req) {
			return errNoChange
		}
		return errNotLeaseHolder
	})
	if errors.Is(err, errNoChange) {
		return job, nil
	}
	return job, err
}

// holds reports whether req's token and worker hold the job's running
// attempt.
func holds(job *soakv1.Job, req *soakv1.LeaseRequest) bool {
	a := store.LastAttempt(job)
	return job.GetState() == soakv1.JobState_JOB_STATE_RUNNING && a != nil && a.GetEndTime() == nil && tokenOf(a, req)
}

// tokenOf reports whether req's token and worker are those of attempt a.
// The hashes are compared in constant time.
func tokenOf(a *soakv1.Attempt, req *soakv1.LeaseRequest) bool {
	hash := sha256.Sum256(req.GetToken())
	return a.GetWorker() == req.GetWorker() && len(a.GetLeaseSha256()) == sha256.Size &&
		subtle.ConstantTimeCompare(hash[:], a.GetLeaseSha256()) == 1
}
