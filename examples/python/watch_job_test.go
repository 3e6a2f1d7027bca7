// Package python_test runs examples/python/watch_job.py against a real
// local farm, so the Python example keeps working with the schema.
package python_test

import (
	"bytes"
	"context"
	"io"
	"log/slog"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"soakfarm/farmclient"
	"soakfarm/internal/localfarm"
	soakv1 "soakfarm/proto/soak/v1"
)

// python is Debian's interpreter, where apt installs the gRPC modules; a
// python3 earlier on PATH may be another installation without them.
const python = "/usr/bin/python3"

const aptHint = "apt-get install -y python3-grpcio python3-protobuf python3-yaml protobuf-compiler protobuf-compiler-grpc"

// needTools skips the test when the Python gRPC modules or the stub
// generator are missing.
func needTools(t *testing.T) {
	t.Helper()
	if out, err := exec.Command(python, "-c", "import grpc, google.protobuf, yaml").CombinedOutput(); err != nil {
		t.Skipf("%s lacks the gRPC, protobuf or YAML modules (%v: %s); install them with: %s", python, err, bytes.TrimSpace(out), aptHint)
	}
	for _, tool := range []string{"protoc", "grpc_python_plugin"} {
		if _, err := exec.LookPath(tool); err != nil {
			t.Skipf("%s not found; install it with: %s", tool, aptHint)
		}
	}
}

func TestWatchJobScript(t *testing.T) {
	needTools(t)
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()

	stubs := t.TempDir()
	if out, err := exec.CommandContext(ctx, "./gen_stubs.sh", stubs).CombinedOutput(); err != nil {
		t.Fatalf("gen_stubs.sh: %v\n%s", err, out)
	}

	farm, err := localfarm.Start(ctx, localfarm.Config{
		DataDir: t.TempDir(), Workers: 1,
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil)),
	})
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		if err := farm.Close(context.Background()); err != nil {
			t.Error(err)
		}
	}()

	var stdout, stderr bytes.Buffer
	cmd := exec.CommandContext(ctx, python, "watch_job.py",
		"--farm", farm.GRPCAddr(), "--stubs", stubs, "--spec", filepath.Join("..", "demo", "bead-tray-oil-quench.yaml"))
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("watch_job.py: %v\nstdout:\n%s\nstderr:\n%s", err, stdout.String(), stderr.String())
	}
	out := stdout.String()

	id := regexp.MustCompile(`submitted job (\S+) \(bead-tray-oil-quench\)`).FindStringSubmatch(out)
	if id == nil {
		t.Fatalf("no 'submitted job' line:\n%s", out)
	}
	// Every event once, numbered 1, 2, ... as the API promises.
	seqs := regexp.MustCompile(`(?m)^\[(\d+)\] `).FindAllStringSubmatch(out, -1)
	for i, m := range seqs {
		if n, _ := strconv.Atoi(m[1]); n != i+1 {
			t.Fatalf("event %d printed as [%s]:\n%s", i+1, m[1], out)
		}
	}
	for _, want := range []string{"] queued\n", "] started on ", "] t=", "] finished: end-time at 120 s\n"} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q:\n%s", want, out)
		}
	}

	// The milestone times it printed are the job's recorded ones.
	c, err := farmclient.Dial(ctx, farm.GRPCAddr())
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	job, err := c.Get(ctx, id[1])
	if err != nil {
		t.Fatal(err)
	}
	if job.GetState() != soakv1.JobState_JOB_STATE_FINISHED {
		t.Fatalf("job state %s after the script ended", job.GetState())
	}
	for _, m := range job.GetSummary().GetMilestones() {
		want := "milestone " + m.GetName() + " reached at " + strconv.FormatFloat(m.GetTimeS().GetValue(), 'f', 1, 64) + " s\n"
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q:\n%s", want, out)
		}
	}
}
