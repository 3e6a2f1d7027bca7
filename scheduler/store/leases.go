package store

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"log/slog"

	"github.com/nats-io/nats.go"
	"google.golang.org/protobuf/proto"

	soakv1 "soakfarm/proto/soak/v1"
)

// LeaseOp names a lease call; the call goes to subject soak.lease.<op>.
type LeaseOp string

// The lease calls a worker makes on a job it took from the queue.
const (
	// LeaseStart moves the record to running under a new attempt held
	// by the call's lease token.
	LeaseStart LeaseOp = "start"
	// LeaseRenew checks the token and returns the record's state, with
	// cancel_requested.
	LeaseRenew LeaseOp = "renew"
	// LeaseFinish ends the job as finished with its result.
	LeaseFinish LeaseOp = "finish"
	// LeaseFail closes the attempt with an error, and queues the job
	// again, fails it, or ends it cancelled.
	LeaseFail LeaseOp = "fail"
)

const (
	leaseSubjectPrefix = "soak.lease."
	// leaseQueueGroup makes exactly one of several schedulers answer
	// each call.
	leaseQueueGroup = "soak-schedulers"
	// workerInboxPrefix roots the reply subjects of worker connections;
	// the worker user may subscribe below it and nowhere else.
	workerInboxPrefix = "soak.inbox.worker."
)

// ErrNoScheduler: no scheduler answered a lease call in time. The call
// may have been done all the same, its reply lost; a repeated end call
// then gets the record as the first left it.
var ErrNoScheduler = errors.New("no scheduler answered")

// WorkerInbox is the option every worker connection needs: it puts the
// connection's reply subjects under the worker inbox root, the only
// inbox a worker user may subscribe to. The random part keeps workers'
// replies apart; it is no secret (see WorkerPermissions).
func WorkerInbox() nats.Option {
	b := make([]byte, 16)
	rand.Read(b) // never fails (crypto/rand documents it)
	return nats.CustomInboxPrefix(workerInboxPrefix + hex.EncodeToString(b))
}

// Lease makes a lease call to a scheduler. Refusals come back in the
// reply; ErrNoScheduler when no answer came before ctx ended.
func (s *Store) Lease(ctx context.Context, op LeaseOp, req *soakv1.LeaseRequest) (*soakv1.LeaseReply, error) {
	data, err := proto.Marshal(req)
	if err != nil {
		return nil, fmt.Errorf("encode lease %s of job %s: %w", op, req.GetJobId(), err)
	}
	msg, err := s.nc.RequestWithContext(ctx, leaseSubjectPrefix+string(op), data)
	if err != nil {
		// No responder, a timeout, NATS away: either way no answer, and
		// the call may or may not have been done.
		return nil, fmt.Errorf("lease %s of job %s: %w (%w)", op, req.GetJobId(), ErrNoScheduler, err)
	}
	reply := &soakv1.LeaseReply{}
	if err := proto.Unmarshal(msg.Data, reply); err != nil {
		return nil, fmt.Errorf("decode lease reply for job %s: %w", req.GetJobId(), err)
	}
	return reply, nil
}

// ServeLeases hands every lease call to serve, which must reply through
// answer once; the caller unsubscribes to stop. serve runs on the NATS
// client's delivery goroutine and should hand slow work off.
func (s *Store) ServeLeases(serve func(op LeaseOp, req *soakv1.LeaseRequest, answer func(*soakv1.LeaseReply)), log *slog.Logger) (*nats.Subscription, error) {
	sub, err := s.nc.QueueSubscribe(leaseSubjectPrefix+"*", leaseQueueGroup, func(m *nats.Msg) {
		answer := func(reply *soakv1.LeaseReply) {
			data, err := proto.Marshal(reply)
			if err == nil {
				err = m.Respond(data)
			}
			if err != nil {
				log.Warn("lease reply", "subject", m.Subject, "err", err)
			}
		}
		req := &soakv1.LeaseRequest{}
		if err := proto.Unmarshal(m.Data, req); err != nil {
			answer(&soakv1.LeaseReply{Refusal: soakv1.LeaseRefusal_LEASE_REFUSAL_ERROR, Error: "undecodable lease request: " + err.Error()})
			return
		}
		serve(LeaseOp(m.Subject[len(leaseSubjectPrefix):]), req, answer)
	})
	if err != nil {
		return nil, fmt.Errorf("serve lease calls: %w", err)
	}
	return sub, nil
}
