package scheduler

import (
	"context"
	"io"
	"log/slog"
	"maps"
	"slices"
	"sync"
	"testing"
	"time"

	soakv1 "soakfarm/proto/soak/v1"
)

// fakeRecords is a bucket of job records whose changes a test makes one by
// one: a watch sees the records there are, then every change.
type fakeRecords struct {
	mu       sync.Mutex
	revision uint64
	changes  chan func(seen func(string, *soakv1.Job, uint64))
	initial  map[string]soakv1.JobState
}

func (f *fakeRecords) WatchJobs(ctx context.Context, seen func(string, *soakv1.Job, uint64), caughtUp func()) error {
	f.mu.Lock()
	for id, st := range f.initial {
		seen(id, &soakv1.Job{Id: id, State: st, Owner: "o-" + id}, f.revision)
	}
	f.mu.Unlock()
	caughtUp()
	for {
		select {
		case <-ctx.Done():
			return ctx.Err()
		case change := <-f.changes:
			change(seen)
		}
	}
}

func (f *fakeRecords) JobsRevision(context.Context) (uint64, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	return f.revision, nil
}

// set records a change (st 0: the record is deleted): the bucket's
// revision moves at once, the watch hears of it when the test lets it
// (deliver).
func (f *fakeRecords) set(id string, st soakv1.JobState) (deliver func()) {
	f.mu.Lock()
	f.revision++
	rev := f.revision
	f.mu.Unlock()
	var job *soakv1.Job
	if st != 0 {
		job = &soakv1.Job{Id: id, State: st, Owner: "o-" + id}
	}
	return func() {
		f.changes <- func(seen func(string, *soakv1.Job, uint64)) { seen(id, job, rev) }
	}
}

// TestJobIndexFollowsTheRecords: the index starts from the records there
// are, follows each change and deletion, and a reader waits for the watch
// to reach the latest change rather than see an older index (or gives up
// after catchUpWait, for the records to be read directly).
func TestJobIndexFollowsTheRecords(t *testing.T) {
	t.Parallel()
	const (
		queued   = soakv1.JobState_JOB_STATE_QUEUED
		running  = soakv1.JobState_JOB_STATE_RUNNING
		finished = soakv1.JobState_JOB_STATE_FINISHED
	)
	f := &fakeRecords{revision: 2, initial: map[string]soakv1.JobState{"a": queued, "b": finished},
		changes: make(chan func(func(string, *soakv1.Job, uint64)))}
	ix := newJobIndex()
	ctx, cancel := context.WithCancel(t.Context())
	defer cancel()
	go ix.follow(ctx, f, slog.New(slog.NewTextHandler(io.Discard, nil)))

	expect := func(want map[soakv1.JobState]int) {
		t.Helper()
		got, ok := ix.stateCounts(t.Context(), f)
		for st, n := range got {
			if n == 0 {
				delete(got, st)
			}
		}
		if !ok || !maps.Equal(got, want) {
			t.Fatalf("counts %v (ok %v), want %v", got, ok, want)
		}
	}
	expect(map[soakv1.JobState]int{queued: 1, finished: 1})

	// A change the watch has not yet delivered: the snapshot waits for it.
	deliver := f.set("a", running)
	go func() { time.Sleep(50 * time.Millisecond); deliver() }()
	expect(map[soakv1.JobState]int{running: 1, finished: 1})

	f.set("c", queued)()
	f.set("b", 0)()
	expect(map[soakv1.JobState]int{running: 1, queued: 1})
	ids, ok := ix.matching(t.Context(), f, func(st soakv1.JobState, owner string) bool {
		return st == queued || owner == "o-a"
	})
	if slices.Sort(ids); !ok || !slices.Equal(ids, []string{"a", "c"}) {
		t.Errorf("jobs queued or owned by o-a: %v (ok %v), want a and c", ids, ok)
	}

	// A change that never arrives: the snapshot gives up.
	f.set("d", queued)
	start := time.Now()
	if got, ok := ix.stateCounts(t.Context(), f); ok || time.Since(start) < catchUpWait {
		t.Errorf("snapshot %v, %v after %s with a change missing", got, ok, time.Since(start))
	}
}
