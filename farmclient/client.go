// Package farmclient is the Go client of the soak farm's gRPC API, for
// scripts and for the soak command line. It owns the connection set-up
// (plaintext on loopback, TLS elsewhere, optional bearer token), watching a
// job's events with automatic resume after a dropped stream, and
// downloading a finished job's result files with size and SHA-256 checks.
//
// A typical script submits a spec, follows its progress and fetches the
// files:
//
//	c, err := farmclient.Dial(ctx, "127.0.0.1:7431")
//	job, _, err := c.Submit(ctx, spec, "batch-7/shaft")
//	err = c.Watch(ctx, job.GetId(), 0, func(ev *soakv1.JobEvent) error {
//		fmt.Println(ev.GetSequence(), ev.GetProgress().GetSimTimeS())
//		return nil
//	})
//	files, err := c.Fetch(ctx, job.GetId(), "results/shaft")
package farmclient

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"net"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/connectivity"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"

	soakv1 "soakfarm/proto/soak/v1"
)

// Client talks to one farm scheduler. It is safe for concurrent use.
type Client struct {
	conn            *grpc.ClientConn
	api             soakv1.FarmServiceClient
	retry           RetryPolicy
	maxMessageBytes int
}

// DefaultMaxMessageBytes bounds each gRPC message either way unless
// WithMaxMessageBytes says otherwise; it matches the scheduler's default.
const DefaultMaxMessageBytes = 64 << 20

// RetryPolicy bounds how Watch resumes after a dropped stream: it waits
// FirstDelay, doubling up to MaxDelay, and gives up after MaxAttempts
// consecutive failed attempts. Receiving an event resets the count.
type RetryPolicy struct {
	MaxAttempts int
	FirstDelay  time.Duration
	MaxDelay    time.Duration
}

// DefaultRetryPolicy rides out a scheduler restart of a few tens of seconds.
func DefaultRetryPolicy() RetryPolicy {
	return RetryPolicy{MaxAttempts: 10, FirstDelay: 200 * time.Millisecond, MaxDelay: 8 * time.Second}
}

type config struct {
	tls         *tls.Config
	plaintext   bool
	token       string
	retry       RetryPolicy
	maxMessage  int
	dialOptions []grpc.DialOption
}

// Option changes how Dial connects.
type Option func(*config)

// WithTLS connects over TLS with the given configuration.
func WithTLS(c *tls.Config) Option {
	return func(cfg *config) { cfg.tls = c }
}

// WithPlaintext allows an unencrypted connection to a farm that is not on
// the loopback interface (a trusted private network).
func WithPlaintext() Option {
	return func(cfg *config) { cfg.plaintext = true }
}

// WithBearerToken sends "authorization: Bearer TOKEN" with every call. The
// token is only sent over TLS or on loopback.
func WithBearerToken(token string) Option {
	return func(cfg *config) { cfg.token = token }
}

// WithMaxMessageBytes replaces DefaultMaxMessageBytes; a farm whose
// scheduler accepts larger messages (its --max-message-bytes) needs the
// same here to submit larger specs.
func WithMaxMessageBytes(n int) Option {
	return func(cfg *config) { cfg.maxMessage = n }
}

// WithRetryPolicy replaces DefaultRetryPolicy for Watch.
func WithRetryPolicy(p RetryPolicy) Option {
	return func(cfg *config) { cfg.retry = p }
}

// WithDialOptions passes extra options to grpc.NewClient (keepalive,
// interceptors, ...).
func WithDialOptions(opts ...grpc.DialOption) Option {
	return func(cfg *config) { cfg.dialOptions = append(cfg.dialOptions, opts...) }
}

// Dial connects to the farm scheduler at addr (host:port) and waits for the
// first connection attempt to succeed, so an address where nothing listens
// is reported at once. Without WithTLS, a loopback address is reached in
// plaintext and any other address over TLS with the system's roots, unless
// WithPlaintext is given.
func Dial(ctx context.Context, addr string, opts ...Option) (*Client, error) {
	cfg := config{retry: DefaultRetryPolicy(), maxMessage: DefaultMaxMessageBytes}
	for _, o := range opts {
		o(&cfg)
	}
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return nil, fmt.Errorf("farm address %q: want host:port: %w", addr, err)
	}
	dialOpts := append([]grpc.DialOption{
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(cfg.maxMessage), grpc.MaxCallSendMsgSize(cfg.maxMessage)),
	}, cfg.dialOptions...)
	secure := true
	switch {
	case cfg.tls != nil:
		dialOpts = append(dialOpts, grpc.WithTransportCredentials(credentials.NewTLS(cfg.tls)))
	case cfg.plaintext || isLoopback(host):
		dialOpts = append(dialOpts, grpc.WithTransportCredentials(insecure.NewCredentials()))
		secure = false
	default:
		dialOpts = append(dialOpts, grpc.WithTransportCredentials(credentials.NewTLS(&tls.Config{MinVersion: tls.VersionTLS12})))
	}
	if cfg.token != "" {
		dialOpts = append(dialOpts, grpc.WithPerRPCCredentials(bearerToken{
			token: cfg.token,
			// Plaintext on loopback never leaves the machine; plaintext
			// elsewhere would expose the token, so grpc refuses to send it.
			requireTLS: !secure && !isLoopback(host),
		}))
	}
	conn, err := grpc.NewClient(addr, dialOpts...)
	if err != nil {
		return nil, fmt.Errorf("farm at %s: %w", addr, err)
	}
	if err := awaitFirstAttempt(ctx, conn); err != nil {
		conn.Close()
		return nil, fmt.Errorf("farm at %s: %w", addr, err)
	}
	return &Client{conn: conn, api: soakv1.NewFarmServiceClient(conn), retry: cfg.retry, maxMessageBytes: cfg.maxMessage}, nil
}

// ErrUnreachable reports that the first connection attempt failed.
var ErrUnreachable = errors.New("not reachable")

// awaitFirstAttempt starts connecting and returns once the connection is
// ready, or with ErrUnreachable once the first attempt has failed.
func awaitFirstAttempt(ctx context.Context, conn *grpc.ClientConn) error {
	conn.Connect()
	for {
		s := conn.GetState()
		switch s {
		case connectivity.Ready:
			return nil
		case connectivity.TransientFailure, connectivity.Shutdown:
			return ErrUnreachable
		}
		if !conn.WaitForStateChange(ctx, s) {
			return fmt.Errorf("connecting: %w", ctx.Err())
		}
	}
}

func isLoopback(host string) bool {
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}

// bearerToken implements credentials.PerRPCCredentials.
type bearerToken struct {
	token      string
	requireTLS bool
}

func (b bearerToken) GetRequestMetadata(context.Context, ...string) (map[string]string, error) {
	return map[string]string{"authorization": "Bearer " + b.token}, nil
}

func (b bearerToken) RequireTransportSecurity() bool { return b.requireTLS }

// Close ends the connection.
func (c *Client) Close() error { return c.conn.Close() }
