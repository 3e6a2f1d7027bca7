package cli

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/protobuf/proto"

	soakv1 "soakfarm/proto/soak/v1"
)

// lockedBuffer collects a process's output while the test reads it.
type lockedBuffer struct {
	mu  sync.Mutex
	buf bytes.Buffer
}

func (b *lockedBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.Write(p)
}

func (b *lockedBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.String()
}

// buildSoak compiles the soak binary into a temporary folder.
func buildSoak(t *testing.T) string {
	t.Helper()
	bin := filepath.Join(t.TempDir(), "soak")
	out, err := exec.Command("go", "build", "-o", bin, "soakfarm/cmd/soak").CombinedOutput()
	if err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	return bin
}

// startProcess runs the binary with args until the test ends; its
// standard error is collected in the returned buffer.
func startProcess(t *testing.T, bin string, stdout io.Writer, args ...string) (*exec.Cmd, *lockedBuffer) {
	t.Helper()
	cmd := exec.Command(bin, args...)
	logs := &lockedBuffer{}
	cmd.Stdout, cmd.Stderr = stdout, logs
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		cmd.Process.Signal(os.Interrupt)
		done := make(chan error, 1)
		go func() { done <- cmd.Wait() }()
		select {
		case <-done:
		case <-time.After(20 * time.Second):
			cmd.Process.Kill()
			<-done
		}
		if t.Failed() {
			t.Logf("soak %s:\n%s", strings.Join(args, " "), logs.String())
		}
	})
	return cmd, logs
}

// farmAddrs starts `soak serve` and reads the API and NATS addresses it
// prints.
func startServe(t *testing.T, bin string, args ...string) (api, natsURL string) {
	t.Helper()
	pr, pw := io.Pipe()
	startProcess(t, bin, pw, append([]string{"serve"}, args...)...)
	found := make(chan struct{})
	go func() {
		scan := bufio.NewScanner(pr)
		for scan.Scan() {
			line := scan.Text()
			if a, ok := strings.CutPrefix(line, "farm API on "); ok {
				api = a
			}
			if u, ok := strings.CutPrefix(line, "NATS for remote workers on "); ok {
				natsURL = u
			}
			if strings.HasPrefix(line, "farm state in") {
				close(found)
			}
		}
	}()
	select {
	case <-found:
	case <-time.After(20 * time.Second):
		t.Fatal("soak serve did not report its addresses")
	}
	return api, natsURL
}

// quickSphere is a small real job: about a third of a second of solving.
func quickSphere(name string) *soakv1.JobSpec {
	return &soakv1.JobSpec{
		Name:        name,
		Part:        &soakv1.Part{Shape: &soakv1.Part_Sphere{Sphere: &soakv1.Sphere{DiameterM: 0.05}}},
		CellsAcross: proto.Uint32(16),
		Material: &soakv1.Material{
			DensityKgM3: 7850, ConductivityWMk: proto.Float64(45), SpecificHeatJKgk: proto.Float64(480),
		},
		InitialC: proto.Float64(20),
		Exposure: []*soakv1.Exposure{{Surfaces: "all", HWM2K: 60, FluidC: proto.Float64(600)}},
		EndS:     600,
		Probes:   []*soakv1.Probe{{Name: "centre", AtM: []float64{0, 0, 0}}},
	}
}

// finishedLog matches a worker's log line for a job it completed and
// ended; the job record accepts one such completion per job.
var finishedLog = regexp.MustCompile(`msg="job finished" worker=\S+ job=(\S+)`)

