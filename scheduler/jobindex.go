package scheduler

import (
	"context"
	"log/slog"
	"maps"
	"sync"
	"time"

	"soakfarm/internal/pause"
	soakv1 "soakfarm/proto/soak/v1"
)

// jobRecords is what jobIndex reads from the store.
type jobRecords interface {
	WatchJobs(ctx context.Context, seen func(id string, job *soakv1.Job, revision uint64), caughtUp func()) error
	JobsRevision(ctx context.Context) (uint64, error)
}

// jobIndex keeps each job's state and owner from a watch of the job
// records, so that the jobs-by-state metric reads a map and ListJobs reads
// only the records of the page it returns, however many jobs the farm has
// run.
type jobIndex struct {
	mu      sync.Mutex
	changed *sync.Cond // signalled at every change applied
	jobs    map[string]indexEntry
	counts  map[soakv1.JobState]int
	ready   bool   // the watch has delivered every record there was
	applied uint64 // the revision of the last change applied
}

type indexEntry struct {
	state soakv1.JobState
	owner string
}

func newJobIndex() *jobIndex {
	ix := &jobIndex{}
	ix.changed = sync.NewCond(&ix.mu)
	return ix
}

// follow keeps the index until ctx ends, starting the watch again after a
// failure (a lost connection, say).
func (ix *jobIndex) follow(ctx context.Context, st jobRecords, log *slog.Logger) {
	for ctx.Err() == nil {
		ix.mu.Lock()
		ix.jobs, ix.counts, ix.ready, ix.applied = map[string]indexEntry{}, map[soakv1.JobState]int{}, false, 0
		ix.mu.Unlock()
		err := st.WatchJobs(ctx, ix.apply, ix.caughtUp)
		if ctx.Err() != nil {
			return
		}
		log.Warn("watching the job records", "err", err)
		_ = pause.For(ctx, time.Second)
	}
}

func (ix *jobIndex) apply(id string, job *soakv1.Job, revision uint64) {
	ix.mu.Lock()
	defer ix.mu.Unlock()
	if old, ok := ix.jobs[id]; ok {
		ix.counts[old.state]--
	}
	if job == nil {
		delete(ix.jobs, id)
	} else {
		ix.jobs[id] = indexEntry{state: job.GetState(), owner: job.GetOwner()}
		ix.counts[job.GetState()]++
	}
	ix.applied = max(ix.applied, revision)
	ix.changed.Broadcast()
}

func (ix *jobIndex) caughtUp() {
	ix.mu.Lock()
	ix.ready = true
	ix.mu.Unlock()
	ix.changed.Broadcast()
}

// catchUpWait bounds how long a reader waits for the watch to reach the
// latest change before it reads the records itself.
const catchUpWait = time.Second

// current calls read with the index locked once the watch has applied
// every change up to the bucket's latest, so a reader never sees less
// than was written before it asked; false when the watch is not there yet.
func (ix *jobIndex) current(ctx context.Context, st jobRecords, read func()) bool {
	latest, err := st.JobsRevision(ctx)
	if err != nil {
		return false
	}
	deadline := time.Now().Add(catchUpWait)
	timer := time.AfterFunc(catchUpWait, ix.changed.Broadcast)
	defer timer.Stop()
	ix.mu.Lock()
	defer ix.mu.Unlock()
	for !ix.ready || ix.applied < latest {
		if time.Now().After(deadline) || ctx.Err() != nil {
			return false
		}
		ix.changed.Wait()
	}
	read()
	return true
}

// stateCounts returns the number of jobs in each state.
func (ix *jobIndex) stateCounts(ctx context.Context, st jobRecords) (counts map[soakv1.JobState]int, ok bool) {
	ok = ix.current(ctx, st, func() { counts = maps.Clone(ix.counts) })
	return counts, ok
}

// matching returns the ids of the jobs keep accepts, in no order.
func (ix *jobIndex) matching(ctx context.Context, st jobRecords, keep func(state soakv1.JobState, owner string) bool) (ids []string, ok bool) {
	ok = ix.current(ctx, st, func() {
		for id, e := range ix.jobs {
			if keep(e.state, e.owner) {
				ids = append(ids, id)
			}
		}
	})
	return ids, ok
}
