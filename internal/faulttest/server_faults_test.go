package faulttest

import (
	"context"
	"fmt"
	"regexp"
	"sync"
	"testing"
	"time"

	soakv1 "soakfarm/proto/soak/v1"
)

var reconnectedLog = regexp.MustCompile(`msg="NATS reconnected"`)

func TestSchedulerKilledAndRestartedLosesNothing(t *testing.T) {
	t.Parallel()
	const early, late = 20, 20
	f := newFarm(t, farmOptions{ackWait: 2 * time.Second, maxAttempts: 3})
	ctx, cancel := context.WithTimeout(t.Context(), 120*time.Second)
	defer cancel()
	for i := range 3 {
		f.startWorker(fmt.Sprintf("w%d", i+1), nil)
	}
	ids := f.submit(ctx, spheres("early", early, 12, 900)...)
	w := f.watch(ctx, ids)

	// A client keeps submitting, retrying each job under its own key
	// while the API is away, as farmclient scripts do.
	var (
		mu       sync.Mutex
		lateIDs  []string
		refused  int
		submitWG sync.WaitGroup
	)
	submitWG.Go(func() {
		for i, spec := range spheres("late", late, 12, 900) {
			key := fmt.Sprintf("late/%d", i)
			for ctx.Err() == nil {
				job, _, err := f.client.Submit(ctx, spec, key)
				if err == nil {
					mu.Lock()
					lateIDs = append(lateIDs, job.GetId())
					mu.Unlock()
					break
				}
				mu.Lock()
				refused++
				mu.Unlock()
				time.Sleep(50 * time.Millisecond)
			}
			time.Sleep(100 * time.Millisecond)
		}
	})

	if err := until(30*time.Second, func() bool { return w.finals.Load() >= 3 }); err != nil {
		t.Fatal("no jobs finished before the kill")
	}
	f.sched.kill()
	killedAt := time.Now()
	openWatches := early - int(w.finals.Load())
	time.Sleep(1500 * time.Millisecond)
	f.startScheduler()
	f.get(ctx, ids[0])
	recovered := time.Since(killedAt)
	submitWG.Wait()
	if len(lateIDs) != late {
		t.Fatalf("%d of %d late jobs submitted", len(lateIDs), late)
	}
	wl := f.watch(ctx, lateIDs)
	w.waitFinals(t, ctx, early)
	wl.waitFinals(t, ctx, late)
	w.wait(t, ctx)
	wl.wait(t, ctx)
	te := f.checkExactlyOnce(ctx, ids, w)
	tlate := f.checkExactlyOnce(ctx, lateIDs, wl)

	// Retried submits made no second job: the farm holds exactly the jobs
	// the client was told about.
	listed, _, err := f.client.List(ctx, nil, 1000, "")
	if err != nil {
		t.Fatal(err)
	}
	if len(listed) != early+late {
		t.Errorf("farm lists %d jobs, want %d", len(listed), early+late)
	}
	// Records and result files came through intact.
	for _, id := range append(ids, lateIDs...) {
		files, err := f.client.Fetch(ctx, id, t.TempDir())
		if err != nil || len(files) < 3 {
			t.Errorf("job %s: fetched %d files: %v", id, len(files), err)
		}
		if job := f.get(ctx, id); job.GetSummary().GetName() == "" {
			t.Errorf("job %s: record has no summary", id)
		}
	}
	t.Logf("figures: jobs=%d faults=1 (scheduler kill -9, down 1.5s) finished=%d lost=%d duplicates=%d submits-refused-while-down=%d watchers-open-at-kill=%d (all resumed) time-to-API=%s (from the kill)",
		te.jobs+tlate.jobs, te.finished+tlate.finished, te.lost+tlate.lost, te.duplicates+tlate.duplicates, refused, openWatches, recovered.Round(time.Millisecond))
}

func TestBrokerKilledAndRestartedLosesNothing(t *testing.T) {
	t.Parallel()
	const jobs = 30
	f := newFarm(t, farmOptions{ackWait: 2 * time.Second, maxAttempts: 3})
	// Generous bounds: they catch a hang on a machine that other test
	// packages load, they are not a speed figure.
	ctx, cancel := context.WithTimeout(t.Context(), 240*time.Second)
	defer cancel()
	var workers []*proc
	for i := range 3 {
		workers = append(workers, f.startWorker(fmt.Sprintf("w%d", i+1), nil))
	}
	ids := f.submit(ctx, spheres("broker", jobs, 12, 900)...)
	w := f.watch(ctx, ids)
	if err := until(90*time.Second, func() bool { return w.finals.Load() >= 5 }); err != nil {
		t.Fatal("no jobs finished before the kill")
	}
	f.broker.kill()
	time.Sleep(2 * time.Second)
	restartedAt := time.Now()
	f.startBroker()

	// Everyone reconnects by themselves.
	for _, p := range append([]*proc{f.sched}, workers...) {
		p.waitLog(t, reconnectedLog, 60*time.Second)
	}
	w.waitFinals(t, ctx, jobs)
	w.wait(t, ctx)
	tl := f.checkExactlyOnce(ctx, ids, w)

	// The first job started after the restart shows the farm working
	// again.
	var firstStart time.Time
	retried := 0
	for _, id := range ids {
		job := f.get(ctx, id)
		retried += len(job.GetAttempts()) - 1
		for _, a := range job.GetAttempts() {
			if st := a.GetStartTime().AsTime(); st.After(restartedAt) && (firstStart.IsZero() || st.Before(firstStart)) {
				firstStart = st
			}
		}
		if job.GetState() != soakv1.JobState_JOB_STATE_FINISHED {
			continue
		}
	}
	t.Logf("figures: jobs=%d faults=1 (NATS kill -9, down 2s, file store kept) finished=%d lost=%d duplicates=%d extra-attempts=%d time-to-first-start=%s (from the restart)",
		tl.jobs, tl.finished, tl.lost, tl.duplicates, retried, firstStart.Sub(restartedAt).Round(time.Millisecond))
}
