package cli

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"net"
	"net/http"
	"os"
	"os/signal"
	"syscall"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/promhttp"
	"github.com/spf13/pflag"
	"google.golang.org/grpc/credentials"

	"soakfarm/scheduler"
	"soakfarm/scheduler/access"
)

// serverTLS builds the API's TLS from a certificate and key, and, when
// clientCA is given, checks the client certificates clients choose to
// present against it. nil without a certificate.
func serverTLS(certFile, keyFile, clientCA string) (credentials.TransportCredentials, error) {
	if certFile == "" && keyFile == "" {
		if clientCA != "" {
			return nil, errors.New("--tls-client-ca needs --tls-cert and --tls-key")
		}
		return nil, nil
	}
	if certFile == "" || keyFile == "" {
		return nil, errors.New("--tls-cert and --tls-key: give both or neither")
	}
	cert, err := tls.LoadX509KeyPair(certFile, keyFile)
	if err != nil {
		return nil, fmt.Errorf("--tls-cert/--tls-key: %w", err)
	}
	cfg := &tls.Config{MinVersion: tls.VersionTLS12, Certificates: []tls.Certificate{cert}}
	if clientCA != "" {
		pool, err := certPool(clientCA)
		if err != nil {
			return nil, fmt.Errorf("--tls-client-ca: %w", err)
		}
		cfg.ClientCAs = pool
		cfg.ClientAuth = tls.VerifyClientCertIfGiven
	}
	return credentials.NewTLS(cfg), nil
}

// certPool reads PEM certificates from path.
func certPool(path string) (*x509.CertPool, error) {
	pem, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	pool := x509.NewCertPool()
	if !pool.AppendCertsFromPEM(pem) {
		return nil, fmt.Errorf("no PEM certificate in %s", path)
	}
	return pool, nil
}

// clientTLS is the TLS of a client command: the farm's CA (default the
// system's roots) and an optional client certificate. nil when no flag is
// given.
func clientTLS(caFile, certFile, keyFile string) (*tls.Config, error) {
	if caFile == "" && certFile == "" && keyFile == "" {
		return nil, nil
	}
	cfg := &tls.Config{MinVersion: tls.VersionTLS12}
	if caFile != "" {
		pool, err := certPool(caFile)
		if err != nil {
			return nil, fmt.Errorf("--tls-ca: %w", err)
		}
		cfg.RootCAs = pool
	}
	if certFile != "" || keyFile != "" {
		if certFile == "" || keyFile == "" {
			return nil, errors.New("--tls-cert and --tls-key: give both or neither")
		}
		cert, err := tls.LoadX509KeyPair(certFile, keyFile)
		if err != nil {
			return nil, fmt.Errorf("--tls-cert/--tls-key: %w", err)
		}
		cfg.Certificates = []tls.Certificate{cert}
	}
	return cfg, nil
}

// parseMessageBytes reads --max-message-bytes; "" is the default.
func parseMessageBytes(v string) (int, error) {
	if v == "" {
		return scheduler.DefaultMaxMessageBytes, nil
	}
	b, err := parseBytes(v)
	if err != nil {
		return 0, fmt.Errorf("--max-message-bytes: %w", err)
	}
	if b < 1<<20 || b > math.MaxInt32 {
		return 0, fmt.Errorf("--max-message-bytes: must be from 1MiB to 2GiB, got %s", v)
	}
	return int(b), nil
}

// limitFlags raise or lower what the farm accepts in a spec.
type limitFlags struct {
	maxCells, maxSteps int64
	maxMemory          string
	maxSTLBytes        string
	maxSTLTriangles    int
}

func (l *limitFlags) register(f *pflag.FlagSet) {
	d := scheduler.DefaultLimits()
	f.Int64Var(&l.maxCells, "max-cells", d.Spec.MaxCells, "most cells a job's grid may have")
	f.StringVar(&l.maxMemory, "max-memory", "", "largest grid memory estimate a job may have, e.g. 8GiB (default 4GiB)")
	f.Int64Var(&l.maxSteps, "max-steps", d.Spec.MaxSteps, "most time steps a job's end_s / max_step_s may imply")
	f.StringVar(&l.maxSTLBytes, "max-stl-bytes", "", "largest STL body a spec may carry, e.g. 200MiB (default 48MiB; --max-message-bytes must leave room)")
	f.IntVar(&l.maxSTLTriangles, "max-stl-triangles", d.MaxSTLTriangles, "most triangles an STL body may have")
}

func (l *limitFlags) limits() (scheduler.Limits, error) {
	lim := scheduler.DefaultLimits()
	if l.maxCells < 1 || l.maxSteps < 1 || l.maxSTLTriangles < 1 {
		return lim, fmt.Errorf("--max-cells, --max-steps and --max-stl-triangles must be at least 1, got %d, %d and %d", l.maxCells, l.maxSteps, l.maxSTLTriangles)
	}
	lim.Spec.MaxCells, lim.Spec.MaxSteps, lim.MaxSTLTriangles = l.maxCells, l.maxSteps, l.maxSTLTriangles
	for _, b := range []struct {
		flag, value string
		bytes       *int64
	}{{"--max-memory", l.maxMemory, &lim.Spec.MaxMemoryBytes}, {"--max-stl-bytes", l.maxSTLBytes, &lim.MaxSTLBytes}} {
		if b.value == "" {
			continue
		}
		v, err := parseBytes(b.value)
		if err != nil {
			return lim, fmt.Errorf("%s: %w", b.flag, err)
		}
		*b.bytes = v
	}
	return lim, nil
}

// newMetricsRegistry holds a process's series, with the Go runtime's and
// the process's own.
func newMetricsRegistry() *prometheus.Registry {
	reg := prometheus.NewRegistry()
	reg.MustRegister(collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	return reg
}

// serveMetrics serves reg at http://addr/metrics until the returned stop
// is called; with addr "" it does nothing.
func serveMetrics(addr string, reg *prometheus.Registry, log *slog.Logger) (stop func(), err error) {
	if addr == "" {
		return func() {}, nil
	}
	lis, err := net.Listen("tcp", addr)
	if err != nil {
		return nil, fmt.Errorf("--metrics-listen: %w", err)
	}
	mux := http.NewServeMux()
	mux.Handle("/metrics", promhttp.HandlerFor(reg, promhttp.HandlerOpts{Registry: reg}))
	srv := &http.Server{Handler: mux, ReadHeaderTimeout: 10 * time.Second}
	go func() {
		if err := srv.Serve(lis); err != nil && !errors.Is(err, http.ErrServerClosed) {
			log.Error("metrics server", "err", err)
		}
	}()
	log.Info("metrics serving", "addr", lis.Addr().String())
	return func() {
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		defer cancel()
		srv.Shutdown(ctx)
	}, nil
}

// reloadOnHangup rereads the token file on each SIGHUP until ctx ends. A
// file that fails to read leaves the clients read before in force.
func reloadOnHangup(ctx context.Context, tokens *access.TokenFile, log *slog.Logger) {
	if tokens == nil {
		return
	}
	hup := make(chan os.Signal, 1)
	signal.Notify(hup, syscall.SIGHUP)
	go func() {
		defer signal.Stop(hup)
		for {
			select {
			case <-ctx.Done():
				return
			case <-hup:
				if err := tokens.Reload(); err != nil {
					log.Error("token file not reread; the clients read before stay in force", "err", err)
					continue
				}
				log.Info("token file reread", "path", tokens.Path(), "clients", tokens.Len())
			}
		}
	}()
}
