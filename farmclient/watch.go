package farmclient

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"soakfarm/internal/pause"
	soakv1 "soakfarm/proto/soak/v1"
)

// IsFinal reports whether ev is a job's last event: finished, failed or
// cancelled.
func IsFinal(ev *soakv1.JobEvent) bool {
	switch ev.GetKind().(type) {
	case *soakv1.JobEvent_Finished, *soakv1.JobEvent_Failed, *soakv1.JobEvent_Cancelled:
		return true
	}
	return false
}

// errStreamEnded marks a stream that closed before the job's final event,
// as a scheduler shutting down does; Watch resumes after it.
var errStreamEnded = errors.New("event stream ended before the job's final event")

// callbackError carries the error of Watch's callback, which ends the watch
// as it is.
type callbackError struct{ err error }

func (e *callbackError) Error() string { return e.err.Error() }

// Watch calls fn with every event of the job after sequence afterSeq (0
// replays from the first event), in order, until the job's final event has
// been handled. When the stream drops, Watch opens a new one after the last
// sequence it handled, so fn sees each event once; it waits between
// attempts as the client's RetryPolicy says and gives up after its
// MaxAttempts consecutive failures. An error from fn ends the watch and is
// returned unchanged.
func (c *Client) Watch(ctx context.Context, jobID string, afterSeq uint64, fn func(*soakv1.JobEvent) error) error {
	last := afterSeq
	failures := 0
	for {
		before := last
		err := c.watchStream(ctx, jobID, &last, fn)
		if err == nil {
			return nil
		}
		var cb *callbackError
		if errors.As(err, &cb) {
			return cb.err
		}
		if ctx.Err() != nil {
			return fmt.Errorf("watch job %s: %w", jobID, ctx.Err())
		}
		if !resumable(err) {
			return fmt.Errorf("watch job %s: %w", jobID, err)
		}
		if last > before {
			failures = 0
		}
		failures++
		if failures > c.retry.MaxAttempts {
			return fmt.Errorf("watch job %s: gave up after %d attempts, last event %d: %w", jobID, c.retry.MaxAttempts, last, err)
		}
		if err := pause.For(ctx, c.retry.delay(failures)); err != nil {
			return fmt.Errorf("watch job %s: %w", jobID, err)
		}
	}
}

// watchStream follows one stream, advancing *last past every event handed
// to fn. It returns nil after the final event.
func (c *Client) watchStream(ctx context.Context, jobID string, last *uint64, fn func(*soakv1.JobEvent) error) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stream, err := c.api.WatchJob(ctx, &soakv1.WatchJobRequest{JobId: jobID, AfterSequence: *last})
	if err != nil {
		return err
	}
	for {
		resp, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return errStreamEnded
		}
		if err != nil {
			return err
		}
		ev := resp.GetEvent()
		if ev.GetSequence() <= *last {
			continue // already handled before a resume
		}
		// Events may already be buffered when the caller gives up; it
		// must not be called again after that.
		if err := ctx.Err(); err != nil {
			return err
		}
		if err := fn(ev); err != nil {
			return &callbackError{err: err}
		}
		*last = ev.GetSequence()
		if IsFinal(ev) {
			return nil
		}
	}
}

// resumable tells a dropped or refused stream, worth another attempt, from
// an answer that will not change (unknown job, bad request).
func resumable(err error) bool {
	if errors.Is(err, errStreamEnded) {
		return true
	}
	switch status.Code(err) {
	case codes.Unavailable, codes.Aborted, codes.Internal, codes.Unknown,
		codes.ResourceExhausted, codes.Canceled, codes.DeadlineExceeded:
		// Canceled and DeadlineExceeded come from the server's side here:
		// Watch checks its own context first.
		return true
	}
	return false
}

// delay is the wait before attempt n (from 1), doubling from FirstDelay up
// to MaxDelay, with up to a fifth added at random so many clients that lost
// the same scheduler do not come back in step.
func (p RetryPolicy) delay(n int) time.Duration {
	d := p.FirstDelay
	for i := 1; i < n && d < p.MaxDelay; i++ {
		d *= 2
	}
	d = min(d, p.MaxDelay)
	if d <= 0 {
		return 0
	}
	return d + rand.N(d/5+1)
}
