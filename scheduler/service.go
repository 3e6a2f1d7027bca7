package scheduler

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"strings"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/types/known/timestamppb"

	"soakfarm/jobspec"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/access"
	"soakfarm/scheduler/store"
)

const (
	// chunkSize of FetchArtifact messages: well under gRPC's 4 MiB default.
	chunkSize = 256 << 10
	// defaultPageSize and maxPageSize bound ListJobs pages.
	defaultPageSize = 50
	maxPageSize     = 1000
	// finalCheckInterval is how often a watch looks at the job record, so
	// a job whose final event was never written (its writer died between
	// record and event) still ends the watch.
	finalCheckInterval = 2 * time.Second
)

// service implements soakv1.FarmServiceServer on the store.
type service struct {
	soakv1.UnimplementedFarmServiceServer
	store *store.Store
	log   *slog.Logger
	// life ends when the server closes.
	life    context.Context
	limits  Limits
	metrics *metrics
	// index keeps each job's state and owner from a watch of the records.
	index *jobIndex
}

// errWatchDone stops FollowEvents after the final event.
var errWatchDone = errors.New("watch done")

func (s *service) SubmitJob(ctx context.Context, req *soakv1.SubmitJobRequest) (*soakv1.SubmitJobResponse, error) {
	client := caller(ctx)
	if err := s.validateSpec(req.GetSpec()); err != nil {
		return nil, err
	}
	now := time.Now()
	id := store.NewJobID(now)
	key := req.GetClientKey()
	// Keys are the client's own: another client's same key is another job.
	scopedKey := client.Name + "/" + key
	if key != "" {
		owner, claimed, err := s.store.ClaimClientKey(ctx, scopedKey, id)
		if err != nil {
			return nil, storeError(err)
		}
		if !claimed {
			job, _, err := s.store.Job(ctx, owner)
			if err == nil {
				return s.existing(ctx, job)
			}
			if !errors.Is(err, store.ErrJobNotFound) {
				return nil, storeError(err)
			}
			// The first submit with this key is still on its way, or died
			// before writing the record: complete it under its id.
			id = owner
		}
	}
	job := &soakv1.Job{
		Id:         id,
		Owner:      client.Name,
		ClientKey:  key,
		Spec:       req.GetSpec(),
		State:      soakv1.JobState_JOB_STATE_QUEUED,
		SubmitTime: timestamppb.New(now),
	}
	if err := s.store.CreateJob(ctx, job); err != nil {
		if errors.Is(err, store.ErrJobExists) {
			existing, _, err := s.store.Job(ctx, id)
			if err != nil {
				return nil, storeError(err)
			}
			return s.existing(ctx, existing)
		}
		return nil, storeError(err)
	}
	// The queued event goes first so that it precedes a started event of a
	// worker that picks the job up at once.
	if _, err := s.store.AppendEvent(ctx, id, &soakv1.JobEvent{
		Time: job.GetSubmitTime(), Kind: &soakv1.JobEvent_Queued{Queued: &soakv1.JobQueued{}},
	}); err != nil {
		s.undoSubmit(id, scopedKey)
		return nil, storeError(err)
	}
	if err := s.store.Enqueue(ctx, id); err != nil {
		s.undoSubmit(id, scopedKey)
		return nil, storeError(err)
	}
	s.metrics.submitted.Inc()
	s.log.Info("job queued", "job", id, "name", req.GetSpec().GetName(), "owner", client.Name)
	return &soakv1.SubmitJobResponse{Job: job}, nil
}

// existing answers a repeated submit with the job the first one made. A
// job that never started is queued again: the first submit's scheduler may
// have died between writing the record and queueing it, and the repeat is
// the client's way of finishing that submit. A message still in the queue's
// duplicate window is dropped by the server; a later second message is
// dropped by the worker that finds the job taken or ended.
func (s *service) existing(ctx context.Context, job *soakv1.Job) (*soakv1.SubmitJobResponse, error) {
	if job.GetState() == soakv1.JobState_JOB_STATE_QUEUED && len(job.GetAttempts()) == 0 {
		if err := s.store.Enqueue(ctx, job.GetId()); err != nil {
			return nil, storeError(err)
		}
	}
	return &soakv1.SubmitJobResponse{Job: job, Existing: true}, nil
}

