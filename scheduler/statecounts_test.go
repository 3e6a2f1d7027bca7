package scheduler

import (
	"context"
	"io"
	"log/slog"
	"maps"
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
	changes  chan func(seen func(string, soakv1.JobState, uint64, bool))
	initial  map[string]soakv1.JobState
}

func (f *fakeRecords) WatchJobStates(ctx context.Context, seen func(string, soakv1.JobState, uint64, bool), caughtUp func()) error {
	f.mu.Lock()
	for id, st := range f.initial {
		seen(id, st, f.revision, false)
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

// set records a change: the bucket's revision moves at once, the watch
// hears of it when the test lets it (deliver).
func (f *fakeRecords) set(id string, st soakv1.JobState, deleted bool) (deliver func()) {
	f.mu.Lock()
	f.revision++
	rev := f.revision
	f.mu.Unlock()
	return func() {
		f.changes <- func(seen func(string, soakv1.JobState, uint64, bool)) { seen(id, st, rev, deleted) }
	}
}

// TestStateCountsFollowTheRecords: the counts start from the records there
// are, follow each change and deletion, and a snapshot waits for the watch
// to reach the latest change rather than show an older count (or gives up
// after countsCatchUpWait, for the records to be counted directly).
func TestStateCountsFollowTheRecords(t *testing.T) {
	t.Parallel()
	const (
		queued   = soakv1.JobState_JOB_STATE_QUEUED
		running  = soakv1.JobState_JOB_STATE_RUNNING
		finished = soakv1.JobState_JOB_STATE_FINISHED
	)
	f := &fakeRecords{revision: 2, initial: map[string]soakv1.JobState{"a": queued, "b": finished},
		changes: make(chan func(func(string, soakv1.JobState, uint64, bool)))}
	sc := newStateCounts()
	ctx, cancel := context.WithCancel(t.Context())
	defer cancel()
	go sc.follow(ctx, f, slog.New(slog.NewTextHandler(io.Discard, nil)))

	expect := func(want map[soakv1.JobState]int) {
		t.Helper()
		got, ok := sc.snapshot(t.Context(), f)
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
	deliver := f.set("a", running, false)
	go func() { time.Sleep(50 * time.Millisecond); deliver() }()
	expect(map[soakv1.JobState]int{running: 1, finished: 1})

	f.set("c", queued, false)()
	f.set("b", 0, true)()
	expect(map[soakv1.JobState]int{running: 1, queued: 1})

	// A change that never arrives: the snapshot gives up.
	f.set("d", queued, false)
	start := time.Now()
	if got, ok := sc.snapshot(t.Context(), f); ok || time.Since(start) < countsCatchUpWait {
		t.Errorf("snapshot %v, %v after %s with a change missing", got, ok, time.Since(start))
	}
}
