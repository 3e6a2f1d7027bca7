package farmclient

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"

	soakv1 "soakfarm/proto/soak/v1"
)

// ErrNotFinished is returned by Fetch for a job that has not finished.
var ErrNotFinished = errors.New("job has not finished")

// ErrArtifactMismatch is returned by Fetch when a downloaded file's size or
// SHA-256 differs from the job's record.
var ErrArtifactMismatch = errors.New("downloaded file differs from the job's record")

// Fetch downloads every result file of a finished job into outDir
// (created if missing) and returns the paths written, in the job's
// artifact order. Each file's size and SHA-256 are checked against the
// job's record; a file is only put in place once it checked out.
func (c *Client) Fetch(ctx context.Context, jobID, outDir string) ([]string, error) {
	job, err := c.Get(ctx, jobID)
	if err != nil {
		return nil, err
	}
	if job.GetState() != soakv1.JobState_JOB_STATE_FINISHED {
		return nil, fmt.Errorf("fetch job %s: %w (state %s)", jobID, ErrNotFinished, job.GetState())
	}
	paths := make([]string, 0, len(job.GetArtifacts()))
	for _, a := range job.GetArtifacts() {
		p, err := c.fetchArtifact(ctx, jobID, a, outDir)
		if err != nil {
			return paths, fmt.Errorf("fetch job %s: %w", jobID, err)
		}
		paths = append(paths, p)
	}
	return paths, nil
}

func (c *Client) fetchArtifact(ctx context.Context, jobID string, want *soakv1.Artifact, outDir string) (string, error) {
	rel := filepath.FromSlash(want.GetName())
	if !filepath.IsLocal(rel) {
		return "", fmt.Errorf("artifact name %q: not a relative path inside the output folder", want.GetName())
	}
	dest := filepath.Join(outDir, rel)
	if err := os.MkdirAll(filepath.Dir(dest), 0o755); err != nil {
		return "", err
	}
	tmp, err := os.CreateTemp(filepath.Dir(dest), ".fetch-*")
	if err != nil {
		return "", err
	}
	defer os.Remove(tmp.Name()) // no-op once renamed
	size, sum, err := c.download(ctx, jobID, want.GetName(), tmp)
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return "", fmt.Errorf("artifact %s: %w", want.GetName(), err)
	}
	if size != want.GetSizeBytes() || sum != want.GetSha256() {
		return "", fmt.Errorf("artifact %s: %w: got %d bytes sha256 %s, record says %d bytes sha256 %s",
			want.GetName(), ErrArtifactMismatch, size, sum, want.GetSizeBytes(), want.GetSha256())
	}
	if err := os.Rename(tmp.Name(), dest); err != nil {
		return "", err
	}
	return dest, nil
}

// download streams one artifact into w and returns its size and hex SHA-256.
func (c *Client) download(ctx context.Context, jobID, name string, w io.Writer) (uint64, string, error) {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stream, err := c.api.FetchArtifact(ctx, &soakv1.FetchArtifactRequest{JobId: jobID, Name: name})
	if err != nil {
		return 0, "", err
	}
	h := sha256.New()
	var size uint64
	for {
		resp, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return size, hex.EncodeToString(h.Sum(nil)), nil
		}
		if err != nil {
			return 0, "", err
		}
		n, err := io.MultiWriter(w, h).Write(resp.GetChunk())
		if err != nil {
			return 0, "", err
		}
		size += uint64(n)
	}
}
