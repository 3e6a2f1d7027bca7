package store

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"strings"
	"time"

	"github.com/nats-io/nats.go/jetstream"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	"soakfarm/internal/pause"
	soakv1 "soakfarm/proto/soak/v1"
)

func eventsSubject(id string) string { return eventsSubjectPrefix + id }

// IsFinal reports whether a job in state has ended.
func IsFinal(state soakv1.JobState) bool {
	switch state {
	case soakv1.JobState_JOB_STATE_FINISHED, soakv1.JobState_JOB_STATE_FAILED, soakv1.JobState_JOB_STATE_CANCELLED:
		return true
	}
	return false
}

// StateWord is the lower-case word for a state ("queued", "running",
// ...), as command lines and metric labels show it.
func StateWord(st soakv1.JobState) string {
	return strings.ToLower(strings.TrimPrefix(st.String(), "JOB_STATE_"))
}

// IsFinalEvent reports whether ev is the last event a job gets.
func IsFinalEvent(ev *soakv1.JobEvent) bool {
	switch ev.GetKind().(type) {
	case *soakv1.JobEvent_Finished, *soakv1.JobEvent_Failed, *soakv1.JobEvent_Cancelled:
		return true
	}
	return false
}

// AppendEvent adds ev to the job's event log numbered one past the last
// event, and returns it with sequence and time set. Appenders in different
// processes are put in order by the server: each publish states the last
// stream sequence it saw on the job's subject and is refused if another
// came first, and then retried. ErrJobEnded when the log already ends with
// a final event.
//
// A call that gets no answer (the broker restarting, say) is asked again
// until ctx ends. A publish may have been stored even so, its answer lost:
// each carries a message ID, and finding its own ID on the last event of
// the log tells the appender that it is done, so that the event is not
// stored twice.
func (s *Store) AppendEvent(ctx context.Context, id string, ev *soakv1.JobEvent) (*soakv1.JobEvent, error) {
	subject := eventsSubject(id)
	if ev.GetTime() == nil {
		ev.Time = timestamppb.Now()
	}
	nonce := NewJobID(time.Now()) // sortable and random: unique per call
	var unanswered []string       // IDs of publishes that may have been stored
	for {
		var lastSequence, lastStreamSeq uint64
		raw, err := answered(ctx, func(ctx context.Context) (*jetstream.RawStreamMsg, error) {
			return s.events.GetLastMsgForSubject(ctx, subject)
		})
		switch {
		case errors.Is(err, jetstream.ErrMsgNotFound):
		case err != nil:
			return nil, fmt.Errorf("read last event of job %s: %w", id, err)
		default:
			last := &soakv1.JobEvent{}
			if err := proto.Unmarshal(raw.Data, last); err != nil {
				return nil, fmt.Errorf("decode event of job %s: %w", id, err)
			}
			if slices.Contains(unanswered, raw.Header.Get(jetstream.MsgIDHeader)) {
				return last, nil // an unanswered publish was stored after all
			}
			if IsFinalEvent(last) {
				return nil, fmt.Errorf("event for job %s: %w", id, ErrJobEnded)
			}
			lastSequence, lastStreamSeq = last.GetSequence(), raw.Sequence
		}
		ev.Sequence = lastSequence + 1
		data, err := proto.Marshal(ev)
		if err != nil {
			return nil, fmt.Errorf("encode event of job %s: %w", id, err)
		}
		msgID := fmt.Sprintf("%s.%d.%s", id, ev.Sequence, nonce)
		actx, cancel := context.WithTimeout(ctx, publishAnswerWait)
		_, err = s.js.Publish(actx, subject, data, jetstream.WithMsgID(msgID), jetstream.WithExpectLastSequencePerSubject(lastStreamSeq))
		cancel()
		var apiErr *jetstream.APIError
		switch {
		case err == nil:
			return ev, nil
		case isWrongLastSequence(err):
		case errors.As(err, &apiErr) || ctx.Err() != nil:
			return nil, fmt.Errorf("append event of job %s: %w", id, err)
		default: // no answer: ask again once the connection may be back
			unanswered = append(unanswered, msgID)
			if err := pause.For(ctx, publishRetryWait); err != nil {
				return nil, fmt.Errorf("append event of job %s: %w", id, err)
			}
		}
	}
}