func TestFarmProcessesLoseNoJobWhenAWorkerIsKilled(t *testing.T) {
	t.Parallel()
	bin := buildSoak(t)
	// A short acknowledgement wait brings the killed worker's job back
	// within seconds.
	api, natsURL := startServe(t, bin, "--workers", "0", "--data", t.TempDir(),
		"--listen", "127.0.0.1:0", "--nats-listen", "127.0.0.1:0", "--ack-wait", "2s")
	if natsURL == "" {
		t.Fatal("soak serve printed no NATS address")
	}
	victim, victimLogs := startProcess(t, bin, io.Discard, "worker", "--nats", natsURL, "--name", "victim", "--threads", "1")
	_, survivorLogs := startProcess(t, bin, io.Discard, "worker", "--nats", natsURL, "--name", "survivor", "--threads", "1")

	conn, err := grpc.NewClient(api, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	client := soakv1.NewFarmServiceClient(conn)
	ctx, cancel := context.WithTimeout(t.Context(), 90*time.Second)
	defer cancel()
	var ids []string
	for i := range 10 {
		resp, err := client.SubmitJob(ctx, &soakv1.SubmitJobRequest{Spec: quickSphere(fmt.Sprintf("ball-%d", i))})
		if err != nil {
			t.Fatal(err)
		}
		ids = append(ids, resp.GetJob().GetId())
	}

	// Kill the victim the moment it holds a job.
	for !strings.Contains(victimLogs.String(), `msg="job started"`) {
		if ctx.Err() != nil {
			t.Fatal("the victim never started a job")
		}
		time.Sleep(5 * time.Millisecond)
	}
	if err := victim.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}

	for _, id := range ids {
		started, finished := 0, 0
		err := watchToEnd(ctx, client, id, func(ev *soakv1.JobEvent) {
			if ev.GetStarted() != nil {
				started++
			}
			if ev.GetFinished() != nil {
				finished++
			}
		})
		if err != nil {
			t.Fatalf("watch %s: %v", id, err)
		}
		job, err := client.GetJob(ctx, &soakv1.GetJobRequest{JobId: id})
		if err != nil {
			t.Fatal(err)
		}
		if finished != 1 || started < 1 || job.GetJob().GetState() != soakv1.JobState_JOB_STATE_FINISHED {
			t.Errorf("job %s: %d started, %d finished events, state %v; want finished once", id, started, finished, job.GetJob().GetState())
		}
	}
	completions := map[string]int{}
	for _, logs := range []string{victimLogs.String(), survivorLogs.String()} {
		for _, m := range finishedLog.FindAllStringSubmatch(logs, -1) {
			completions[m[1]]++
		}
	}
	for _, id := range ids {
		if completions[id] != 1 {
			t.Errorf("job %s completed %d times by the workers, want once", id, completions[id])
		}
	}
	// The job the victim held went to the survivor after the victim's
	// heartbeat stopped.
	taken := 0
	for _, id := range ids {
		job, err := client.GetJob(ctx, &soakv1.GetJobRequest{JobId: id})
		if err != nil {
			t.Fatal(err)
		}
		attempts := job.GetJob().GetAttempts()
		if len(attempts) == 2 && attempts[0].GetWorker() == "victim" &&
			strings.Contains(attempts[0].GetError(), "stopped responding") && attempts[1].GetWorker() == "survivor" {
			taken++
		}
	}
	if taken != 1 {
		t.Errorf("%d jobs passed from the killed worker to the survivor, want 1", taken)
	}
}

// watchToEnd calls fn with each event of the job until its final one.
func watchToEnd(ctx context.Context, client soakv1.FarmServiceClient, id string, fn func(*soakv1.JobEvent)) error {
	stream, err := client.WatchJob(ctx, &soakv1.WatchJobRequest{JobId: id})
	if err != nil {
		return err
	}
	for {
		resp, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return err
		}
		fn(resp.GetEvent())
	}
}

func TestServeRefusesOpenListenersWithoutCredentials(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"API on all interfaces", []string{"--listen", "0.0.0.0:0"}, "needs a token file (--tokens) and TLS (--tls-cert/--tls-key)"},
		{"API with tokens but no TLS", []string{"--listen", "0.0.0.0:0", "--tokens", "testdata/tokens.yaml"}, "needs a token file (--tokens) and TLS (--tls-cert/--tls-key)"},
		{"NATS on all interfaces", []string{"--listen", "127.0.0.1:0", "--nats-listen", "0.0.0.0:0"}, "needs --nats-worker-user and --nats-worker-password"},
		{"NATS user without password", []string{"--listen", "127.0.0.1:0", "--nats-listen", ":0", "--nats-user", "farm"}, "or --nats-user and --nats-password"},
		{"worker user without password", []string{"--listen", "127.0.0.1:0", "--nats-worker-user", "w"}, "--nats-worker-user and --nats-worker-password"},
		{"client CA without certificate", []string{"--listen", "127.0.0.1:0", "--tls-client-ca", "ca.pem"}, "--tls-client-ca needs --tls-cert and --tls-key"},
		{"message limit too small", []string{"--listen", "127.0.0.1:0", "--max-message-bytes", "1KiB"}, "--max-message-bytes: must be from 1MiB to 2GiB, got 1KiB"},
		{"bad token file", []string{"--listen", "127.0.0.1:0", "--tokens", "testdata/tokens-bad.yaml"}, "clients[1].token_sha256: want 64 hex digits"},
		{"ack wait too short", []string{"--listen", "127.0.0.1:0", "--ack-wait", "10ms"}, "--ack-wait: must be at least 1s, got 10ms"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			var stderr bytes.Buffer
			args := append([]string{"serve", "--data", t.TempDir()}, tc.args...)
			code := Main(t.Context(), args, strings.NewReader(""), io.Discard, &stderr)
			if code != ExitUsage || !strings.Contains(stderr.String(), tc.want) {
				t.Errorf("soak %s: exit %d, stderr %q; want exit %d and %q", strings.Join(args, " "), code, stderr.String(), ExitUsage, tc.want)
			}
		})
	}
}