// undoSubmit removes the record and key of a job that could not be queued,
// so that a retry with the same key starts afresh.
func (s *service) undoSubmit(id, key string) {
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	if err := s.store.DeleteJob(ctx, id); err != nil {
		s.log.Warn("undo submit", "job", id, "err", err)
	}
	if key != "" {
		if err := s.store.ReleaseClientKey(ctx, key); err != nil {
			s.log.Warn("undo submit", "job", id, "err", err)
		}
	}
}

// validateSpec turns spec problems into INVALID_ARGUMENT with one
// BadRequest field violation per problem. A problem that only a limit
// causes names the scheduler flag that raises the limit.
func (s *service) validateSpec(spec *soakv1.JobSpec) error {
	if spec == nil {
		return invalidArgument("spec is missing", &errdetails.BadRequest_FieldViolation{Field: "spec", Description: "is required"})
	}
	// The STL limits go first: validation reads the meshes.
	if violations := checkSTLBodies(spec, s.limits); len(violations) > 0 {
		return invalidArgument("invalid spec:\n"+joinViolations(violations), violations...)
	}
	err := jobspec.Validate(spec, s.limits.Spec)
	if err == nil {
		return nil
	}
	var ve *jobspec.ValidationError
	if !errors.As(err, &ve) {
		return status.Error(codes.InvalidArgument, err.Error())
	}
	hints := limitHints(spec, s.limits.Spec, ve.Problems)
	violations := make([]*errdetails.BadRequest_FieldViolation, len(ve.Problems))
	for i, p := range ve.Problems {
		description := p.Message
		if p.Value != "" {
			description += ", got " + p.Value
		}
		if flag := hints[p]; flag != "" {
			description += " (the farm's limit; the scheduler's " + flag + " raises it)"
		}
		violations[i] = &errdetails.BadRequest_FieldViolation{Field: p.Field, Description: description}
	}
	return invalidArgument("invalid spec:\n"+joinViolations(violations), violations...)
}

func joinViolations(violations []*errdetails.BadRequest_FieldViolation) string {
	lines := make([]string, len(violations))
	for i, v := range violations {
		lines[i] = v.GetField() + ": " + v.GetDescription()
	}
	return strings.Join(lines, "\n")
}

// caller is the authenticated client of a call; the guard attaches one to
// every call it lets through.
func caller(ctx context.Context) access.Client {
	c, _ := access.FromContext(ctx)
	return c
}

// accessibleJob reads a job the caller may see. Another client's job is
// NOT_FOUND, as a missing one is, so ids of other clients' jobs reveal
// nothing.
func (s *service) accessibleJob(ctx context.Context, id string) (*soakv1.Job, error) {
	job, _, err := s.store.Job(ctx, id)
	if err != nil {
		return nil, storeError(err)
	}
	if !caller(ctx).MayAccess(job.GetOwner()) {
		return nil, storeError(fmt.Errorf("job %s: %w", id, store.ErrJobNotFound))
	}
	return job, nil
}

func invalidArgument(msg string, violations ...*errdetails.BadRequest_FieldViolation) error {
	st, err := status.New(codes.InvalidArgument, msg).WithDetails(&errdetails.BadRequest{FieldViolations: violations})
	if err != nil {
		return status.Error(codes.InvalidArgument, msg)
	}
	return st.Err()
}

// storeError maps store errors to status codes: a missing job is
// NOT_FOUND, anything else from JetStream is worth a retry (UNAVAILABLE).
func storeError(err error) error {
	switch {
	case errors.Is(err, store.ErrJobNotFound), errors.Is(err, store.ErrArtifactNotFound):
		return status.Error(codes.NotFound, err.Error())
	case errors.Is(err, context.Canceled), errors.Is(err, context.DeadlineExceeded):
		return status.FromContextError(err).Err()
	}
	return status.Error(codes.Unavailable, err.Error())
}

func checkJobID(id string) error {
	if !store.ValidJobID(id) {
		return invalidArgument("job_id: not a job id, got "+quote(id),
			&errdetails.BadRequest_FieldViolation{Field: "job_id", Description: "not a job id, got " + quote(id)})
	}
	return nil
}