// publishAnswerWait is how long one request to the broker waits for its
// answer before it is asked again; publishRetryWait the pause between.
const (
	publishAnswerWait = 2 * time.Second
	publishRetryWait  = 250 * time.Millisecond
)

// answered calls get, each call bounded by publishAnswerWait, until it
// answers (a result or a server's error) or ctx ends.
func answered[T any](ctx context.Context, get func(context.Context) (T, error)) (T, error) {
	for {
		actx, cancel := context.WithTimeout(ctx, publishAnswerWait)
		v, err := get(actx)
		cancel()
		var apiErr *jetstream.APIError
		if err == nil || errors.As(err, &apiErr) || errors.Is(err, jetstream.ErrMsgNotFound) || ctx.Err() != nil {
			return v, err
		}
		if err := pause.For(ctx, publishRetryWait); err != nil {
			return v, err
		}
	}
}

func isWrongLastSequence(err error) bool {
	var apiErr *jetstream.APIError
	return errors.As(err, &apiErr) &&
		(apiErr.ErrorCode == jetstream.JSErrCodeStreamWrongLastSequence ||
			apiErr.ErrorCode == jetstream.JSErrCodeStreamWrongLastSequenceConstant)
}

// FinalEvent is the event that closes the log of a job that has ended.
func FinalEvent(job *soakv1.Job) *soakv1.JobEvent {
	ev := &soakv1.JobEvent{Time: job.GetEndTime()}
	switch job.GetState() {
	case soakv1.JobState_JOB_STATE_FINISHED:
		ev.Kind = &soakv1.JobEvent_Finished{Finished: &soakv1.JobFinished{
			Summary: job.GetSummary(), Artifacts: job.GetArtifacts(),
		}}
	case soakv1.JobState_JOB_STATE_FAILED:
		ev.Kind = &soakv1.JobEvent_Failed{Failed: &soakv1.JobFailed{Reason: job.GetFailureReason()}}
	case soakv1.JobState_JOB_STATE_CANCELLED:
		ev.Kind = &soakv1.JobEvent_Cancelled{Cancelled: &soakv1.JobCancelled{Reason: job.GetFailureReason()}}
	default:
		return nil
	}
	return ev
}

// EnsureFinalEvent appends the final event of an ended job unless its log
// has one. Whoever ends a job calls it after writing the record; a watcher
// calls it too, so a process dying between the two leaves no watch
// hanging.
func (s *Store) EnsureFinalEvent(ctx context.Context, job *soakv1.Job) error {
	ev := FinalEvent(job)
	if ev == nil {
		return fmt.Errorf("job %s is %s, not ended", job.GetId(), job.GetState())
	}
	if _, err := s.AppendEvent(ctx, job.GetId(), ev); err != nil && !errors.Is(err, ErrJobEnded) {
		return err
	}
	return nil
}

// FollowEvents calls emit with each event of the job in order, from the
// first one on, and keeps following new ones until emit returns an error
// (returned as is) or ctx ends.
func (s *Store) FollowEvents(ctx context.Context, id string, emit func(*soakv1.JobEvent) error) error {
	// An ordered consumer is cheap, needs no clean-up, and recreates itself
	// after a gap or reconnect.
	cons, err := s.js.OrderedConsumer(ctx, EventsStream, jetstream.OrderedConsumerConfig{
		FilterSubjects: []string{eventsSubject(id)},
		DeliverPolicy:  jetstream.DeliverAllPolicy,
	})
	if err != nil {
		return fmt.Errorf("follow events of job %s: %w", id, err)
	}
	iter, err := cons.Messages()
	if err != nil {
		return fmt.Errorf("follow events of job %s: %w", id, err)
	}
	stopped := make(chan struct{})
	defer close(stopped)
	go func() {
		select {
		case <-ctx.Done():
		case <-stopped:
		}
		iter.Stop()
	}()
	for {
		msg, err := iter.Next()
		if err != nil {
			if ctx.Err() != nil {
				return ctx.Err()
			}
			return fmt.Errorf("follow events of job %s: %w", id, err)
		}
		ev := &soakv1.JobEvent{}
		if err := proto.Unmarshal(msg.Data(), ev); err != nil {
			return fmt.Errorf("decode event of job %s: %w", id, err)
		}
		if err := emit(ev); err != nil {
			return err
		}
	}
}
