package localfarm_test

import (
	"context"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"google.golang.org/protobuf/proto"

	"soakfarm/internal/localfarm"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
	"soakfarm/worker"
)

// TestWorkerUserRunsJobsButCannotTouchTheRest runs a remote worker with the
// worker user's credentials through a whole job, then tries with the same
// credentials each write the worker user is denied (store.WorkerPermissions
// lists them), and one without credentials at all.
func TestWorkerUserRunsJobsButCannotTouchTheRest(t *testing.T) {
	t.Parallel()
	farm, err := localfarm.Start(t.Context(), localfarm.Config{
		DataDir: t.TempDir(), NATSListen: "127.0.0.1:0",
		NATSWorkerUser: "worker", NATSWorkerPassword: "worker-secret",
		Logger: quiet,
	})
	if err != nil {
		t.Fatal(err)
	}
	defer closeFarm(t, farm)

	if nc, err := nats.Connect(farm.NATSURL()); err == nil {
		nc.Close()
		t.Fatal("connected to the farm's NATS without credentials")
	}
	nc, err := nats.Connect(farm.NATSURL(), nats.UserInfo("worker", "worker-secret"), store.WorkerInbox())
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()

	// A full job through the worker user.
	w := worker.New(nc, worker.Config{Name: "remote", Runner: trivialRunner, WorkDir: t.TempDir(), Logger: quiet})
	ctx, stop := context.WithCancel(t.Context())
	done := make(chan error, 1)
	go func() { done <- w.Run(ctx) }()
	c := client(t, farm)
	resp, err := c.SubmitJob(t.Context(), &soakv1.SubmitJobRequest{Spec: spec("worker-user")})
	if err != nil {
		t.Fatal(err)
	}
	wctx, cancel := context.WithTimeout(t.Context(), 30*time.Second)
	defer cancel()
	if err := waitEnd(wctx, c, resp.GetJob().GetId()); err != nil {
		t.Fatal(err)
	}
	got, err := c.GetJob(t.Context(), &soakv1.GetJobRequest{JobId: resp.GetJob().GetId()})
	if err != nil {
		t.Fatal(err)
	}
	if st := got.GetJob().GetState(); st != soakv1.JobState_JOB_STATE_FINISHED || got.GetJob().GetWorker() != "remote" {
		t.Fatalf("job %s on %q, want finished on the remote worker; reason %q", st, got.GetJob().GetWorker(), got.GetJob().GetFailureReason())
	}
	stop()
	if err := <-done; err != nil {
		t.Fatal(err)
	}

	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	jobID := resp.GetJob().GetId()
	forged, err := proto.Marshal(&soakv1.Job{Id: jobID, State: soakv1.JobState_JOB_STATE_QUEUED, Owner: "forger"})
	if err != nil {
		t.Fatal(err)
	}
	denied := []struct {
		name string
		try  func(ctx context.Context) error
	}{
		{"queue a job", func(ctx context.Context) error {
			_, err := js.Publish(ctx, store.QueueSubject, []byte("01aaaaaaaaaaaaaaaaaaaaaaaa"))
			return err
		}},
		{"write a job record", func(ctx context.Context) error {
			_, err := js.Publish(ctx, "$KV."+store.JobsBucket+"."+jobID, forged)
			return err
		}},
		{"write a job record through the bucket", func(ctx context.Context) error {
			kv, err := js.KeyValue(ctx, store.JobsBucket)
			if err != nil {
				return err
			}
			_, err = kv.Put(ctx, jobID, forged)
			return err
		}},
		{"read a job record", func(ctx context.Context) error {
			kv, err := js.KeyValue(ctx, store.JobsBucket)
			if err != nil {
				return err
			}
			_, err = kv.Get(ctx, jobID)
			return err
		}},
		{"write a client key", func(ctx context.Context) error {
			_, err := js.Publish(ctx, "$KV."+store.ClientKeysBucket+".abc", []byte("x"))
			return err
		}},
		{"delete the job records", func(ctx context.Context) error {
			return js.DeleteKeyValue(ctx, store.JobsBucket)
		}},
		{"purge the queue", func(ctx context.Context) error {
			s, err := js.Stream(ctx, store.QueueStream)
			if err != nil {
				return err
			}
			return s.Purge(ctx)
		}},
		{"make a consumer of its own", func(ctx context.Context) error {
			_, err := js.CreateOrUpdateConsumer(ctx, store.EventsStream, jetstream.ConsumerConfig{Durable: "mine"})
			return err
		}},
		{"read result files", func(ctx context.Context) error {
			obj, err := js.ObjectStore(ctx, store.ResultsBucket)
			if err != nil {
				return err
			}
			_, err = obj.List(ctx)
			return err
		}},
	}
	for _, tc := range denied {
		ctx, cancel := context.WithTimeout(t.Context(), time.Second)
		if err := tc.try(ctx); err == nil {
			t.Errorf("worker user could %s", tc.name)
		}
		cancel()
	}
	if got, err := c.GetJob(t.Context(), &soakv1.GetJobRequest{JobId: jobID}); err != nil || got.GetJob().GetState() != soakv1.JobState_JOB_STATE_FINISHED {
		t.Errorf("job record after the denied writes: %v, %v; want it finished", got.GetJob(), err)
	}
	// Lease calls carry the tokens: a worker may not overhear them. A
	// denied subscription never receives.
	overheard := make(chan struct{}, 1)
	spy, err := nc.Subscribe("soak.lease.>", func(*nats.Msg) { overheard <- struct{}{} })
	if err != nil {
		t.Fatal(err)
	}
	defer spy.Unsubscribe()
	nc.Flush()
	farm.Conn().Publish("soak.lease.renew", nil)
	farm.Conn().Flush()
	select {
	case <-overheard:
		t.Error("worker user could overhear lease calls")
	case <-time.After(500 * time.Millisecond):
	}
	// A cancel notice is core NATS: a denied publish never reaches the
	// subscriber.
	heard := make(chan struct{}, 1)
	sub, err := farm.Conn().Subscribe("soak.cancel.*", func(*nats.Msg) { heard <- struct{}{} })
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Unsubscribe()
	farm.Conn().Flush()
	nc.Publish("soak.cancel.01aaaaaaaaaaaaaaaaaaaaaaaa", nil)
	nc.Flush()
	select {
	case <-heard:
		t.Error("worker user could send a cancel notice")
	case <-time.After(500 * time.Millisecond):
	}
}
