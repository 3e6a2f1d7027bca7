package faulttest

import (
	"context"
	"fmt"
	"slices"
	"strings"
	"syscall"
	"testing"
	"time"

	soakv1 "soakfarm/proto/soak/v1"
)

// lostWorker is how a record closes the attempt of a worker that stopped
// heartbeating.
const lostWorker = "worker stopped responding"

func TestWorkersKilledMidJobLoseNoJob(t *testing.T) {
	t.Parallel()
	const jobs, kills, workers = 100, 20, 3
	// More attempts than kills: no job can run out of deliveries to the
	// kills alone, which would be the farm working as configured.
	f := newFarm(t, farmOptions{ackWait: 2 * time.Second, maxAttempts: kills + 5})
	ctx, cancel := context.WithTimeout(t.Context(), 150*time.Second)
	defer cancel()
	slots := make([]*proc, workers)
	for i := range slots {
		slots[i] = f.startWorker(fmt.Sprintf("w%d.0", i+1), nil)
	}
	ids := f.submit(ctx, spheres("kill", jobs, 12, 900)...)
	w := f.watch(ctx, ids)

	type kill struct {
		worker, job string
		at          time.Time
	}
	var done []kill
	for k := range kills {
		// Spread the kills over the run.
		if err := until(60*time.Second, func() bool { return w.finals.Load() >= int64(k*jobs/(kills+5)) }); err != nil {
			t.Fatalf("kill %d: jobs stopped finishing (%d final)", k+1, w.finals.Load())
		}
		i := k % workers
		victim := slots[i]
		job := freshJob(t, victim, time.Duration(k%4)*50*time.Millisecond)
		victim.kill()
		done = append(done, kill{worker: victim.name, job: job, at: time.Now()})
		slots[i] = f.startWorker(fmt.Sprintf("w%d.%d", i+1, k/workers+1), nil)
	}
	w.waitFinals(t, ctx, jobs)
	w.wait(t, ctx)
	tl := f.checkExactlyOnce(ctx, ids, w)

	// Each kill cost its job one attempt, closed as lost, and the next
	// attempt started on another worker after the acknowledgement wait.
	var recoveries []time.Duration
	for _, k := range done {
		job := f.get(ctx, k.job)
		atts := job.GetAttempts()
		i := slices.IndexFunc(atts, func(a *soakv1.Attempt) bool { return a.GetWorker() == k.worker })
		if i < 0 || i == len(atts)-1 || !strings.Contains(atts[i].GetError(), lostWorker) {
			t.Errorf("job %s: the attempt of killed worker %s is not closed as lost and followed by another: %v", k.job, k.worker, atts)
			continue
		}
		recoveries = append(recoveries, atts[i+1].GetStartTime().AsTime().Sub(k.at))
	}
	t.Logf("figures: jobs=%d faults=%d (kill -9 mid-job) finished=%d lost=%d duplicates=%d time-to-redeliver median=%s max=%s (ack wait 2s)",
		tl.jobs, len(done), tl.finished, tl.lost, tl.duplicates, median(recoveries), longest(recoveries))
}

func TestFrozenWorkersLateResultIsDiscarded(t *testing.T) {
	t.Parallel()
	f := newFarm(t, farmOptions{ackWait: 2 * time.Second, maxAttempts: 3})
	ctx, cancel := context.WithTimeout(t.Context(), 90*time.Second)
	defer cancel()
	frozen := f.startWorker("frozen", nil)
	ids := f.submit(ctx, longJob("freeze"))
	id := ids[0]
	w := f.watch(ctx, ids)
	frozen.waitLog(t, startedLog, 20*time.Second)
	other := f.startWorker("other", nil)
	time.Sleep(time.Second)
	frozen.signal(t, syscall.SIGSTOP)
	stoppedAt := time.Now()
	taken, err := w.startedBy(ctx, id, "frozen")
	if err != nil {
		t.Fatal(err)
	}
	recovery := taken.GetTime().AsTime().Sub(stoppedAt)
	// Stay frozen well past the acknowledgement wait, then resume while
	// the other worker still computes the job.
	time.Sleep(time.Second)
	frozen.signal(t, syscall.SIGCONT)
	w.waitFinals(t, ctx, 1)
	w.wait(t, ctx)
	tl := f.checkExactlyOnce(ctx, ids, w)

	job := f.get(ctx, id)
	atts := job.GetAttempts()
	if len(atts) != 2 || atts[0].GetWorker() != "frozen" || !strings.Contains(atts[0].GetError(), lostWorker) ||
		atts[1].GetWorker() != "other" || atts[1].GetError() != "" || job.GetWorker() != "other" {
		t.Errorf("attempts %v, worker %s; want the frozen worker's attempt lost and the other's finishing", atts, job.GetWorker())
	}
	// The frozen worker, resumed, sees the record moved on and drops its
	// run without writing anything.
	frozen.waitLog(t, discardLog, 20*time.Second)
	if files, err := f.client.Fetch(ctx, id, t.TempDir()); err != nil || len(files) == 0 {
		t.Errorf("fetch results: %v (%d files)", err, len(files))
	}

	// The frozen worker lives on: with the other one gone, it takes the
	// next job.
	other.signal(t, syscall.SIGINT)
	<-other.exited
	next := f.submit(ctx, sphere("after-freeze", 8, 300))
	wn := f.watch(ctx, next)
	wn.waitFinals(t, ctx, 1)
	if j := f.get(ctx, next[0]); j.GetState() != soakv1.JobState_JOB_STATE_FINISHED || j.GetWorker() != "frozen" {
		t.Errorf("job after the freeze: %s by %s, want finished by the frozen worker", j.GetState(), j.GetWorker())
	}
	t.Logf("figures: jobs=%d faults=1 (SIGSTOP past the ack wait) finished=%d lost=%d duplicates=%d late-results-kept=0 time-to-redeliver=%s (ack wait 2s)",
		tl.jobs, tl.finished, tl.lost, tl.duplicates, recovery.Round(time.Millisecond))
}

