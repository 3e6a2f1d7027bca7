package store_test

import (
	"context"
	"fmt"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

func TestJobIDsSortByTime(t *testing.T) {
	t.Parallel()
	base := time.Date(2026, 3, 1, 8, 0, 0, 0, time.UTC)
	offsets := []time.Duration{0, time.Millisecond, time.Second, time.Hour, 24 * 365 * time.Hour}
	var ids []string
	for _, d := range offsets {
		id := store.NewJobID(base.Add(d))
		if !store.ValidJobID(id) {
			t.Errorf("NewJobID made %q, which ValidJobID rejects", id)
		}
		ids = append(ids, id)
	}
	if !slices.IsSorted(ids) {
		t.Errorf("ids %v do not sort in time order", ids)
	}
	if a, b := store.NewJobID(base), store.NewJobID(base); a == b {
		t.Errorf("two ids of the same millisecond are equal: %s", a)
	}
}

func TestValidJobIDRejectsOtherStrings(t *testing.T) {
	t.Parallel()
	good := store.NewJobID(time.Now())
	tests := []string{"", good[:25], good + "0", strings.ToUpper(good), good[:25] + "*", good[:25] + ".", good[:25] + "u"}
	for _, id := range tests {
		if store.ValidJobID(id) {
			t.Errorf("ValidJobID(%q) = true", id)
		}
	}
}

func TestConcurrentAppendsNumberEventsDensely(t *testing.T) {
	t.Parallel()
	ns := store.EmbeddedNATS(t)
	// Appenders on separate connections, as scheduler and worker are.
	const appenders, each = 4, 10
	stores := make([]*store.Store, appenders)
	for i := range stores {
		nc, err := nats.Connect("", nats.InProcessServer(ns))
		if err != nil {
			t.Fatal(err)
		}
		defer nc.Close()
		if stores[i], err = store.Setup(t.Context(), nc, store.DefaultSettings()); err != nil {
			t.Fatal(err)
		}
	}
	id := store.NewJobID(time.Now())
	var wg sync.WaitGroup
	for i, st := range stores {
		wg.Go(func() {
			for j := range each {
				ev := &soakv1.JobEvent{Kind: &soakv1.JobEvent_Milestone{Milestone: &soakv1.MilestoneReached{Name: fmt.Sprintf("%d-%d", i, j)}}}
				if _, err := st.AppendEvent(t.Context(), id, ev); err != nil {
					t.Error(err)
				}
			}
		})
	}
	wg.Wait()
	job := &soakv1.Job{Id: id, State: soakv1.JobState_JOB_STATE_FAILED, FailureReason: "test"}
	for range 2 { // the second is a no-op: the log already ends
		if err := stores[0].EnsureFinalEvent(t.Context(), job); err != nil {
			t.Fatal(err)
		}
	}
	var got []uint64
	names := map[string]bool{}
	err := stores[1].FollowEvents(t.Context(), id, func(ev *soakv1.JobEvent) error {
		got = append(got, ev.GetSequence())
		names[ev.GetMilestone().GetName()] = true
		if store.IsFinalEvent(ev) {
			return errStop
		}
		return nil
	})
	if err != errStop {
		t.Fatal(err)
	}
	if len(got) != appenders*each+1 || len(names) != appenders*each+1 {
		t.Fatalf("read %d events with %d distinct names, want %d", len(got), len(names), appenders*each+1)
	}
	for i, seq := range got {
		if seq != uint64(i+1) {
			t.Fatalf("sequences %v, want 1..%d", got, len(got))
		}
	}
}

var errStop = fmt.Errorf("stop")

// TestWatchJobsReachesTheLatestRevision: a watch of the job records
// reports those there are, then each change and deletion with the
// revision that JobsRevision reports after it.
func TestWatchJobsReachesTheLatestRevision(t *testing.T) {
	t.Parallel()
	ns := store.EmbeddedNATS(t)
	nc, err := nats.Connect("", nats.InProcessServer(ns))
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	st, err := store.Setup(t.Context(), nc, store.DefaultSettings())
	if err != nil {
		t.Fatal(err)
	}
	if rev, err := st.JobsRevision(t.Context()); rev != 0 || err != nil {
		t.Fatalf("empty bucket at revision %d (%v)", rev, err)
	}
	first := store.NewJobID(time.Now())
	if err := st.CreateJob(t.Context(), &soakv1.Job{Id: first, State: soakv1.JobState_JOB_STATE_QUEUED}); err != nil {
		t.Fatal(err)
	}
	type change struct {
		id      string
		state   soakv1.JobState
		rev     uint64
		deleted bool
	}
	changes, caughtUp := make(chan change, 10), make(chan struct{}, 1)
	ctx, cancel := context.WithCancel(t.Context())
	defer cancel()
	go st.WatchJobs(ctx, func(id string, job *soakv1.Job, rev uint64) {
		changes <- change{id, job.GetState(), rev, job == nil}
	}, func() { caughtUp <- struct{}{} })
	next := func(want change) {
		t.Helper()
		select {
		case got := <-changes:
			latest, err := st.JobsRevision(t.Context())
			if got != want || err != nil || got.rev != latest {
				t.Fatalf("watch saw %+v, want %+v at the latest revision %d (%v)", got, want, latest, err)
			}
		case <-time.After(10 * time.Second):
			t.Fatalf("watch never saw %+v", want)
		}
	}
	next(change{first, soakv1.JobState_JOB_STATE_QUEUED, 1, false})
	<-caughtUp
	if _, err := st.UpdateJob(t.Context(), first, func(j *soakv1.Job) error {
		j.State = soakv1.JobState_JOB_STATE_RUNNING
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	next(change{first, soakv1.JobState_JOB_STATE_RUNNING, 2, false})
	if err := st.DeleteJob(t.Context(), first); err != nil {
		t.Fatal(err)
	}
	next(change{first, soakv1.JobState_JOB_STATE_UNSPECIFIED, 3, true})
}