func quote(s string) string {
	const max = 64
	if len(s) > max {
		s = s[:max] + "..."
	}
	return `"` + s + `"`
}

func (s *service) GetJob(ctx context.Context, req *soakv1.GetJobRequest) (*soakv1.GetJobResponse, error) {
	if err := checkJobID(req.GetJobId()); err != nil {
		return nil, err
	}
	job, err := s.accessibleJob(ctx, req.GetJobId())
	if err != nil {
		return nil, err
	}
	return &soakv1.GetJobResponse{Job: job}, nil
}

func (s *service) CancelJob(ctx context.Context, req *soakv1.CancelJobRequest) (*soakv1.CancelJobResponse, error) {
	id := req.GetJobId()
	if err := checkJobID(id); err != nil {
		return nil, err
	}
	if _, err := s.accessibleJob(ctx, id); err != nil {
		return nil, err
	}
	reason := req.GetReason()
	if reason == "" {
		reason = "cancelled on request"
	}
	job, err := s.store.UpdateJob(ctx, id, func(job *soakv1.Job) error {
		if store.IsFinal(job.GetState()) || job.GetCancelRequested() {
			return errNoChange
		}
		job.CancelRequested = true
		// Until the job ends, failure_reason holds why it is to end.
		job.FailureReason = reason
		if job.GetState() == soakv1.JobState_JOB_STATE_QUEUED {
			// Nobody runs it: end it here; the worker that later takes the
			// queue message sees the ended record and drops the message.
			store.End(job, soakv1.JobState_JOB_STATE_CANCELLED, time.Now(), reason)
		}
		return nil
	})
	switch {
	case errors.Is(err, errNoChange):
		if !store.IsFinal(job.GetState()) {
			// Asked before: repeat the notice in case the first was missed.
			s.notifyCancel(id)
		}
		return &soakv1.CancelJobResponse{Job: job}, nil
	case err != nil:
		return nil, storeError(err)
	}
	if store.IsFinal(job.GetState()) {
		if err := s.store.EnsureFinalEvent(ctx, job); err != nil {
			s.log.Warn("cancel: final event", "job", id, "err", err)
		}
	} else {
		s.notifyCancel(id)
	}
	s.log.Info("cancel requested", "job", id, "state", job.GetState().String(), "by", caller(ctx).Name)
	return &soakv1.CancelJobResponse{Job: job}, nil
}

func (s *service) notifyCancel(id string) {
	if err := s.store.NotifyCancel(id); err != nil {
		// The worker also sees cancel_requested at its next heartbeat.
		s.log.Warn("cancel notice", "job", id, "err", err)
	}
}

// errNoChange aborts an UpdateJob that has nothing to write.
var errNoChange = errors.New("no change")

func (s *service) ListJobs(ctx context.Context, req *soakv1.ListJobsRequest) (*soakv1.ListJobsResponse, error) {
	size := int(req.GetPageSize())
	switch {
	case size == 0:
		size = defaultPageSize
	case size > maxPageSize:
		size = maxPageSize
	}
	token := req.GetPageToken()
	if token != "" && !store.ValidJobID(token) {
		return nil, invalidArgument("page_token: not a token this server gave, got "+quote(token),
			&errdetails.BadRequest_FieldViolation{Field: "page_token", Description: "not a token this server gave"})
	}
	client := caller(ctx)
	wanted := make(map[soakv1.JobState]bool, len(req.GetStates()))
	for _, st := range req.GetStates() {
		wanted[st] = true
	}
	// The index names the candidates; the records read below decide.
	ids, ok := s.index.matching(ctx, s.store, func(state soakv1.JobState, owner string) bool {
		return (len(wanted) == 0 || wanted[state]) && client.MayAccess(owner)
	})
	if ok {
		store.SortNewestFirst(ids)
	} else {
		var err error
		if ids, err = s.store.JobIDs(ctx); err != nil {
			return nil, storeError(err)
		}
	}
	resp := &soakv1.ListJobsResponse{}
	for i, id := range ids {
		// The token is the last id of the previous page; ids run newest
		// first, so the page continues with the older ones.
		if token != "" && id >= token {
			continue
		}
		job, _, err := s.store.Job(ctx, id)
		if errors.Is(err, store.ErrJobNotFound) {
			continue
		}
		if err != nil {
			return nil, storeError(err)
		}
		if (len(wanted) > 0 && !wanted[job.GetState()]) || !client.MayAccess(job.GetOwner()) {
			continue
		}
		resp.Jobs = append(resp.Jobs, job)
		if len(resp.Jobs) == size {
			if i < len(ids)-1 {
				resp.NextPageToken = id
			}
			break
		}
	}
	return resp, nil
}