func TestJobsOverWorkerLimitsFailAtOnceAndWorkerLives(t *testing.T) {
	t.Parallel()
	f := newFarm(t, farmOptions{ackWait: 2 * time.Second, maxAttempts: 3})
	ctx, cancel := context.WithTimeout(t.Context(), 60*time.Second)
	defer cancel()
	// A plain job writes about 140 KiB (two plots, summary, probes).
	limited := f.startWorker("limited", nil, "--max-job-memory", "16MiB", "--max-job-disk", "256KiB")

	// 80 cells across: 80³ cells × 81 bytes and more, over 40 MiB.
	big := sphere("too-big", 80, 60)
	// 19 snapshots of a 12-cell grid add about 240 KiB of VTK files.
	snappy := sphere("too-many-snapshots", 12, 600)
	for s := 30.0; s < 600; s += 30 {
		snappy.SnapshotsS = append(snappy.SnapshotsS, s)
	}
	plain := sphere("plain", 8, 300)
	ids := f.submit(ctx, big, snappy, plain)
	w := f.watch(ctx, ids)
	w.waitFinals(t, ctx, len(ids))
	w.wait(t, ctx)

	tests := []struct {
		id, name string
		state    soakv1.JobState
		reason   []string
	}{
		{ids[0], "memory", soakv1.JobState_JOB_STATE_FAILED, []string{"80 × 80 × 80 cells", "memory limit of 16.0 MiB", "--max-job-memory"}},
		{ids[1], "disk", soakv1.JobState_JOB_STATE_FAILED, []string{"result files reached", "disk limit of 256.0 KiB", "--max-job-disk"}},
		{ids[2], "plain", soakv1.JobState_JOB_STATE_FINISHED, nil},
	}
	for _, tc := range tests {
		job := f.get(ctx, tc.id)
		if job.GetState() != tc.state || len(job.GetAttempts()) != 1 || job.GetWorker() != "limited" {
			t.Errorf("%s job: %s after %d attempts on %s; want %s after one attempt on the limited worker (%s)",
				tc.name, job.GetState(), len(job.GetAttempts()), job.GetWorker(), tc.state, job.GetFailureReason())
		}
		for _, want := range tc.reason {
			if !strings.Contains(job.GetFailureReason(), want) {
				t.Errorf("%s job: reason %q lacks %q", tc.name, job.GetFailureReason(), want)
			}
		}
	}
	if !limited.alive() {
		t.Error("the limited worker exited")
	}
	t.Logf("figures: jobs=3 faults=2 (memory and disk limit) failed-at-once=2 retries=0 worker-alive=%t", limited.alive())
}

// freshJob waits for the worker to start a job and then for delay, which
// lands a kill at some point inside the solve, and returns the job if the
// worker still holds it; otherwise it waits for the next one.
func freshJob(t *testing.T, w *proc, delay time.Duration) string {
	t.Helper()
	deadline := time.Now().Add(60 * time.Second)
	for time.Now().Before(deadline) {
		mark := len(w.output.String())
		var job string
		err := until(30*time.Second, func() bool {
			if m := startedLog.FindStringSubmatch(w.output.String()[mark:]); m != nil {
				job = m[1]
			}
			return job != ""
		})
		if err != nil {
			break
		}
		time.Sleep(delay)
		if heldJob(w.output.String()) == job {
			return job
		}
	}
	t.Fatalf("%s never held a job long enough", w.name)
	return ""
}

func longest(ds []time.Duration) time.Duration {
	if len(ds) == 0 {
		return 0
	}
	return slices.Max(ds).Round(time.Millisecond)
}

func median(ds []time.Duration) time.Duration {
	if len(ds) == 0 {
		return 0
	}
	s := slices.Clone(ds)
	slices.Sort(s)
	return s[len(s)/2].Round(time.Millisecond)
}
