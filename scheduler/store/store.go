// Package store owns the farm's state on NATS JetStream: job records, the
// work queue, each job's event log, cancel notices, result files and the
// lease calls by which workers ask a scheduler to change the records of
// the jobs they hold. The scheduler and the workers both go through it, so
// they agree on names; no process keeps state of its own, so any of them
// may restart without loss.
//
// Names on the server:
//
//	KV bucket     soak_jobs          job id -> soakv1.Job (protobuf), changed by compare-and-set
//	KV bucket     soak_client_keys   sha256(client key) -> job id
//	stream        SOAK_QUEUE         work queue, subject soak.queue, payload = job id
//	consumer      soak-workers       the one durable pull consumer all workers share
//	stream        SOAK_EVENTS        limits, subject soak.events.<job id>, payload = soakv1.JobEvent
//	stream        SOAK_DEAD_LETTERS  captures the queue's max-deliveries advisories
//	object store  soak_results       <job id>/<attempt>/<file name>
//	core subject  soak.cancel.<id>   cancel notices to the running worker
//	core subject  soak.lease.<op>    lease calls, worker -> scheduler (request/reply)
//	core subject  soak.inbox.worker.<random>.>  replies to a worker connection
package store

import (
	"context"
	"errors"
	"fmt"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
	"google.golang.org/protobuf/proto"

	soakv1 "soakfarm/proto/soak/v1"
)

// Names of the JetStream assets; see the package comment.
const (
	JobsBucket         = "soak_jobs"
	ClientKeysBucket   = "soak_client_keys"
	ResultsBucket      = "soak_results"
	QueueStream        = "SOAK_QUEUE"
	QueueSubject       = "soak.queue"
	QueueConsumer      = "soak-workers"
	EventsStream       = "SOAK_EVENTS"
	DeadLetterStream   = "SOAK_DEAD_LETTERS"
	DeadLetterConsumer = "soak-dead-letters"

	eventsSubjectPrefix = "soak.events."
	cancelSubjectPrefix = "soak.cancel."
	// maxDeliveriesAdvisory is the subject the server announces a queue
	// message on once the consumer has delivered it MaxDeliver times.
	maxDeliveriesAdvisory = "$JS.EVENT.ADVISORY.CONSUMER.MAX_DELIVERIES." + QueueStream + "." + QueueConsumer
)

// Errors callers branch on.
var (
	ErrJobNotFound = errors.New("job not found")
	ErrJobExists   = errors.New("job already exists")
	// ErrNotSetUp: the streams and buckets are missing; a scheduler
	// creates them.
	ErrNotSetUp = errors.New("farm streams not set up yet (start a scheduler first)")
	// ErrJobEnded: the job's event log already holds its final event.
	ErrJobEnded = errors.New("job already ended")
)

// Settings are the farm-wide queue settings, applied by the scheduler.
type Settings struct {
	// AckWait is how long a worker may go without a heartbeat before its
	// job is handed to another worker. Workers heartbeat every AckWait/3.
	AckWait time.Duration
	// MaxDeliver is how many times a job is handed out before it fails.
	MaxDeliver int
	// MaxAckPending caps jobs held at once across all workers; it must be
	// at least the farm's total slots, or workers idle while jobs wait.
	MaxAckPending int
	// EventsMaxAge is how long job events are kept for replay.
	EventsMaxAge time.Duration
}

// DefaultSettings suit minute-to-hour jobs on a handful of workers.
func DefaultSettings() Settings {
	return Settings{
		AckWait:       30 * time.Second,
		MaxDeliver:    3,
		MaxAckPending: 1000,
		EventsMaxAge:  30 * 24 * time.Hour,
	}
}

// Store is a handle on the farm's JetStream assets. It is safe for
// concurrent use.
type Store struct {
	nc      *nats.Conn
	js      jetstream.JetStream
	jobs    jetstream.KeyValue
	keys    jetstream.KeyValue
	results jetstream.ObjectStore
	queue   jetstream.Stream
	events  jetstream.Stream
}

