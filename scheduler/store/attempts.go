package store

import (
	"fmt"
	"strings"
	"time"

	"google.golang.org/protobuf/types/known/timestamppb"

	soakv1 "soakfarm/proto/soak/v1"
)

// LastAttempt returns the job's latest attempt, nil if it never started.
func LastAttempt(job *soakv1.Job) *soakv1.Attempt {
	if n := len(job.GetAttempts()); n > 0 {
		return job.GetAttempts()[n-1]
	}
	return nil
}

// CloseOpenAttempt ends the latest attempt with reason if it has not
// ended: its worker stopped without reporting.
func CloseOpenAttempt(job *soakv1.Job, now time.Time, reason string) {
	if a := LastAttempt(job); a != nil && a.GetEndTime() == nil {
		a.EndTime = timestamppb.New(now)
		a.Error = reason
	}
}

// AttemptsReport lists each attempt's error, for a job's failure reason.
func AttemptsReport(job *soakv1.Job) string {
	parts := make([]string, 0, len(job.GetAttempts()))
	for _, a := range job.GetAttempts() {
		reason := a.GetError()
		if reason == "" {
			reason = "no error reported"
		}
		parts = append(parts, fmt.Sprintf("attempt %d on %s: %s", a.GetNumber(), a.GetWorker(), reason))
	}
	return strings.Join(parts, "; ")
}

// End moves the job to a final state as of now; reason (empty for a
// finished job) says why it failed or was cancelled.
func End(job *soakv1.Job, state soakv1.JobState, now time.Time, reason string) {
	job.State = state
	job.EndTime = timestamppb.New(now)
	job.FailureReason = reason
}