func (s *service) WatchJob(req *soakv1.WatchJobRequest, stream grpc.ServerStreamingServer[soakv1.WatchJobResponse]) error {
	id := req.GetJobId()
	if err := checkJobID(id); err != nil {
		return err
	}
	ctx, cancel := context.WithCancel(stream.Context())
	defer cancel()
	stop := context.AfterFunc(s.life, cancel)
	defer stop()
	if _, err := s.accessibleJob(ctx, id); err != nil {
		return err
	}
	go s.completeFinalEvent(ctx, id)

	after := req.GetAfterSequence()
	first := true
	err := s.store.FollowEvents(ctx, id, func(ev *soakv1.JobEvent) error {
		if first && ev.GetSequence() > after+1 {
			return status.Errorf(codes.OutOfRange, "events of job %s before %d are no longer kept; GetJob has its state", id, ev.GetSequence())
		}
		first = false
		if ev.GetSequence() > after {
			if err := stream.Send(&soakv1.WatchJobResponse{Event: ev}); err != nil {
				return err
			}
		}
		if store.IsFinalEvent(ev) {
			return errWatchDone
		}
		return nil
	})
	switch {
	case errors.Is(err, errWatchDone):
		return nil
	case s.life.Err() != nil:
		return status.Error(codes.Unavailable, "scheduler shutting down; resume the watch")
	case stream.Context().Err() != nil:
		return status.FromContextError(stream.Context().Err()).Err()
	case status.Code(err) != codes.Unknown:
		return err
	}
	return status.Error(codes.Unavailable, err.Error())
}

// completeFinalEvent appends the final event of a watched job whose record
// has ended but whose log has no final event, until ctx ends.
func (s *service) completeFinalEvent(ctx context.Context, id string) {
	tick := time.NewTicker(finalCheckInterval)
	defer tick.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case <-tick.C:
		}
		job, _, err := s.store.Job(ctx, id)
		if err != nil || !store.IsFinal(job.GetState()) {
			continue
		}
		if err := s.store.EnsureFinalEvent(ctx, job); err != nil && ctx.Err() == nil {
			s.log.Warn("watch: final event", "job", id, "err", err)
		}
		return
	}
}

func (s *service) FetchArtifact(req *soakv1.FetchArtifactRequest, stream grpc.ServerStreamingServer[soakv1.FetchArtifactResponse]) error {
	ctx := stream.Context()
	if err := checkJobID(req.GetJobId()); err != nil {
		return err
	}
	job, err := s.accessibleJob(ctx, req.GetJobId())
	if err != nil {
		return err
	}
	if job.GetState() != soakv1.JobState_JOB_STATE_FINISHED {
		return status.Errorf(codes.FailedPrecondition, "job %s is %s; only finished jobs have result files", job.GetId(), job.GetState())
	}
	obj, artifact, err := s.store.OpenArtifact(ctx, job, req.GetName())
	if err != nil {
		return storeError(err)
	}
	defer obj.Close()
	buf := make([]byte, chunkSize)
	first := &soakv1.FetchArtifactResponse{Artifact: artifact}
	for {
		n, err := io.ReadFull(obj, buf)
		if n > 0 || first != nil {
			msg := first
			if msg == nil {
				msg = &soakv1.FetchArtifactResponse{}
			}
			first = nil
			msg.Chunk = buf[:n]
			if err := stream.Send(msg); err != nil {
				return err
			}
		}
		if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
			return nil
		}
		if err != nil {
			return storeError(err)
		}
	}
}