// Setup creates or updates every stream, bucket and consumer with settings
// and returns a Store on them. Schedulers call it; it is idempotent.
func Setup(ctx context.Context, nc *nats.Conn, settings Settings) (*Store, error) {
	js, err := jetstream.New(nc)
	if err != nil {
		return nil, fmt.Errorf("jetstream: %w", err)
	}
	if _, err := js.CreateOrUpdateKeyValue(ctx, jetstream.KeyValueConfig{
		Bucket: JobsBucket, Description: "soak job records", Storage: jetstream.FileStorage, History: 1,
	}); err != nil {
		return nil, fmt.Errorf("bucket %s: %w", JobsBucket, err)
	}
	if _, err := js.CreateOrUpdateKeyValue(ctx, jetstream.KeyValueConfig{
		Bucket: ClientKeysBucket, Description: "soak client keys to job ids", Storage: jetstream.FileStorage, History: 1,
	}); err != nil {
		return nil, fmt.Errorf("bucket %s: %w", ClientKeysBucket, err)
	}
	if _, err := js.CreateOrUpdateObjectStore(ctx, jetstream.ObjectStoreConfig{
		Bucket: ResultsBucket, Description: "soak result files", Storage: jetstream.FileStorage,
	}); err != nil {
		return nil, fmt.Errorf("object store %s: %w", ResultsBucket, err)
	}
	if _, err := js.CreateOrUpdateStream(ctx, jetstream.StreamConfig{
		Name:        QueueStream,
		Description: "soak jobs waiting for a worker",
		Subjects:    []string{QueueSubject},
		Retention:   jetstream.WorkQueuePolicy,
		Storage:     jetstream.FileStorage,
		Duplicates:  2 * time.Minute,
	}); err != nil {
		return nil, fmt.Errorf("stream %s: %w", QueueStream, err)
	}
	if _, err := js.CreateOrUpdateStream(ctx, jetstream.StreamConfig{
		Name:        EventsStream,
		Description: "soak job events, one subject per job",
		Subjects:    []string{eventsSubjectPrefix + ">"},
		Retention:   jetstream.LimitsPolicy,
		Storage:     jetstream.FileStorage,
		MaxAge:      settings.EventsMaxAge,
		AllowDirect: true,
	}); err != nil {
		return nil, fmt.Errorf("stream %s: %w", EventsStream, err)
	}
	// Max-deliveries advisories are core NATS messages; capturing them in
	// a stream keeps the ones fired while no scheduler was running.
	if _, err := js.CreateOrUpdateStream(ctx, jetstream.StreamConfig{
		Name:        DeadLetterStream,
		Description: "soak queue messages that used up their deliveries",
		Subjects:    []string{maxDeliveriesAdvisory},
		Retention:   jetstream.WorkQueuePolicy,
		Storage:     jetstream.FileStorage,
	}); err != nil {
		return nil, fmt.Errorf("stream %s: %w", DeadLetterStream, err)
	}
	if _, err := js.CreateOrUpdateConsumer(ctx, QueueStream, jetstream.ConsumerConfig{
		Durable:     QueueConsumer,
		Description: "shared by every soak worker",
		AckPolicy:   jetstream.AckExplicitPolicy,
		AckWait:     settings.AckWait,
		// No BackOff: it would replace AckWait and cap what a heartbeat
		// buys; workers pick retry delays themselves.
		MaxDeliver:    settings.MaxDeliver,
		MaxAckPending: settings.MaxAckPending,
	}); err != nil {
		return nil, fmt.Errorf("consumer %s: %w", QueueConsumer, err)
	}
	if _, err := js.CreateOrUpdateConsumer(ctx, DeadLetterStream, jetstream.ConsumerConfig{
		Durable:   DeadLetterConsumer,
		AckPolicy: jetstream.AckExplicitPolicy,
		AckWait:   30 * time.Second,
	}); err != nil {
		return nil, fmt.Errorf("consumer %s: %w", DeadLetterConsumer, err)
	}
	return Open(ctx, nc)
}

