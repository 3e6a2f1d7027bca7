package scheduler_test

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"os"
	"path/filepath"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/protobuf/proto"

	"soakfarm/pipeline"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler"
	"soakfarm/scheduler/store"
	"soakfarm/worker"
)

// testSettings keep redelivery quick: a lost worker's job comes back
// after a second.
func testSettings() store.Settings {
	s := store.DefaultSettings()
	s.AckWait = time.Second
	return s
}

// testLogger keeps the farm's logs in the test output, shown on failure.
func testLogger(t *testing.T) *slog.Logger {
	return slog.New(slog.NewTextHandler(tWriter{t}, &slog.HandlerOptions{Level: slog.LevelDebug}))
}

type tWriter struct{ t *testing.T }

func (w tWriter) Write(p []byte) (int, error) {
	w.t.Helper()
	w.t.Log(string(p[:len(p)-1]))
	return len(p), nil
}

// startNATS runs an embedded JetStream server for one test.
func startNATS(t *testing.T) *server.Server {
	t.Helper()
	ns, err := server.NewServer(&server.Options{
		JetStream: true, StoreDir: t.TempDir(), DontListen: true, NoSigs: true, NoLog: true,
	})
	if err != nil {
		t.Fatal(err)
	}
	go ns.Start()
	if !ns.ReadyForConnections(10 * time.Second) {
		t.Fatal("NATS not ready")
	}
	t.Cleanup(func() {
		ns.Shutdown()
		ns.WaitForShutdown()
	})
	return ns
}

func connect(t *testing.T, ns *server.Server) *nats.Conn {
	t.Helper()
	nc, err := nats.Connect("", nats.InProcessServer(ns))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	return nc
}

// startScheduler serves the API on a loopback port and returns a client.
func startScheduler(t *testing.T, nc *nats.Conn, settings store.Settings) (*scheduler.Server, soakv1.FarmServiceClient) {
	t.Helper()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv, err := scheduler.Start(t.Context(), nc, lis, scheduler.Config{Settings: settings, Logger: testLogger(t)})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		srv.Close(ctx)
	})
	return srv, dial(t, srv.Addr().String())
}

func dial(t *testing.T, addr string) soakv1.FarmServiceClient {
	t.Helper()
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return soakv1.NewFarmServiceClient(conn)
}

// startWorker runs a worker until the returned stop is called (or the
// test ends).
func startWorker(t *testing.T, nc *nats.Conn, cfg worker.Config) (stop func()) {
	t.Helper()
	if cfg.Logger == nil {
		cfg.Logger = testLogger(t)
	}
	cfg.WorkDir = t.TempDir()
	cfg.RetryDelay = 50 * time.Millisecond
	w := worker.New(nc, cfg)
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan struct{})
	go func() {
		defer close(done)
		if err := w.Run(ctx); err != nil {
			t.Errorf("worker %s: %v", cfg.Name, err)
		}
	}()
	var once sync.Once
	stop = func() {
		once.Do(func() {
			cancel()
			<-done
		})
	}
	t.Cleanup(stop)
	return stop
}

// sphereSpec is a small valid job: a 50 mm steel ball put into a 600 °C
// furnace.
func sphereSpec(name string) *soakv1.JobSpec {
	return &soakv1.JobSpec{
		Name:        name,
		Part:        &soakv1.Part{Shape: &soakv1.Part_Sphere{Sphere: &soakv1.Sphere{DiameterM: 0.05}}},
		CellsAcross: proto.Uint32(12),
		Material: &soakv1.Material{
			DensityKgM3: 7850, ConductivityWMk: proto.Float64(45), SpecificHeatJKgk: proto.Float64(480),
		},
		InitialC: proto.Float64(20),
		Exposure: []*soakv1.Exposure{{Surfaces: "all", HWM2K: 60, FluidC: proto.Float64(600)}},
		EndS:     300,
		Probes:   []*soakv1.Probe{{Name: "centre", AtM: []float64{0, 0, 0}}},
	}
}

// resultFiles are what quickRunner writes.
var resultFiles = map[string]string{
	"summary.json": `{"name":"quick"}`,
	"probes.csv":   "time_s,centre_c\n0,20\n300,412\n",
}

// quickRunner stands in for the pipeline where the solve is not the
// point: it reports progress and a milestone and writes resultFiles.
func quickRunner(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
	for i := 1; i <= 3; i++ {
		if opt.Progress != nil {
			opt.Progress(&soakv1.JobProgress{SimTimeS: float64(i) * 100, EndS: 300, Step: uint32(i)})
		}
		time.Sleep(5 * time.Millisecond)
	}
	if opt.Milestone != nil {
		opt.Milestone(&soakv1.MilestoneReached{Name: "centre-hot", TimeS: 250})
	}
	for name, content := range resultFiles {
		if err := os.WriteFile(filepath.Join(outDir, name), []byte(content), 0o644); err != nil {
			return nil, err
		}
	}
	return &soakv1.Summary{Name: spec.GetName(), EndTimeS: spec.GetEndS()}, ctx.Err()
}

// submit queues spec and fails the test on error.
func submit(t *testing.T, client soakv1.FarmServiceClient, spec *soakv1.JobSpec, key string) *soakv1.Job {
	t.Helper()
	resp, err := client.SubmitJob(t.Context(), &soakv1.SubmitJobRequest{Spec: spec, ClientKey: key})
	if err != nil {
		t.Fatalf("submit: %v", err)
	}
	return resp.GetJob()
}

// watchAll follows a job from after to its final event.
func watchAll(ctx context.Context, client soakv1.FarmServiceClient, id string, after uint64) ([]*soakv1.JobEvent, error) {
	ctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	stream, err := client.WatchJob(ctx, &soakv1.WatchJobRequest{JobId: id, AfterSequence: after})
	if err != nil {
		return nil, err
	}
	var events []*soakv1.JobEvent
	for {
		resp, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return events, nil
		}
		if err != nil {
			return events, err
		}
		events = append(events, resp.GetEvent())
	}
}

// checkSequence fails unless events are numbered from first on without
// gaps or repeats.
func checkSequence(t *testing.T, events []*soakv1.JobEvent, first uint64) {
	t.Helper()
	for i, ev := range events {
		if want := first + uint64(i); ev.GetSequence() != want {
			t.Fatalf("event %d has sequence %d, want %d (events %v)", i, ev.GetSequence(), want, kinds(events))
		}
	}
}

// kinds names the events, for messages.
func kinds(events []*soakv1.JobEvent) []string {
	out := make([]string, len(events))
	for i, ev := range events {
		out[i] = fmt.Sprintf("%d:%T", ev.GetSequence(), ev.GetKind())
	}
	return out
}

// waitFor polls cond until it holds or 20 s pass.
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(20 * time.Second)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

func getJob(t *testing.T, client soakv1.FarmServiceClient, id string) *soakv1.Job {
	t.Helper()
	resp, err := client.GetJob(t.Context(), &soakv1.GetJobRequest{JobId: id})
	if err != nil {
		t.Fatalf("get job: %v", err)
	}
	return resp.GetJob()
}
