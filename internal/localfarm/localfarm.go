// Package localfarm runs a whole farm in one process: an embedded NATS
// server with JetStream on a local folder, a scheduler serving the gRPC
// API, and optional local workers. `soak serve`, `soak demo` and tests use
// it; remote workers may join through the NATS listener.
package localfarm

import (
	"context"
	"crypto/rand"
	"encoding/base64"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"os"
	"path/filepath"
	"strconv"
	"sync"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/grpc/credentials"

	"soakfarm/scheduler"
	"soakfarm/scheduler/access"
	"soakfarm/scheduler/store"
	"soakfarm/worker"
)

// Config configures a local farm.
type Config struct {
	// DataDir holds the JetStream file store; the farm's state survives
	// a restart on the same folder.
	DataDir string
	// GRPCListen is the API's address; default "127.0.0.1:0".
	GRPCListen string
	// NATSListen is "" to keep NATS in-process, or "host:port" (port 0
	// picks one) to let remote workers connect.
	NATSListen string
	// NATSUser and NATSPassword, when set, are a NATS user with full
	// rights, for the farm itself and schedulers in other processes.
	NATSUser, NATSPassword string
	// NATSWorkerUser and NATSWorkerPassword, when set, are a NATS user
	// with only the rights a worker needs (store.WorkerPermissions), for
	// remote workers.
	NATSWorkerUser, NATSWorkerPassword string
	// Workers is the number of local workers (0 allowed).
	Workers int
	// WorkerConcurrency is the number of jobs per local worker; default 1.
	WorkerConcurrency int
	// Settings are the queue settings; zero means store.DefaultSettings.
	Settings store.Settings
	// Runner computes jobs in the local workers; nil runs the pipeline.
	Runner worker.Runner
	// Clients, TLS, MaxMessageBytes and Limits configure the gRPC API
	// (see scheduler.Config).
	Clients         access.Authenticator
	TLS             credentials.TransportCredentials
	MaxMessageBytes int
	Limits          scheduler.Limits
	// Metrics, when set, receives the scheduler's and the local workers'
	// series.
	Metrics prometheus.Registerer
	Logger  *slog.Logger
}

// Farm is a running local farm.
type Farm struct {
	nats      *server.Server
	nc        *nats.Conn
	scheduler *scheduler.Server
	listening bool

	stopWorkers context.CancelFunc
	workers     sync.WaitGroup
}

// Start brings the farm up. ctx bounds the start only.
func Start(ctx context.Context, cfg Config) (*Farm, error) {
	if cfg.Logger == nil {
		cfg.Logger = slog.Default()
	}
	if cfg.DataDir == "" {
		return nil, errors.New("localfarm: DataDir is required")
	}
	if cfg.GRPCListen == "" {
		cfg.GRPCListen = "127.0.0.1:0"
	}
	if cfg.NATSWorkerUser != "" && cfg.NATSUser == "" {
		// With any user configured every client must log in, the farm's
		// own connection too: it gets a full-rights user of its own whose
		// password never leaves this process.
		cfg.NATSUser, cfg.NATSPassword = internalUser, randomPassword()
	}
	ns, err := startNATS(cfg)
	if err != nil {
		return nil, err
	}
	f := &Farm{nats: ns, listening: cfg.NATSListen != ""}
	fail := func(err error) (*Farm, error) {
		if f.nc != nil {
			f.nc.Close()
		}
		ns.Shutdown()
		ns.WaitForShutdown()
		return nil, err
	}
	connOpts := []nats.Option{nats.InProcessServer(ns), nats.Name("soak-local-farm")}
	if cfg.NATSUser != "" {
		connOpts = append(connOpts, nats.UserInfo(cfg.NATSUser, cfg.NATSPassword))
	}
	if f.nc, err = nats.Connect("", connOpts...); err != nil {
		return fail(fmt.Errorf("localfarm: connect to embedded NATS: %w", err))
	}
	lis, err := net.Listen("tcp", cfg.GRPCListen)
	if err != nil {
		return fail(fmt.Errorf("localfarm: listen for gRPC: %w", err))
	}
	f.scheduler, err = scheduler.Start(ctx, f.nc, lis, scheduler.Config{
		Settings: cfg.Settings, Clients: cfg.Clients, TLS: cfg.TLS,
		MaxMessageBytes: cfg.MaxMessageBytes, Limits: cfg.Limits,
		Metrics: cfg.Metrics, Logger: cfg.Logger,
	})
	if err != nil {
		lis.Close()
		return fail(fmt.Errorf("localfarm: %w", err))
	}
	workerMetrics, err := worker.NewMetrics(cfg.Metrics)
	if err != nil {
		f.scheduler.Close(ctx)
		return fail(fmt.Errorf("localfarm: worker metrics: %w", err))
	}
	workCtx, stop := context.WithCancel(context.Background())
	f.stopWorkers = stop
	host, _ := os.Hostname()
	for i := range cfg.Workers {
		w := worker.New(f.nc, worker.Config{
			Name:        fmt.Sprintf("%s-local-%d", host, i+1),
			Concurrency: cfg.WorkerConcurrency,
			Runner:      cfg.Runner,
			Metrics:     workerMetrics,
			Logger:      cfg.Logger,
		})
		f.workers.Go(func() {
			if err := w.Run(workCtx); err != nil {
				cfg.Logger.Error("local worker stopped", "worker", w.Name(), "err", err)
			}
		})
	}
	return f, nil
}

