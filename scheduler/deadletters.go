package scheduler

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"soakfarm/internal/pause"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

// maxDeliveriesAdvisory is the part of the server's max-deliveries
// advisory the scheduler reads.
type maxDeliveriesAdvisory struct {
	StreamSeq  uint64 `json:"stream_seq"`
	Deliveries uint64 `json:"deliveries"`
}

// lostWorkerReason closes an attempt whose worker never reported back.
const lostWorkerReason = "worker stopped responding (no heartbeat within the acknowledgement wait)"

// handleDeadLetters ends the jobs whose queue message used up its
// deliveries without a worker ending the job, which happens when the
// worker of the last delivery dies. Workers end jobs that fail on their
// last delivery themselves. Runs until ctx ends.
func (s *service) handleDeadLetters(ctx context.Context) {
	cons, err := s.store.JetStream().Consumer(ctx, store.DeadLetterStream, store.DeadLetterConsumer)
	if err != nil {
		s.log.Error("dead letters: no consumer", "err", err)
		return
	}
	for ctx.Err() == nil {
		msg, err := cons.Next(jetstream.FetchContext(ctx))
		if err != nil {
			if ctx.Err() == nil && !errors.Is(err, jetstream.ErrNoMessages) {
				s.log.Warn("dead letters: fetch", "err", err)
				_ = pause.For(ctx, time.Second)
			}
			continue
		}
		if err := s.endExhaustedJob(ctx, msg.Data()); err != nil {
			s.log.Warn("dead letters", "err", err)
			if err := msg.NakWithDelay(5 * time.Second); err != nil {
				s.log.Warn("dead letters: nak", "err", err)
			}
			continue
		}
		if err := msg.DoubleAck(ctx); err != nil {
			s.log.Warn("dead letters: ack", "err", err)
		}
	}
}

func (s *service) endExhaustedJob(ctx context.Context, data []byte) error {
	var adv maxDeliveriesAdvisory
	if err := json.Unmarshal(data, &adv); err != nil {
		return fmt.Errorf("decode advisory: %w", err)
	}
	id, err := s.store.QueueMessageJob(ctx, adv.StreamSeq)
	if errors.Is(err, store.ErrJobNotFound) {
		return nil // a worker ended the job and removed the message
	}
	if err != nil {
		return err
	}
	job, err := s.store.UpdateJob(ctx, id, func(job *soakv1.Job) error {
		if store.IsFinal(job.GetState()) {
			return errNoChange
		}
		now := time.Now()
		store.CloseOpenAttempt(job, now, lostWorkerReason)
		if job.GetCancelRequested() {
			store.End(job, soakv1.JobState_JOB_STATE_CANCELLED, now, job.GetFailureReason())
			return nil
		}
		store.End(job, soakv1.JobState_JOB_STATE_FAILED, now,
			fmt.Sprintf("gave up after %d deliveries: %s", adv.Deliveries, store.AttemptsReport(job)))
		return nil
	})
	switch {
	case errors.Is(err, store.ErrJobNotFound):
	case errors.Is(err, errNoChange):
	case err != nil:
		return err
	default:
		if err := s.store.EnsureFinalEvent(ctx, job); err != nil {
			return err
		}
		s.metrics.givenUp.Inc()
		s.log.Warn("job failed: deliveries used up", "job", id, "reason", job.GetFailureReason())
	}
	return s.store.DeleteQueueMessage(ctx, adv.StreamSeq)
}
