package scheduler

import (
	"context"
	"errors"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

// requeueStranded queues again every job whose record says queued, that
// never started, and that has no message in the work queue: what a
// scheduler killed between writing a record and queueing it leaves behind
// when the client sends no key to retry with. A job queued by a submit
// running at the same time is published twice within the duplicate window,
// and the server drops the second.
func (s *service) requeueStranded(ctx context.Context) (int, error) {
	ids, err := s.store.JobIDs(ctx)
	if err != nil {
		return 0, err
	}
	queued, err := s.store.QueuedJobIDs(ctx)
	if err != nil {
		return 0, err
	}
	n := 0
	for _, id := range ids {
		if queued[id] {
			continue
		}
		job, _, err := s.store.Job(ctx, id)
		if errors.Is(err, store.ErrJobNotFound) {
			continue
		}
		if err != nil {
			return n, err
		}
		if job.GetState() != soakv1.JobState_JOB_STATE_QUEUED || len(job.GetAttempts()) > 0 || job.GetCancelRequested() {
			continue
		}
		if err := s.store.Enqueue(ctx, id); err != nil {
			return n, err
		}
		s.log.Warn("queued a stranded job again", "job", id)
		n++
	}
	return n, nil
}
