package scheduler_test

import (
	"bytes"
	"errors"
	"testing"
	"time"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

// TestLeaseCallsNeedTheRunningAttemptsToken makes lease calls by hand, as
// a worker would, and checks that only the token and worker of the job's
// running attempt can renew, fail or finish it, and that a start is
// refused while another delivery holds the job.
func TestLeaseCallsNeedTheRunningAttemptsToken(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	_, client := startScheduler(t, nc, testSettings())
	st, err := store.Open(t.Context(), nc)
	if err != nil {
		t.Fatal(err)
	}
	id := submit(t, client, sphereSpec("lease"), "").GetId()
	holder := bytes.Repeat([]byte{7}, 32)
	stranger := bytes.Repeat([]byte{8}, 32)

	steps := []struct {
		name    string
		op      store.LeaseOp
		req     *soakv1.LeaseRequest
		refusal soakv1.LeaseRefusal
		state   soakv1.JobState // the record's state after the call
	}{
		{"start with a short token", store.LeaseStart,
			&soakv1.LeaseRequest{Worker: "w1", Delivery: 1, Token: []byte("short")},
			soakv1.LeaseRefusal_LEASE_REFUSAL_ERROR, soakv1.JobState_JOB_STATE_QUEUED},
		{"start", store.LeaseStart,
			&soakv1.LeaseRequest{Worker: "w1", Delivery: 1, Token: holder},
			soakv1.LeaseRefusal_LEASE_REFUSAL_UNSPECIFIED, soakv1.JobState_JOB_STATE_RUNNING},
		// A repeat of the start, its reply lost, gets the record it made.
		{"start again with the same token", store.LeaseStart,
			&soakv1.LeaseRequest{Worker: "w1", Delivery: 1, Token: holder},
			soakv1.LeaseRefusal_LEASE_REFUSAL_UNSPECIFIED, soakv1.JobState_JOB_STATE_RUNNING},
		{"second first delivery", store.LeaseStart,
			&soakv1.LeaseRequest{Worker: "w2", Delivery: 1, Token: stranger},
			soakv1.LeaseRefusal_LEASE_REFUSAL_HELD_ELSEWHERE, soakv1.JobState_JOB_STATE_RUNNING},
		{"renew with a wrong token", store.LeaseRenew,
			&soakv1.LeaseRequest{Worker: "w1", Token: stranger},
			soakv1.LeaseRefusal_LEASE_REFUSAL_NOT_HOLDER, soakv1.JobState_JOB_STATE_RUNNING},
		{"fail with a wrong token", store.LeaseFail,
			&soakv1.LeaseRequest{Worker: "w1", Token: stranger, Error: "forged", Final: true},
			soakv1.LeaseRefusal_LEASE_REFUSAL_NOT_HOLDER, soakv1.JobState_JOB_STATE_RUNNING},
		{"finish with the token under another worker's name", store.LeaseFinish,
			&soakv1.LeaseRequest{Worker: "w2", Token: holder},
			soakv1.LeaseRefusal_LEASE_REFUSAL_NOT_HOLDER, soakv1.JobState_JOB_STATE_RUNNING},
		{"renew", store.LeaseRenew,
			&soakv1.LeaseRequest{Worker: "w1", Token: holder},
			soakv1.LeaseRefusal_LEASE_REFUSAL_UNSPECIFIED, soakv1.JobState_JOB_STATE_RUNNING},
		{"finish", store.LeaseFinish,
			&soakv1.LeaseRequest{Worker: "w1", Token: holder, Summary: &soakv1.Summary{}},
			soakv1.LeaseRefusal_LEASE_REFUSAL_UNSPECIFIED, soakv1.JobState_JOB_STATE_FINISHED},
		// A repeat of the ending call, its reply lost, gets the record
		// unchanged.
		{"finish again", store.LeaseFinish,
			&soakv1.LeaseRequest{Worker: "w1", Token: holder, Summary: &soakv1.Summary{StopReason: "repeat"}},
			soakv1.LeaseRefusal_LEASE_REFUSAL_UNSPECIFIED, soakv1.JobState_JOB_STATE_FINISHED},
		{"fail after the end with a wrong token", store.LeaseFail,
			&soakv1.LeaseRequest{Worker: "w1", Token: stranger, Error: "late"},
			soakv1.LeaseRefusal_LEASE_REFUSAL_NOT_HOLDER, soakv1.JobState_JOB_STATE_FINISHED},
		{"start after the end", store.LeaseStart,
			&soakv1.LeaseRequest{Worker: "w2", Delivery: 2, Token: stranger},
			soakv1.LeaseRefusal_LEASE_REFUSAL_ENDED, soakv1.JobState_JOB_STATE_FINISHED},
	}
	for _, step := range steps {
		step.req.JobId = id
		reply, err := st.Lease(t.Context(), step.op, step.req)
		if err != nil {
			t.Fatalf("%s: %v", step.name, err)
		}
		if reply.GetRefusal() != step.refusal {
			t.Errorf("%s: refusal %s (%q), want %s", step.name, reply.GetRefusal(), reply.GetError(), step.refusal)
		}
		if step.refusal != soakv1.LeaseRefusal_LEASE_REFUSAL_UNSPECIFIED && reply.GetJob() != nil {
			t.Errorf("%s: a refused call returned the record", step.name)
		}
		job := getJob(t, client, id)
		if job.GetState() != step.state {
			t.Errorf("%s: record %s, want %s", step.name, job.GetState(), step.state)
		}
	}
	job := getJob(t, client, id)
	if job.GetSummary().GetStopReason() != "" {
		t.Errorf("a repeated finish changed the summary: %v", job.GetSummary())
	}
	if n := len(job.GetAttempts()); n != 1 || job.GetAttempts()[0].GetError() != "" || job.GetAttempts()[0].GetWorker() != "w1" {
		t.Errorf("attempts %v, want one clean attempt on w1", job.GetAttempts())
	}
}

// TestLeaseCallWithoutSchedulerSaysSo checks that a worker tells a
// missing scheduler from a refusal, so it can keep the job queued.
func TestLeaseCallWithoutSchedulerSaysSo(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	st, err := store.Setup(t.Context(), nc, testSettings())
	if err != nil {
		t.Fatal(err)
	}
	req := &soakv1.LeaseRequest{JobId: store.NewJobID(time.Now()), Worker: "w1", Delivery: 1, Token: bytes.Repeat([]byte{7}, 32)}
	if _, err := st.Lease(t.Context(), store.LeaseStart, req); !errors.Is(err, store.ErrNoScheduler) {
		t.Errorf("lease call without a scheduler: %v, want ErrNoScheduler", err)
	}
}