// StartNATS runs the farm's NATS server alone, as Start does for a whole
// farm: JetStream on cfg.DataDir, listening on cfg.NATSListen ("" keeps it
// in-process), users from cfg.NATSUser and cfg.NATSPassword. `soak broker`
// uses it so NATS can stop and restart apart from the scheduler. The
// caller shuts the server down.
func StartNATS(cfg Config) (*server.Server, error) {
	if cfg.DataDir == "" {
		return nil, errors.New("localfarm: DataDir is required")
	}
	return startNATS(cfg)
}

func startNATS(cfg Config) (*server.Server, error) {
	opts := &server.Options{
		ServerName: "soak-local",
		JetStream:  true,
		StoreDir:   filepath.Join(cfg.DataDir, "jetstream"),
		// Flush every write: a single node has no replicas to recover a
		// write acknowledged but not yet on disk.
		SyncAlways: true,
		// The embedding process handles signals and shuts down in order.
		NoSigs: true,
		NoLog:  true,
		Users:  natsUsers(cfg),
	}
	if cfg.NATSListen == "" {
		opts.DontListen = true
	} else {
		host, port, err := net.SplitHostPort(cfg.NATSListen)
		if err != nil {
			return nil, fmt.Errorf("localfarm: NATS listen address %q: %w", cfg.NATSListen, err)
		}
		p, err := strconv.Atoi(port)
		if err != nil || p < 0 || p > 65535 {
			return nil, fmt.Errorf("localfarm: NATS listen address %q: bad port", cfg.NATSListen)
		}
		if p == 0 {
			p = server.RANDOM_PORT
		}
		opts.Host, opts.Port = host, p
	}
	if err := os.MkdirAll(opts.StoreDir, 0o750); err != nil {
		return nil, fmt.Errorf("localfarm: data folder: %w", err)
	}
	ns, err := server.NewServer(opts)
	if err != nil {
		return nil, fmt.Errorf("localfarm: NATS server: %w", err)
	}
	go ns.Start()
	if !ns.ReadyForConnections(10 * time.Second) {
		ns.Shutdown()
		return nil, errors.New("localfarm: NATS server not ready after 10 s")
	}
	return ns, nil
}

// GRPCAddr is the address the API listens on.
func (f *Farm) GRPCAddr() string { return f.scheduler.Addr().String() }

// NATSURL is the client URL of the embedded NATS server, "" when it only
// serves in-process clients.
func (f *Farm) NATSURL() string {
	if !f.listening {
		return ""
	}
	return f.nats.ClientURL()
}

// Conn is the farm's own in-process NATS connection.
func (f *Farm) Conn() *nats.Conn { return f.nc }

// Close shuts the farm down in order: local workers hand their jobs back
// to the queue, the API stops (calls get until ctx ends), then NATS.
func (f *Farm) Close(ctx context.Context) error {
	f.stopWorkers()
	stopped := make(chan struct{})
	go func() {
		f.workers.Wait()
		close(stopped)
	}()
	var errs []error
	select {
	case <-stopped:
	case <-ctx.Done():
		errs = append(errs, fmt.Errorf("localfarm: workers still busy: %w", ctx.Err()))
	}
	if err := f.scheduler.Close(ctx); err != nil {
		errs = append(errs, err)
	}
	f.nc.Close()
	f.nats.Shutdown()
	f.nats.WaitForShutdown()
	return errors.Join(errs...)
}

// internalUser names the full-rights NATS user a farm makes for itself
// when only a worker user is configured.
const internalUser = "soak-farm"

func randomPassword() string {
	b := make([]byte, 24)
	rand.Read(b) // never fails (crypto/rand documents it)
	return base64.RawURLEncoding.EncodeToString(b)
}

// natsUsers are the NATS server's users: none (no log-in) unless a user is
// configured; the worker user gets only store.WorkerPermissions.
func natsUsers(cfg Config) []*server.User {
	var users []*server.User
	if cfg.NATSUser != "" {
		users = append(users, &server.User{Username: cfg.NATSUser, Password: cfg.NATSPassword})
	}
	if cfg.NATSWorkerUser != "" {
		p := store.WorkerPermissions()
		users = append(users, &server.User{
			Username: cfg.NATSWorkerUser, Password: cfg.NATSWorkerPassword,
			Permissions: &server.Permissions{
				Publish:   &server.SubjectPermission{Allow: p.Publish},
				Subscribe: &server.SubjectPermission{Allow: p.Subscribe},
			},
		})
	}
	return users
}
