// Package scheduler is the farm's gRPC front: it accepts jobs, queues them
// for the workers, streams each job's events, takes cancel requests, lists
// jobs and serves result files. It keeps nothing in memory that matters:
// records, queue, events and files live in JetStream (package store), so a
// scheduler may restart, or several may serve the same farm. It is also
// the only writer of job records: workers ask it by lease calls (see
// leases.go).
package scheduler

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"sync"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/keepalive"
	"google.golang.org/grpc/reflection"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/access"
	"soakfarm/scheduler/store"
)

// Config configures a scheduler.
type Config struct {
	// Settings are the farm-wide queue settings the scheduler applies to
	// the streams; zero means store.DefaultSettings.
	Settings store.Settings
	// Clients, when set, authenticates every call except health checks by
	// its bearer token; nil makes every caller the implicit operator
	// client access.LocalName, for a farm reached on loopback only.
	Clients access.Authenticator
	// TLS, when set, serves over TLS.
	TLS credentials.TransportCredentials
	// MaxMessageBytes bounds each gRPC message either way; zero means
	// DefaultMaxMessageBytes.
	MaxMessageBytes int
	// Limits bound what a submitted spec may ask for; zero means
	// DefaultLimits.
	Limits Limits
	// Metrics, when set, receives the scheduler's Prometheus metrics.
	Metrics prometheus.Registerer
	Logger  *slog.Logger
}

// Server is a running scheduler.
type Server struct {
	grpc     *grpc.Server
	health   *health.Server
	listener net.Listener
	service  *service
	leases   *nats.Subscription
	desk     *leaseDesk
	// closing ends the watch streams so GracefulStop need not wait on them.
	closing context.CancelFunc
	served  chan error
	bg      sync.WaitGroup

	closeOnce sync.Once
	closeErr  error
}

// DefaultMaxMessageBytes bounds each gRPC message unless Config says
// otherwise: room for a spec carrying STL meshes up to DefaultLimits, well
// above gRPC's own 4 MiB default.
const DefaultMaxMessageBytes = 64 << 20

// Start sets up the farm's streams on nc, then serves the API on lis until
// Close. lis is owned by the server from then on. Health reports
// NOT_SERVING while nc is disconnected from NATS.
func Start(ctx context.Context, nc *nats.Conn, lis net.Listener, cfg Config) (*Server, error) {
	if cfg.Settings == (store.Settings{}) {
		cfg.Settings = store.DefaultSettings()
	}
	if cfg.Logger == nil {
		cfg.Logger = slog.Default()
	}
	if cfg.MaxMessageBytes <= 0 {
		cfg.MaxMessageBytes = DefaultMaxMessageBytes
	}
	if cfg.Limits == (Limits{}) {
		cfg.Limits = DefaultLimits()
	}
	st, err := store.Setup(ctx, nc, cfg.Settings)
	if err != nil {
		return nil, fmt.Errorf("scheduler: %w", err)
	}
	life, closing := context.WithCancel(context.Background())
	svc := &service{store: st, log: cfg.Logger, life: life, limits: cfg.Limits, metrics: newMetrics(), index: newJobIndex()}
	if cfg.Metrics != nil {
		if err := svc.metrics.register(cfg.Metrics, st, nc, svc.index); err != nil {
			closing()
			return nil, fmt.Errorf("scheduler: metrics: %w", err)
		}
	}
	guard := access.Guard{Auth: cfg.Clients}
	opts := []grpc.ServerOption{
		// Watches may sit idle for hours while a job waits in the queue:
		// the server pings quiet connections to find dead clients, and
		// lets clients ping every 10 s or more, streams or not.
		grpc.KeepaliveParams(keepalive.ServerParameters{Time: 30 * time.Second, Timeout: 10 * time.Second}),
		grpc.KeepaliveEnforcementPolicy(keepalive.EnforcementPolicy{MinTime: 10 * time.Second, PermitWithoutStream: true}),
		grpc.ChainUnaryInterceptor(guard.Unary), grpc.ChainStreamInterceptor(guard.Stream),
		grpc.MaxRecvMsgSize(cfg.MaxMessageBytes), grpc.MaxSendMsgSize(cfg.MaxMessageBytes),
	}
	if cfg.TLS != nil {
		opts = append(opts, grpc.Creds(cfg.TLS))
	}
	gs := grpc.NewServer(opts...)
	soakv1.RegisterFarmServiceServer(gs, svc)
	hs := health.NewServer()
	healthpb.RegisterHealthServer(gs, hs)
	reflection.Register(gs)

	desk := newLeaseDesk()
	leases, err := st.ServeLeases(func(op store.LeaseOp, req *soakv1.LeaseRequest, answer func(*soakv1.LeaseReply)) {
		desk.run(func() { svc.serveLease(op, req, answer) })
	}, cfg.Logger)
	if err != nil {
		closing()
		return nil, fmt.Errorf("scheduler: %w", err)
	}
	s := &Server{grpc: gs, health: hs, listener: lis, service: svc, leases: leases, desk: desk, closing: closing, served: make(chan error, 1)}
	statuses := nc.StatusChanged()
	s.setHealth(nc.IsConnected())
	s.bg.Go(func() { s.followNATS(life, nc, statuses) })
	s.bg.Go(func() { svc.handleDeadLetters(life) })
	s.bg.Go(func() { svc.index.follow(life, st, cfg.Logger) })
	s.bg.Go(func() {
		if _, err := svc.requeueStranded(life); err != nil && life.Err() == nil {
			cfg.Logger.Error("looking for stranded jobs", "err", err)
		}
	})
	go func() { s.served <- gs.Serve(lis) }()
	cfg.Logger.Info("scheduler serving", "addr", lis.Addr().String(), "max_message_bytes", cfg.MaxMessageBytes)
	return s, nil
}

