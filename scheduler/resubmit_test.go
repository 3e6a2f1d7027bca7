package scheduler_test

import (
	"testing"
	"time"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/access"
	"soakfarm/scheduler/store"
	"soakfarm/worker"
)

func TestResubmitQueuesAJobItsFirstSubmitNeverQueued(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	_, client := startScheduler(t, nc, testSettings())
	startWorker(t, nc, worker.Config{Name: "w1", Runner: quickRunner})

	// What a scheduler killed between writing the record and queueing
	// leaves behind: the key claimed (scoped to the local client, as with
	// no token file) and
	// a queued record, but no queue message.
	st, err := store.Open(t.Context(), nc)
	if err != nil {
		t.Fatal(err)
	}
	const key = "batch-9/flange"
	id := store.NewJobID(time.Now())
	if _, claimed, err := st.ClaimClientKey(t.Context(), access.LocalName+"/"+key, id); err != nil || !claimed {
		t.Fatalf("claim key: %v, claimed %v", err, claimed)
	}
	if err := st.CreateJob(t.Context(), &soakv1.Job{Id: id, ClientKey: key, Spec: sphereSpec("flange"), State: soakv1.JobState_JOB_STATE_QUEUED}); err != nil {
		t.Fatal(err)
	}

	// The client, never answered, submits again with the same key.
	again := submit(t, client, sphereSpec("flange"), key)
	if again.GetId() != id {
		t.Fatalf("resubmit made job %s, want the first submit's %s", again.GetId(), id)
	}
	events, err := watchAll(t.Context(), client, id, 0)
	if err != nil {
		t.Fatal(err)
	}
	if job := getJob(t, client, id); job.GetState() != soakv1.JobState_JOB_STATE_FINISHED || len(job.GetAttempts()) != 1 {
		t.Errorf("job after the resubmit: %s with %d attempts (events %v), want finished once", job.GetState(), len(job.GetAttempts()), kinds(events))
	}
}

// A job whose record was written but never queued, and that no client will
// submit again (it had no key), is queued when a scheduler starts.
func TestStartQueuesAStrandedJob(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	st, err := store.Setup(t.Context(), nc, testSettings())
	if err != nil {
		t.Fatal(err)
	}
	id := store.NewJobID(time.Now())
	if err := st.CreateJob(t.Context(), &soakv1.Job{Id: id, Spec: sphereSpec("stranded"), State: soakv1.JobState_JOB_STATE_QUEUED}); err != nil {
		t.Fatal(err)
	}
	_, client := startScheduler(t, nc, testSettings())
	startWorker(t, nc, worker.Config{Name: "w1", Runner: quickRunner})
	if _, err := watchAll(t.Context(), client, id, 0); err != nil {
		t.Fatal(err)
	}
	if job := getJob(t, client, id); job.GetState() != soakv1.JobState_JOB_STATE_FINISHED || len(job.GetAttempts()) != 1 {
		t.Errorf("stranded job: %s with %d attempts, want finished once", job.GetState(), len(job.GetAttempts()))
	}
}
