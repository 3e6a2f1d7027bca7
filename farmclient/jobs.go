package farmclient

import (
	"context"
	"errors"
	"fmt"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	soakv1 "soakfarm/proto/soak/v1"
)

// ErrTooLarge: a request over the client's message limit.
var ErrTooLarge = errors.New("message too large")

// Submit queues spec. A repeated Submit with the same non-empty clientKey
// returns the job the first call made, with existing set.
// A spec larger than the message limit is refused here with ErrTooLarge,
// and one larger than the scheduler's limit by the scheduler
// (RESOURCE_EXHAUSTED); either error says the limit and how to raise it.
func (c *Client) Submit(ctx context.Context, spec *soakv1.JobSpec, clientKey string) (job *soakv1.Job, existing bool, err error) {
	req := &soakv1.SubmitJobRequest{Spec: spec, ClientKey: clientKey}
	if n := proto.Size(req); n > c.maxMessageBytes {
		return nil, false, fmt.Errorf("submit %q: %w: the request is %d bytes, over this client's limit of %d bytes (raise it with --max-message-bytes or farmclient.WithMaxMessageBytes; the scheduler's own --max-message-bytes must allow it too)",
			spec.GetName(), ErrTooLarge, n, c.maxMessageBytes)
	}
	resp, err := c.api.SubmitJob(ctx, req)
	if status.Code(err) == codes.ResourceExhausted {
		return nil, false, fmt.Errorf("submit %q: %w (the scheduler's --max-message-bytes raises its limit)", spec.GetName(), err)
	}
	if err != nil {
		return nil, false, fmt.Errorf("submit %q: %w", spec.GetName(), err)
	}
	return resp.GetJob(), resp.GetExisting(), nil
}

// Get returns the job's current record.
func (c *Client) Get(ctx context.Context, jobID string) (*soakv1.Job, error) {
	resp, err := c.api.GetJob(ctx, &soakv1.GetJobRequest{JobId: jobID})
	if err != nil {
		return nil, fmt.Errorf("get job %s: %w", jobID, err)
	}
	return resp.GetJob(), nil
}

// Cancel asks the farm to stop the job; reason is recorded with it.
func (c *Client) Cancel(ctx context.Context, jobID, reason string) (*soakv1.Job, error) {
	resp, err := c.api.CancelJob(ctx, &soakv1.CancelJobRequest{JobId: jobID, Reason: reason})
	if err != nil {
		return nil, fmt.Errorf("cancel job %s: %w", jobID, err)
	}
	return resp.GetJob(), nil
}

// List returns one page of jobs, newest first, in the given states (all
// states when empty). An empty nextPageToken means there are no more.
func (c *Client) List(ctx context.Context, states []soakv1.JobState, pageSize uint32, pageToken string) (jobs []*soakv1.Job, nextPageToken string, err error) {
	resp, err := c.api.ListJobs(ctx, &soakv1.ListJobsRequest{States: states, PageSize: pageSize, PageToken: pageToken})
	if err != nil {
		return nil, "", fmt.Errorf("list jobs: %w", err)
	}
	return resp.GetJobs(), resp.GetNextPageToken(), nil
}

// FieldViolation is one problem the farm found in a submitted spec.
type FieldViolation struct {
	// Field is the path in the spec, e.g. "exposure[1].emissivity".
	Field       string
	Description string
}

// FieldViolations returns the spec problems carried by an error from
// Submit (a google.rpc.BadRequest detail), or nil when there are none.
func FieldViolations(err error) []FieldViolation {
	var withStatus interface{ GRPCStatus() *status.Status }
	if !errors.As(err, &withStatus) {
		return nil
	}
	var out []FieldViolation
	for _, d := range withStatus.GRPCStatus().Details() {
		br, ok := d.(*errdetails.BadRequest)
		if !ok {
			continue
		}
		for _, v := range br.GetFieldViolations() {
			out = append(out, FieldViolation{Field: v.GetField(), Description: v.GetDescription()})
		}
	}
	return out
}
