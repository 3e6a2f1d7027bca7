package store

import (
	"context"
	"slices"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"google.golang.org/protobuf/proto"

	soakv1 "soakfarm/proto/soak/v1"
)

// lostAnswers is a JetStream whose first `lose` publishes are stored but
// answered with a timeout, as when the broker dies between storing a
// message and answering.
type lostAnswers struct {
	jetstream.JetStream
	lose int
}

func (j *lostAnswers) Publish(ctx context.Context, subject string, data []byte, opts ...jetstream.PublishOpt) (*jetstream.PubAck, error) {
	ack, err := j.JetStream.Publish(ctx, subject, data, opts...)
	if err == nil && j.lose > 0 {
		j.lose--
		return nil, context.DeadlineExceeded
	}
	return ack, err
}

// EmbeddedNATS starts an in-process NATS server with JetStream in a
// temporary folder, stopped when the test ends; the store's external tests
// use it too.
func EmbeddedNATS(t *testing.T) *server.Server {
	t.Helper()
	ns, err := server.NewServer(&server.Options{JetStream: true, StoreDir: t.TempDir(), DontListen: true, NoSigs: true, NoLog: true})
	if err != nil {
		t.Fatal(err)
	}
	go ns.Start()
	if !ns.ReadyForConnections(10 * time.Second) {
		t.Fatal("NATS not ready")
	}
	t.Cleanup(func() { ns.Shutdown(); ns.WaitForShutdown() })
	return ns
}

// TestAppendEventStoresOnceWhenAnswersAreLost: an event whose publish was
// stored but whose answer never came is found by its message ID and not
// stored again.
func TestAppendEventStoresOnceWhenAnswersAreLost(t *testing.T) {
	t.Parallel()
	ns := EmbeddedNATS(t)
	nc, err := nats.Connect("", nats.InProcessServer(ns))
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	s, err := Setup(t.Context(), nc, DefaultSettings())
	if err != nil {
		t.Fatal(err)
	}
	id := NewJobID(time.Now())
	milestone := func(name string) *soakv1.JobEvent {
		return &soakv1.JobEvent{Kind: &soakv1.JobEvent_Milestone{Milestone: &soakv1.MilestoneReached{Name: name}}}
	}
	if _, err := s.AppendEvent(t.Context(), id, milestone("first")); err != nil {
		t.Fatal(err)
	}
	s.js = &lostAnswers{JetStream: s.js, lose: 1}
	got, err := s.AppendEvent(t.Context(), id, milestone("second"))
	if err != nil || got.GetSequence() != 2 || got.GetMilestone().GetName() != "second" {
		t.Fatalf("append with a lost answer: %v, %v", got, err)
	}
	if _, err := s.AppendEvent(t.Context(), id, milestone("third")); err != nil {
		t.Fatal(err)
	}
	var names []string
	for seq := uint64(1); ; seq++ {
		raw, err := s.events.GetMsg(t.Context(), seq)
		if err != nil {
			break
		}
		ev := &soakv1.JobEvent{}
		if err := proto.Unmarshal(raw.Data, ev); err != nil {
			t.Fatal(err)
		}
		names = append(names, ev.GetMilestone().GetName())
	}
	if want := []string{"first", "second", "third"}; !slices.Equal(names, want) {
		t.Errorf("log holds %v, want %v", names, want)
	}
}
