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

// jobStates is what stateCounts reads from the store.
type jobStates interface {
	WatchJobStates(ctx context.Context, seen func(id string, state soakv1.JobState, revision uint64, deleted bool), caughtUp func()) error
	JobsRevision(ctx context.Context) (uint64, error)
}

// stateCounts keeps the number of jobs in each state from a watch of the
// job records, so that a metrics scrape reads a map instead of every
// record of a farm that has run thousands of jobs.
type stateCounts struct {
	mu      sync.Mutex
	changed *sync.Cond // signalled at every change applied
	states  map[string]soakv1.JobState
	counts  map[soakv1.JobState]int
	ready   bool   // the watch has delivered every record there was
	applied uint64 // the revision of the last change applied
}

func newStateCounts() *stateCounts {
	sc := &stateCounts{}
	sc.changed = sync.NewCond(&sc.mu)
	return sc
}

// follow keeps the counts until ctx ends, starting the watch again after
// a failure (a lost connection, say).
func (sc *stateCounts) follow(ctx context.Context, st jobStates, log *slog.Logger) {
	for ctx.Err() == nil {
		sc.mu.Lock()
		sc.states, sc.counts, sc.ready, sc.applied = map[string]soakv1.JobState{}, map[soakv1.JobState]int{}, false, 0
		sc.mu.Unlock()
		err := st.WatchJobStates(ctx, sc.apply, sc.caughtUp)
		if ctx.Err() != nil {
			return
		}
		log.Warn("watching job states for the metrics", "err", err)
		_ = pause.For(ctx, time.Second)
	}
}

func (sc *stateCounts) apply(id string, state soakv1.JobState, revision uint64, deleted bool) {
	sc.mu.Lock()
	defer sc.mu.Unlock()
	if old, ok := sc.states[id]; ok {
		sc.counts[old]--
	}
	if deleted {
		delete(sc.states, id)
	} else {
		sc.states[id] = state
		sc.counts[state]++
	}
	sc.applied = max(sc.applied, revision)
	sc.changed.Broadcast()
}

func (sc *stateCounts) caughtUp() {
	sc.mu.Lock()
	sc.ready = true
	sc.mu.Unlock()
	sc.changed.Broadcast()
}

// countsCatchUpWait bounds how long a scrape waits for the watch to reach
// the latest change before it counts the records itself.
const countsCatchUpWait = time.Second

// snapshot returns the counts once the watch has applied every change up
// to the bucket's latest, so a scrape never shows less than what was
// written before it; false when the watch is not there yet.
func (sc *stateCounts) snapshot(ctx context.Context, st jobStates) (map[soakv1.JobState]int, bool) {
	latest, err := st.JobsRevision(ctx)
	if err != nil {
		return nil, false
	}
	deadline := time.Now().Add(countsCatchUpWait)
	timer := time.AfterFunc(countsCatchUpWait, sc.changed.Broadcast)
	defer timer.Stop()
	sc.mu.Lock()
	defer sc.mu.Unlock()
	for !sc.ready || sc.applied < latest {
		if time.Now().After(deadline) || ctx.Err() != nil {
			return nil, false
		}
		sc.changed.Wait()
	}
	return maps.Clone(sc.counts), true
}