// followNATS keeps health in step with the NATS connection until ctx
// ends: without NATS the scheduler can neither queue nor report jobs.
func (s *Server) followNATS(ctx context.Context, nc *nats.Conn, statuses chan nats.Status) {
	defer nc.RemoveStatusListener(statuses)
	for {
		select {
		case <-ctx.Done():
			return
		case st, ok := <-statuses:
			if !ok {
				return
			}
			s.setHealth(st == nats.CONNECTED)
			s.service.log.Info("NATS connection", "status", st.String())
		}
	}
}

func (s *Server) setHealth(connected bool) {
	status := healthpb.HealthCheckResponse_NOT_SERVING
	if connected {
		status = healthpb.HealthCheckResponse_SERVING
	}
	s.health.SetServingStatus("", status)
	s.health.SetServingStatus(soakv1.FarmService_ServiceDesc.ServiceName, status)
	s.service.metrics.natsConnected.Set(map[bool]float64{false: 0, true: 1}[connected])
}

// Addr is the address the API listens on.
func (s *Server) Addr() net.Addr { return s.listener.Addr() }

// Close stops the server: health turns NOT_SERVING, open watches end with
// UNAVAILABLE (clients resume elsewhere or later), and calls in flight get
// until ctx ends to finish before the server stops hard. Later calls
// return the first call's result.
func (s *Server) Close(ctx context.Context) error {
	s.closeOnce.Do(func() { s.closeErr = s.close(ctx) })
	return s.closeErr
}

func (s *Server) close(ctx context.Context) error {
	s.health.Shutdown()
	s.closing()
	if err := s.leases.Unsubscribe(); err != nil {
		s.service.log.Warn("stop serving lease calls", "err", err)
	}
	s.desk.close()
	stopped := make(chan struct{})
	go func() {
		s.grpc.GracefulStop()
		close(stopped)
	}()
	select {
	case <-stopped:
	case <-ctx.Done():
		s.grpc.Stop()
		<-stopped
	}
	s.bg.Wait()
	if err := <-s.served; err != nil && !errors.Is(err, grpc.ErrServerStopped) {
		return fmt.Errorf("scheduler: %w", err)
	}
	return nil
}
