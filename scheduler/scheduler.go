// Package scheduler is the farm's gRPC front: it accepts jobs, queues them
// for the workers, streams each job's events, takes cancel requests, lists
// jobs and serves result files. It keeps nothing in memory that matters:
// records, queue, events and files live in JetStream (package store), so a
// scheduler may restart, or several may serve the same farm.
package scheduler

import (
	"context"
	"crypto/subtle"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"strings"
	"sync"
	"time"

	"github.com/nats-io/nats.go"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/keepalive"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/reflection"
	"google.golang.org/grpc/status"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

// Config configures a scheduler.
type Config struct {
	// Settings are the farm-wide queue settings the scheduler applies to
	// the streams; zero means store.DefaultSettings.
	Settings store.Settings
	// Token, when set, is required as "authorization: Bearer TOKEN" on
	// every call except health checks.
	Token string
	// TLS, when set, serves over TLS.
	TLS    credentials.TransportCredentials
	Logger *slog.Logger
}

// Server is a running scheduler.
type Server struct {
	grpc     *grpc.Server
	health   *health.Server
	listener net.Listener
	service  *service
	// closing ends the watch streams so GracefulStop need not wait on them.
	closing context.CancelFunc
	served  chan error
	bg      sync.WaitGroup

	closeOnce sync.Once
	closeErr  error
}

// Start sets up the farm's streams on nc, then serves the API on lis until
// Close. lis is owned by the server from then on.
func Start(ctx context.Context, nc *nats.Conn, lis net.Listener, cfg Config) (*Server, error) {
	if cfg.Settings == (store.Settings{}) {
		cfg.Settings = store.DefaultSettings()
	}
	if cfg.Logger == nil {
		cfg.Logger = slog.Default()
	}
	st, err := store.Setup(ctx, nc, cfg.Settings)
	if err != nil {
		return nil, fmt.Errorf("scheduler: %w", err)
	}
	life, closing := context.WithCancel(context.Background())
	svc := &service{store: st, log: cfg.Logger, life: life}
	opts := []grpc.ServerOption{
		// Watches may sit idle for hours while a job waits in the queue:
		// the server pings quiet connections to find dead clients, and
		// lets clients ping every 10 s or more, streams or not.
		grpc.KeepaliveParams(keepalive.ServerParameters{Time: 30 * time.Second, Timeout: 10 * time.Second}),
		grpc.KeepaliveEnforcementPolicy(keepalive.EnforcementPolicy{MinTime: 10 * time.Second, PermitWithoutStream: true}),
	}
	if cfg.TLS != nil {
		opts = append(opts, grpc.Creds(cfg.TLS))
	}
	if cfg.Token != "" {
		auth := tokenAuth(cfg.Token)
		opts = append(opts, grpc.ChainUnaryInterceptor(auth.unary), grpc.ChainStreamInterceptor(auth.stream))
	}
	gs := grpc.NewServer(opts...)
	soakv1.RegisterFarmServiceServer(gs, svc)
	hs := health.NewServer()
	healthpb.RegisterHealthServer(gs, hs)
	reflection.Register(gs)
	hs.SetServingStatus("", healthpb.HealthCheckResponse_SERVING)
	hs.SetServingStatus(soakv1.FarmService_ServiceDesc.ServiceName, healthpb.HealthCheckResponse_SERVING)

	s := &Server{grpc: gs, health: hs, listener: lis, service: svc, closing: closing, served: make(chan error, 1)}
	s.bg.Go(func() { svc.handleDeadLetters(life) })
	go func() { s.served <- gs.Serve(lis) }()
	cfg.Logger.Info("scheduler serving", "addr", lis.Addr().String())
	return s, nil
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

// tokenAuth checks the bearer token of each call.
type tokenAuth string

func (t tokenAuth) check(ctx context.Context, method string) error {
	if strings.HasPrefix(method, "/grpc.health.v1.Health/") {
		return nil
	}
	md, _ := metadata.FromIncomingContext(ctx)
	for _, v := range md.Get("authorization") {
		if token, ok := strings.CutPrefix(v, "Bearer "); ok && subtle.ConstantTimeCompare([]byte(token), []byte(t)) == 1 {
			return nil
		}
	}
	return status.Error(codes.Unauthenticated, "missing or wrong bearer token")
}

func (t tokenAuth) unary(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	if err := t.check(ctx, info.FullMethod); err != nil {
		return nil, err
	}
	return handler(ctx, req)
}

func (t tokenAuth) stream(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
	if err := t.check(ss.Context(), info.FullMethod); err != nil {
		return err
	}
	return handler(srv, ss)
}
