package faulttest

import (
	"context"
	"fmt"
	"os"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

// schedulerRSSBound is the resident memory the scheduler must stay under
// with 1,000 jobs queued and 200 watchers; the README states it.
const schedulerRSSBound = 256 << 20

// rss reads a process's resident set size from /proc.
func rss(pid int) (int64, error) {
	data, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", pid))
	if err != nil {
		return 0, err
	}
	for line := range strings.Lines(string(data)) {
		if rest, ok := strings.CutPrefix(line, "VmRSS:"); ok {
			kb, err := strconv.ParseInt(strings.TrimSuffix(strings.TrimSpace(rest), " kB"), 10, 64)
			return kb << 10, err
		}
	}
	return 0, fmt.Errorf("no VmRSS in /proc/%d/status", pid)
}

// queueState is the queue as the NATS server counts it.
type queueState struct {
	messages, pending, inFlight, deadLetters uint64
}

func readQueue(ctx context.Context, js jetstream.JetStream) (queueState, error) {
	var q queueState
	st, err := js.Stream(ctx, store.QueueStream)
	if err != nil {
		return q, err
	}
	info, err := st.Info(ctx)
	if err != nil {
		return q, err
	}
	q.messages = info.State.Msgs
	cons, err := js.Consumer(ctx, store.QueueStream, store.QueueConsumer)
	if err != nil {
		return q, err
	}
	ci, err := cons.Info(ctx)
	if err != nil {
		return q, err
	}
	q.pending, q.inFlight = ci.NumPending, uint64(ci.NumAckPending)
	dl, err := js.Stream(ctx, store.DeadLetterStream)
	if err != nil {
		return q, err
	}
	di, err := dl.Info(ctx)
	if err != nil {
		return q, err
	}
	q.deadLetters = di.State.Msgs
	return q, nil
}

// countStates lists every job and counts them by state.
func (f *farm) countStates(ctx context.Context) (map[soakv1.JobState]int, error) {
	n := map[soakv1.JobState]int{}
	token := ""
	for {
		jobs, next, err := f.client.List(ctx, nil, 1000, token)
		if err != nil {
			return nil, err
		}
		for _, j := range jobs {
			n[j.GetState()]++
		}
		if next == "" {
			return n, nil
		}
		token = next
	}
}

func TestThousandJobsFourWorkersTwoHundredWatchers(t *testing.T) {
	// Not parallel: the load needs the machine to itself to stay bounded
	// in time.
	const jobs, workers, watchers = 1000, 4, 200
	f := newFarm(t, farmOptions{ackWait: 10 * time.Second, maxAttempts: 3})
	// 1.5 minutes on a quiet 2-core machine; the bound leaves room for the
	// other packages' tests that CI runs beside this one.
	ctx, cancel := context.WithTimeout(t.Context(), 480*time.Second)
	defer cancel()
	nc, err := nats.Connect(f.natsURL)
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}

	// The scheduler's memory is sampled through the whole run.
	pid := f.sched.cmd.Process.Pid
	baseline, err := rss(pid)
	if err != nil {
		t.Fatal(err)
	}
	var peak atomic.Int64
	peak.Store(baseline)
	sampling, stopSampling := context.WithCancel(ctx)
	var sampler sync.WaitGroup
	sampler.Go(func() {
		for sampling.Err() == nil {
			if r, err := rss(pid); err == nil && r > peak.Load() {
				peak.Store(r)
			}
			time.Sleep(100 * time.Millisecond)
		}
	})

	// 1,000 jobs queued by 8 clients at once, before any worker runs.
	specs := spheres("load", jobs, 6, 60)
	ids := make([]string, jobs)
	var submitters sync.WaitGroup
	var submitErr atomic.Value
	next := atomic.Int64{}
	for range 8 {
		submitters.Go(func() {
			for i := int(next.Add(1) - 1); i < jobs; i = int(next.Add(1) - 1) {
				job, _, err := f.client.Submit(ctx, specs[i], fmt.Sprintf("load/%d", i))
				if err != nil {
					submitErr.Store(err)
					return
				}
				ids[i] = job.GetId()
			}
		})
	}
	submitters.Wait()
	if err, _ := submitErr.Load().(error); err != nil {
		t.Fatalf("submit: %v", err)
	}
	q, err := readQueue(ctx, js)
	if err != nil {
		t.Fatal(err)
	}
	states, err := f.countStates(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if q.messages != jobs || q.pending != jobs || states[soakv1.JobState_JOB_STATE_QUEUED] != jobs {
		t.Fatalf("before the workers: %d queue messages, %d pending, %d queued records; want %d each", q.messages, q.pending, states[soakv1.JobState_JOB_STATE_QUEUED], jobs)
	}

	watched := make([]string, 0, watchers)
	for i := 0; i < jobs; i += jobs / watchers {
		watched = append(watched, ids[i])
	}
	w := f.watch(ctx, watched)
	for i := range workers {
		f.startWorker(fmt.Sprintf("w%d", i+1), nil)
	}

	// While the jobs run, the queue and the records agree: never more
	// jobs in hand than worker slots, and the queue holds the jobs not
	// yet ended.
	started := time.Now()
	maxInFlight, samples := uint64(0), 0
	for {
		q, err := readQueue(ctx, js)
		if err != nil {
			t.Fatal(err)
		}
		maxInFlight = max(maxInFlight, q.inFlight)
		if q.inFlight > workers {
			t.Errorf("%d jobs in flight with %d worker slots", q.inFlight, workers)
		}
		if q.messages == 0 && q.inFlight == 0 {
			break
		}
		time.Sleep(time.Second)
		// Listing all records is itself load; every fifth second will do.
		if time.Since(started) < time.Duration(samples+1)*5*time.Second {
			continue
		}
		states, err := f.countStates(ctx)
		if err != nil {
			t.Fatal(err)
		}
		samples++
		open := states[soakv1.JobState_JOB_STATE_QUEUED] + states[soakv1.JobState_JOB_STATE_RUNNING]
		if running := states[soakv1.JobState_JOB_STATE_RUNNING]; running > workers {
			t.Errorf("%d records running with %d worker slots", running, workers)
		}
		after, err := readQueue(ctx, js)
		if err != nil {
			t.Fatal(err)
		}
		// A message leaves the queue only after its record has ended,
		// and at most one ended-but-unacknowledged job per worker slot:
		// read before the listing, the queue holds at least the open
		// records; read after, at most them plus the slots.
		if int(q.messages) < open || int(after.messages) > open+workers {
			t.Errorf("queue held %d then %d messages around a listing of %d queued or running records", q.messages, after.messages, open)
		}
		if states[soakv1.JobState_JOB_STATE_FAILED]+states[soakv1.JobState_JOB_STATE_CANCELLED] > 0 {
			t.Fatalf("jobs failed under load: %v", states)
		}
		if ctx.Err() != nil {
			t.Fatalf("load run did not finish: %v", ctx.Err())
		}
	}
	elapsed := time.Since(started)
	w.waitFinals(t, ctx, len(watched))
	w.wait(t, ctx)
	stopSampling()
	sampler.Wait()

	tl := f.checkExactlyOnce(ctx, watched, w)
	states, err = f.countStates(ctx)
	if err != nil {
		t.Fatal(err)
	}
	completions := f.completions()
	duplicates := 0
	for _, id := range ids {
		if completions[id] != 1 {
			duplicates++
		}
	}
	q, err = readQueue(ctx, js)
	if err != nil {
		t.Fatal(err)
	}
	if states[soakv1.JobState_JOB_STATE_FINISHED] != jobs || duplicates != 0 || q.messages != 0 || q.deadLetters != 0 {
		t.Errorf("after the run: states %v, %d jobs not completed exactly once, %d queue messages, %d dead letters; want all %d finished once and the queue empty",
			states, duplicates, q.messages, q.deadLetters, jobs)
	}
	if p := peak.Load(); p > schedulerRSSBound {
		t.Errorf("scheduler resident memory peaked at %d MiB, over the %d MiB bound", p>>20, schedulerRSSBound>>20)
	}
	t.Logf("figures: jobs=%d workers=%d watchers=%d finished=%d lost=%d duplicates=%d (watched: %d) max-in-flight=%d consistency-samples=%d run=%s scheduler-RSS baseline=%d MiB peak=%d MiB (bound %d MiB)",
		jobs, workers, len(watched), states[soakv1.JobState_JOB_STATE_FINISHED], jobs-states[soakv1.JobState_JOB_STATE_FINISHED], duplicates, tl.duplicates,
		maxInFlight, samples, elapsed.Round(time.Second), baseline>>20, peak.Load()>>20, schedulerRSSBound>>20)
}