// Open binds to assets a scheduler has set up; ErrNotSetUp if they are
// missing. Workers call it.
func Open(ctx context.Context, nc *nats.Conn) (*Store, error) {
	js, err := jetstream.New(nc)
	if err != nil {
		return nil, fmt.Errorf("jetstream: %w", err)
	}
	s := &Store{nc: nc, js: js}
	if s.jobs, err = js.KeyValue(ctx, JobsBucket); err != nil {
		return nil, missing(JobsBucket, err)
	}
	if s.keys, err = js.KeyValue(ctx, ClientKeysBucket); err != nil {
		return nil, missing(ClientKeysBucket, err)
	}
	if s.results, err = js.ObjectStore(ctx, ResultsBucket); err != nil {
		return nil, missing(ResultsBucket, err)
	}
	if s.queue, err = js.Stream(ctx, QueueStream); err != nil {
		return nil, missing(QueueStream, err)
	}
	if s.events, err = js.Stream(ctx, EventsStream); err != nil {
		return nil, missing(EventsStream, err)
	}
	return s, nil
}

func missing(name string, err error) error {
	if errors.Is(err, jetstream.ErrBucketNotFound) || errors.Is(err, jetstream.ErrStreamNotFound) {
		return fmt.Errorf("%s: %w", name, ErrNotSetUp)
	}
	return fmt.Errorf("%s: %w", name, err)
}

// JetStream returns the JetStream context the store uses.
func (s *Store) JetStream() jetstream.JetStream { return s.js }

// QueueConsumer binds to the shared work-queue consumer.
func (s *Store) QueueConsumer(ctx context.Context) (jetstream.Consumer, error) {
	c, err := s.js.Consumer(ctx, QueueStream, QueueConsumer)
	if errors.Is(err, jetstream.ErrConsumerNotFound) {
		return nil, fmt.Errorf("consumer %s: %w", QueueConsumer, ErrNotSetUp)
	}
	return c, err
}

// Job reads a job record and its revision.
func (s *Store) Job(ctx context.Context, id string) (*soakv1.Job, uint64, error) {
	entry, err := s.jobs.Get(ctx, id)
	if errors.Is(err, jetstream.ErrKeyNotFound) {
		return nil, 0, fmt.Errorf("job %s: %w", id, ErrJobNotFound)
	}
	if err != nil {
		return nil, 0, fmt.Errorf("read job %s: %w", id, err)
	}
	job := &soakv1.Job{}
	if err := proto.Unmarshal(entry.Value(), job); err != nil {
		return nil, 0, fmt.Errorf("decode job %s: %w", id, err)
	}
	return job, entry.Revision(), nil
}

// CreateJob stores a new record; ErrJobExists if the id is taken.
func (s *Store) CreateJob(ctx context.Context, job *soakv1.Job) error {
	data, err := proto.Marshal(job)
	if err != nil {
		return fmt.Errorf("encode job %s: %w", job.GetId(), err)
	}
	if _, err := s.jobs.Create(ctx, job.GetId(), data); err != nil {
		if errors.Is(err, jetstream.ErrKeyExists) {
			return fmt.Errorf("job %s: %w", job.GetId(), ErrJobExists)
		}
		return fmt.Errorf("create job %s: %w", job.GetId(), err)
	}
	return nil
}

// DeleteJob removes a record; used to undo a submit that could not be
// queued.
func (s *Store) DeleteJob(ctx context.Context, id string) error {
	if err := s.jobs.Purge(ctx, id); err != nil {
		return fmt.Errorf("delete job %s: %w", id, err)
	}
	return nil
}

