package store

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"

	"github.com/nats-io/nats.go/jetstream"

	soakv1 "soakfarm/proto/soak/v1"
)

// ErrArtifactNotFound: the job has no result file of that name.
var ErrArtifactNotFound = errors.New("artifact not found")

// artifactObject names a result file in the object store. The attempt
// number keeps a late upload of a superseded attempt from overwriting the
// files of the attempt that finished the job.
func artifactObject(id string, attempt uint32, name string) string {
	return id + "/" + strconv.FormatUint(uint64(attempt), 10) + "/" + name
}

// PutArtifact uploads the file at path as a result of the job's attempt,
// named by the file's base name.
func (s *Store) PutArtifact(ctx context.Context, id string, attempt uint32, path string) (*soakv1.Artifact, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("upload result: %w", err)
	}
	defer f.Close()
	name := filepath.Base(path)
	hash := sha256.New()
	info, err := s.results.Put(ctx, jetstream.ObjectMeta{Name: artifactObject(id, attempt, name)}, io.TeeReader(f, hash))
	if err != nil {
		return nil, fmt.Errorf("upload %s of job %s: %w", name, id, err)
	}
	return &soakv1.Artifact{Name: name, SizeBytes: info.Size, Sha256: hex.EncodeToString(hash.Sum(nil))}, nil
}

// OpenArtifact opens a result file of a finished job for reading; the
// caller closes it. ErrArtifactNotFound if the job lists no such file.
func (s *Store) OpenArtifact(ctx context.Context, job *soakv1.Job, name string) (io.ReadCloser, *soakv1.Artifact, error) {
	var artifact *soakv1.Artifact
	for _, a := range job.GetArtifacts() {
		if a.GetName() == name {
			artifact = a
		}
	}
	attempts := job.GetAttempts()
	if artifact == nil || len(attempts) == 0 {
		return nil, nil, fmt.Errorf("job %s, file %q: %w", job.GetId(), name, ErrArtifactNotFound)
	}
	// Artifacts are listed only by the attempt that finished the job, which
	// is the last one.
	obj, err := s.results.Get(ctx, artifactObject(job.GetId(), attempts[len(attempts)-1].GetNumber(), name))
	if errors.Is(err, jetstream.ErrObjectNotFound) {
		return nil, nil, fmt.Errorf("job %s, file %q: %w", job.GetId(), name, ErrArtifactNotFound)
	}
	if err != nil {
		return nil, nil, fmt.Errorf("open %s of job %s: %w", name, job.GetId(), err)
	}
	return obj, artifact, nil
}