// UpdateJob changes a record by compare-and-set: it reads the record,
// lets change edit it, and writes it back only if nobody wrote in between;
// on a conflict it starts over with the newer record. An error from change
// aborts without writing and is returned as is. Two processes therefore
// never both move a job.
func (s *Store) UpdateJob(ctx context.Context, id string, change func(*soakv1.Job) error) (*soakv1.Job, error) {
	for {
		job, rev, err := s.Job(ctx, id)
		if err != nil {
			return nil, err
		}
		if err := change(job); err != nil {
			return job, err
		}
		data, err := proto.Marshal(job)
		if err != nil {
			return nil, fmt.Errorf("encode job %s: %w", id, err)
		}
		_, err = s.jobs.Update(ctx, id, data, rev)
		if err == nil {
			return job, nil
		}
		if !errors.Is(err, jetstream.ErrKeyRevisionMismatch) {
			return nil, fmt.Errorf("update job %s: %w", id, err)
		}
		if err := ctx.Err(); err != nil {
			return nil, err
		}
	}
}

// JobIDs returns every job id, newest first.
func (s *Store) JobIDs(ctx context.Context) ([]string, error) {
	ids, err := s.jobs.Keys(ctx)
	if errors.Is(err, jetstream.ErrNoKeysFound) {
		return nil, nil
	}
	if err == nil {
		// A cancelled listing ends early without an error of its own.
		err = ctx.Err()
	}
	if err != nil {
		return nil, fmt.Errorf("list jobs: %w", err)
	}
	SortNewestFirst(ids)
	return ids, nil
}

// WatchJobs calls seen with every job record as it stands, then caughtUp
// once, then seen again at every change, until ctx ends or the watch
// fails. A deleted or purged record comes as nil. revision is the change's
// sequence, as JobsRevision counts.
func (s *Store) WatchJobs(ctx context.Context, seen func(id string, job *soakv1.Job, revision uint64), caughtUp func()) error {
	w, err := s.jobs.WatchAll(ctx)
	if err != nil {
		return fmt.Errorf("watch jobs: %w", err)
	}
	defer w.Stop()
	for {
		select {
		case <-ctx.Done():
			return ctx.Err()
		case e, ok := <-w.Updates():
			switch {
			case !ok:
				return errors.New("watch jobs: the watch ended")
			case e == nil:
				caughtUp()
			case e.Operation() == jetstream.KeyValueDelete || e.Operation() == jetstream.KeyValuePurge:
				seen(e.Key(), nil, e.Revision())
			default:
				job := &soakv1.Job{}
				if err := proto.Unmarshal(e.Value(), job); err != nil {
					return fmt.Errorf("decode job %s: %w", e.Key(), err)
				}
				seen(e.Key(), job, e.Revision())
			}
		}
	}
}

// JobsRevision returns the sequence of the latest change to any job
// record, 0 before the first.
func (s *Store) JobsRevision(ctx context.Context) (uint64, error) {
	st, err := s.js.Stream(ctx, "KV_"+JobsBucket)
	if err != nil {
		return 0, fmt.Errorf("job records: %w", err)
	}
	info, err := st.Info(ctx)
	if err != nil {
		return 0, fmt.Errorf("job records: %w", err)
	}
	return info.State.LastSeq, nil
}

// CountByState counts the jobs in each state by reading every record: the
// scheduler's metrics use it until their watch (WatchJobs) has caught up.
func (s *Store) CountByState(ctx context.Context) (map[soakv1.JobState]int, error) {
	ids, err := s.JobIDs(ctx)
	if err != nil {
		return nil, err
	}
	counts := make(map[soakv1.JobState]int)
	for _, id := range ids {
		job, _, err := s.Job(ctx, id)
		if errors.Is(err, ErrJobNotFound) {
			continue // removed since the listing
		}
		if err != nil {
			return nil, err
		}
		counts[job.GetState()]++
	}
	return counts, nil
}

// ClaimClientKey maps key to id unless key is mapped already. It returns
// the id the key maps to and whether this call made the mapping.
func (s *Store) ClaimClientKey(ctx context.Context, key, id string) (string, bool, error) {
	k := clientKeyKey(key)
	_, err := s.keys.Create(ctx, k, []byte(id))
	if err == nil {
		return id, true, nil
	}
	if !errors.Is(err, jetstream.ErrKeyExists) {
		return "", false, fmt.Errorf("claim client key: %w", err)
	}
	entry, err := s.keys.Get(ctx, k)
	if err != nil {
		return "", false, fmt.Errorf("read client key: %w", err)
	}
	return string(entry.Value()), false, nil
}

// ReleaseClientKey removes a key mapping; used to undo a failed submit.
func (s *Store) ReleaseClientKey(ctx context.Context, key string) error {
	if err := s.keys.Purge(ctx, clientKeyKey(key)); err != nil {
		return fmt.Errorf("release client key: %w", err)
	}
	return nil
}

// Enqueue puts a job on the work queue. The message id is the job id, so a
// repeated enqueue inside the duplicate window is dropped by the server.
func (s *Store) Enqueue(ctx context.Context, id string) error {
	if _, err := s.js.Publish(ctx, QueueSubject, []byte(id), jetstream.WithMsgID(id)); err != nil {
		return fmt.Errorf("queue job %s: %w", id, err)
	}
	return nil
}

// QueueMessageJob reads the job id of the queue message at stream
// sequence seq; ErrJobNotFound when the message is gone.
func (s *Store) QueueMessageJob(ctx context.Context, seq uint64) (string, error) {
	msg, err := s.queue.GetMsg(ctx, seq)
	if errors.Is(err, jetstream.ErrMsgNotFound) {
		return "", fmt.Errorf("queue message %d: %w", seq, ErrJobNotFound)
	}
	if err != nil {
		return "", fmt.Errorf("read queue message %d: %w", seq, err)
	}
	return string(msg.Data), nil
}

// DeleteQueueMessage removes a queue message by stream sequence: the
// server keeps messages that used up their deliveries in a work queue.
func (s *Store) DeleteQueueMessage(ctx context.Context, seq uint64) error {
	if err := s.queue.DeleteMsg(ctx, seq); err != nil && !errors.Is(err, jetstream.ErrMsgNotFound) {
		return fmt.Errorf("delete queue message %d: %w", seq, err)
	}
	return nil
}

// NotifyCancel tells the worker running id to stop. It is a core NATS
// message: a worker that misses it sees cancel_requested in the record at
// its next heartbeat.
func (s *Store) NotifyCancel(id string) error {
	if err := s.nc.Publish(cancelSubjectPrefix+id, nil); err != nil {
		return fmt.Errorf("cancel notice for %s: %w", id, err)
	}
	return nil
}

// SubscribeCancels calls notify with the job id of every cancel notice.
func (s *Store) SubscribeCancels(notify func(id string)) (*nats.Subscription, error) {
	sub, err := s.nc.Subscribe(cancelSubjectPrefix+"*", func(m *nats.Msg) {
		notify(m.Subject[len(cancelSubjectPrefix):])
	})
	if err != nil {
		return nil, fmt.Errorf("subscribe to cancel notices: %w", err)
	}
	return sub, nil
}

// QueuedJobIDs returns the ids of the jobs that have a message in the work
// queue now.
func (s *Store) QueuedJobIDs(ctx context.Context) (map[string]bool, error) {
	info, err := s.queue.Info(ctx)
	if err != nil {
		return nil, fmt.Errorf("queue state: %w", err)
	}
	ids := make(map[string]bool, info.State.Msgs)
	if info.State.Msgs == 0 {
		return ids, nil
	}
	for seq := info.State.FirstSeq; seq <= info.State.LastSeq; seq++ {
		id, err := s.QueueMessageJob(ctx, seq)
		if errors.Is(err, ErrJobNotFound) {
			continue // acknowledged or deleted: a gap in the sequence
		}
		if err != nil {
			return nil, err
		}
		ids[id] = true
	}
	return ids, nil
}
