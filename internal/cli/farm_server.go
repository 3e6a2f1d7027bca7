package cli

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"os"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/spf13/cobra"
	"github.com/spf13/pflag"
	"google.golang.org/grpc/credentials"

	"soakfarm/internal/localfarm"
	"soakfarm/scheduler"
	"soakfarm/scheduler/access"
	"soakfarm/scheduler/store"
	"soakfarm/worker"
)

// natsPasswordEnv holds the NATS password when --nats-password is not
// given, keeping it off the command line.
const natsPasswordEnv = "SOAK_NATS_PASSWORD"

// natsWorkerPasswordEnv holds the password of `soak serve`'s worker user
// when --nats-worker-password is not given.
const natsWorkerPasswordEnv = "SOAK_NATS_WORKER_PASSWORD"

// shutdownGrace is how long the farm's processes give calls in flight and
// jobs being handed back when they are told to stop.
const shutdownGrace = 20 * time.Second

// queueFlags set the farm-wide queue settings a scheduler applies.
type queueFlags struct {
	ackWait     time.Duration
	maxAttempts int
}

func (q *queueFlags) register(f *pflag.FlagSet) {
	d := store.DefaultSettings()
	f.DurationVar(&q.ackWait, "ack-wait", d.AckWait, "time a worker may go silent before its job goes to another worker")
	f.IntVar(&q.maxAttempts, "max-attempts", d.MaxDeliver, "times a job is handed to a worker before it fails")
}

func (q *queueFlags) settings() (store.Settings, error) {
	s := store.DefaultSettings()
	if q.ackWait < time.Second {
		return s, fmt.Errorf("--ack-wait: must be at least 1s, got %s", q.ackWait)
	}
	if q.maxAttempts < 1 {
		return s, fmt.Errorf("--max-attempts: must be at least 1, got %d", q.maxAttempts)
	}
	s.AckWait, s.MaxDeliver = q.ackWait, q.maxAttempts
	return s, nil
}

// apiFlags configure and secure the gRPC API.
type apiFlags struct {
	listen                       string
	tlsCert, tlsKey, tlsClientCA string
	tokensPath                   string
	maxMessage                   string
	limits                       limitFlags
	metricsListen                string

	// Set by load.
	tokens           *access.TokenFile
	maxMessageBytes  int
	beyondLoopbackOK bool
}

func (a *apiFlags) register(f *pflag.FlagSet) {
	f.StringVar(&a.listen, "listen", defaultFarmAddr, "address of the gRPC API, host:port")
	f.StringVar(&a.tlsCert, "tls-cert", "", "serve the API over TLS with this certificate (PEM)")
	f.StringVar(&a.tlsKey, "tls-key", "", "private key of --tls-cert (PEM)")
	f.StringVar(&a.tlsClientCA, "tls-client-ca", "", "also check client certificates that clients present against this CA (PEM); clients without one still connect")
	f.StringVar(&a.tokensPath, "tokens", "", "token file naming the clients and their token hashes (see `soak token new`); reread on SIGHUP.\nWithout it every caller is the operator client \"local\", allowed on loopback only")
	f.StringVar(&a.maxMessage, "max-message-bytes", "", "largest gRPC message either way, e.g. 128MiB (default 64MiB)")
	f.StringVar(&a.metricsListen, "metrics-listen", "", "serve Prometheus metrics at http://ADDR/metrics, e.g. 127.0.0.1:9431 (default: off)")
	a.limits.register(f)
}

// load reads the token file and the TLS files. Beyond loopback the API
// needs both a token file and TLS, unless allowPlain (the scheduler in a
// container, whose port is published on the host's loopback).
func (a *apiFlags) load(allowPlain bool) (credentials.TransportCredentials, error) {
	creds, err := serverTLS(a.tlsCert, a.tlsKey, a.tlsClientCA)
	if err != nil {
		return nil, err
	}
	if a.tokensPath != "" {
		if a.tokens, err = access.LoadTokenFile(a.tokensPath); err != nil {
			return nil, fmt.Errorf("--tokens: %w", err)
		}
	}
	if a.maxMessageBytes, err = parseMessageBytes(a.maxMessage); err != nil {
		return nil, err
	}
	loopback, err := isLoopbackAddr(a.listen)
	if err != nil {
		return nil, fmt.Errorf("--listen: %w", err)
	}
	a.beyondLoopbackOK = loopback || (a.tokens != nil && creds != nil)
	if !a.beyondLoopbackOK && !allowPlain {
		return nil, fmt.Errorf("--listen %s is reachable from other machines; that needs a token file (--tokens) and TLS (--tls-cert/--tls-key)", a.listen)
	}
	return creds, nil
}

// clients is what the scheduler authenticates with: nil (the implicit
// local operator) without a token file.
func (a *apiFlags) clients() access.Authenticator {
	if a.tokens == nil {
		return nil
	}
	return a.tokens
}

// announce says on out who may call the API.
func (a *apiFlags) announce(out io.Writer) {
	if loopback, _ := isLoopbackAddr(a.listen); loopback {
		fmt.Fprintln(out, "serving loopback only: other machines cannot reach this farm's API")
	}
	if a.tokens == nil {
		fmt.Fprintln(out, `no token file: every caller is the operator client "local"`)
	} else {
		fmt.Fprintf(out, "%d client(s) from %s; send SIGHUP to reread it\n", a.tokens.Len(), a.tokens.Path())
	}
}

// isLoopbackAddr reports whether host:port only listens on this machine.
func isLoopbackAddr(addr string) (bool, error) {
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return false, fmt.Errorf("want host:port, got %q", addr)
	}
	if host == "localhost" {
		return true, nil
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback(), nil
}

// natsFlags are how a process reaches the farm's NATS server.
type natsFlags struct {
	url                    string
	user, password, creds  string
	tlsCA, tlsCert, tlsKey string
}

func (n *natsFlags) register(f *pflag.FlagSet) {
	f.StringVar(&n.url, "nats", nats.DefaultURL, "NATS server URL(s) of the farm, comma-separated")
	f.StringVar(&n.user, "nats-user", "", "NATS user name")
	f.StringVar(&n.password, "nats-password", "", "NATS password (default $"+natsPasswordEnv+")")
	f.StringVar(&n.creds, "nats-creds", "", "NATS credentials file (user JWT and seed)")
	f.StringVar(&n.tlsCA, "nats-tls-ca", "", "CA certificate (PEM) to verify the NATS server with")
	f.StringVar(&n.tlsCert, "nats-tls-cert", "", "client certificate (PEM) for NATS")
	f.StringVar(&n.tlsKey, "nats-tls-key", "", "private key of --nats-tls-cert (PEM)")
}

func (n *natsFlags) connect(name string, log *slog.Logger, extra ...nats.Option) (*nats.Conn, error) {
	opts := []nats.Option{
		nats.Name(name),
		// A long-lived farm process rides out NATS restarts.
		nats.MaxReconnects(-1),
		nats.ReconnectWait(time.Second),
		nats.DisconnectErrHandler(func(_ *nats.Conn, err error) {
			log.Warn("NATS disconnected", "err", err)
		}),
		nats.ReconnectHandler(func(c *nats.Conn) { log.Info("NATS reconnected", "url", c.ConnectedUrl()) }),
	}
	password := n.password
	if password == "" {
		password = os.Getenv(natsPasswordEnv)
	}
	if n.user != "" {
		opts = append(opts, nats.UserInfo(n.user, password))
	}
	if n.creds != "" {
		opts = append(opts, nats.UserCredentials(n.creds))
	}
	if n.tlsCA != "" || n.tlsCert != "" || n.tlsKey != "" {
		cfg, err := n.tlsConfig()
		if err != nil {
			return nil, err
		}
		opts = append(opts, nats.Secure(cfg))
	}
	nc, err := nats.Connect(n.url, append(opts, extra...)...)
	if err != nil {
		return nil, fmt.Errorf("connect to NATS at %s: %w", n.url, err)
	}
	return nc, nil
}

func (n *natsFlags) tlsConfig() (*tls.Config, error) {
	cfg := &tls.Config{MinVersion: tls.VersionTLS12}
	if n.tlsCA != "" {
		pool, err := certPool(n.tlsCA)
		if err != nil {
			return nil, fmt.Errorf("--nats-tls-ca: %w", err)
		}
		cfg.RootCAs = pool
	}
	if n.tlsCert != "" || n.tlsKey != "" {
		if n.tlsCert == "" || n.tlsKey == "" {
			return nil, errors.New("--nats-tls-cert and --nats-tls-key: give both or neither")
		}
		cert, err := tls.LoadX509KeyPair(n.tlsCert, n.tlsKey)
		if err != nil {
			return nil, fmt.Errorf("--nats-tls-cert/--nats-tls-key: %w", err)
		}
		cfg.Certificates = []tls.Certificate{cert}
	}
	return cfg, nil
}

func serverLogger(s streams) *slog.Logger {
	return slog.New(slog.NewTextHandler(s.err, &slog.HandlerOptions{Level: slog.LevelInfo}))
}

// closeWithGrace runs close with shutdownGrace to finish.
func closeWithGrace(close func(context.Context) error) error {
	ctx, cancel := context.WithTimeout(context.Background(), shutdownGrace)
	defer cancel()
	return close(ctx)
}

func newServeCmd(s streams) *cobra.Command {
	var (
		dataDir      string
		natsListen   string
		natsUser     string
		natsPassword string
		// The restricted user remote workers log in with.
		natsWorkerUser, natsWorkerPassword string
		workers                            int
		concurrency                        int
		api                                apiFlags
		queue                              queueFlags
	)
	cmd := &cobra.Command{
		Use:   "serve",
		Short: "Run a whole farm in this process: NATS, the scheduler's API and local workers",
		Long: "Runs an embedded NATS server with JetStream (state kept under --data), the farm's gRPC API on\n" +
			"--listen and --workers local workers. Remote workers join through --nats-listen.\n" +
			"Stops on interrupt, handing running jobs back to the queue.",
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			log := serverLogger(s)
			creds, err := api.load(false)
			if err != nil {
				return withCode(ExitUsage, err)
			}
			settings, err := queue.settings()
			if err != nil {
				return withCode(ExitUsage, err)
			}
			if workers < 0 || concurrency < 1 {
				return withCode(ExitUsage, fmt.Errorf("--workers must be ≥ 0 and --concurrency ≥ 1, got %d and %d", workers, concurrency))
			}
			if natsPassword == "" {
				natsPassword = os.Getenv(natsPasswordEnv)
			}
			if natsWorkerPassword == "" {
				natsWorkerPassword = os.Getenv(natsWorkerPasswordEnv)
			}
			if (natsWorkerUser == "") != (natsWorkerPassword == "") {
				return withCode(ExitUsage, fmt.Errorf("--nats-worker-user and --nats-worker-password (or $%s): give both or neither", natsWorkerPasswordEnv))
			}
			if natsListen != "" {
				loopback, err := isLoopbackAddr(natsListen)
				if err != nil {
					return withCode(ExitUsage, fmt.Errorf("--nats-listen: %w", err))
				}
				full := natsUser != "" && natsPassword != ""
				if !loopback && !full && natsWorkerUser == "" {
					return withCode(ExitUsage, fmt.Errorf("--nats-listen %s is reachable from other machines; that needs --nats-worker-user and --nats-worker-password (or $%s), or --nats-user and --nats-password (or $%s)", natsListen, natsWorkerPasswordEnv, natsPasswordEnv))
				}
				if natsUser != "" && natsPassword == "" {
					return withCode(ExitUsage, fmt.Errorf("--nats-user %s needs --nats-password (or $%s)", natsUser, natsPasswordEnv))
				}
			}
			limits, err := api.limits.limits()
			if err != nil {
				return withCode(ExitUsage, err)
			}
			reg := newMetricsRegistry()
			stopMetrics, err := serveMetrics(api.metricsListen, reg, log)
			if err != nil {
				return withCode(ExitUsage, err)
			}
			defer stopMetrics()
			farm, err := localfarm.Start(cmd.Context(), localfarm.Config{
				DataDir: dataDir, GRPCListen: api.listen, NATSListen: natsListen,
				NATSUser: natsUser, NATSPassword: natsPassword,
				NATSWorkerUser: natsWorkerUser, NATSWorkerPassword: natsWorkerPassword,
				Workers: workers, WorkerConcurrency: concurrency, Settings: settings,
				Clients: api.clients(), TLS: creds, MaxMessageBytes: api.maxMessageBytes, Limits: limits,
				Metrics: reg, Logger: log,
			})
			if err != nil {
				return withCode(ExitFailure, err)
			}
			fmt.Fprintf(s.out, "farm API on %s\n", farm.GRPCAddr())
			if url := farm.NATSURL(); url != "" {
				fmt.Fprintf(s.out, "NATS for remote workers on %s\n", url)
			}
			api.announce(s.out)
			if api.metricsListen != "" {
				fmt.Fprintf(s.out, "metrics on http://%s/metrics\n", api.metricsListen)
			}
			fmt.Fprintf(s.out, "farm state in %s; %d local worker(s); interrupt to stop\n", dataDir, workers)
			reloadOnHangup(cmd.Context(), api.tokens, log)
			<-cmd.Context().Done()
			log.Info("stopping the farm")
			if err := closeWithGrace(farm.Close); err != nil {
				return withCode(ExitFailure, err)
			}
			return nil
		},
	}
	f := cmd.Flags()
	f.StringVar(&dataDir, "data", "soak-data", "folder of the farm's state (jobs, events, result files)")
	api.register(f)
	f.StringVar(&natsListen, "nats-listen", "", "also let remote workers reach NATS at host:port (default: in-process only)")
	f.StringVar(&natsUser, "nats-user", "", "NATS user with full rights, for schedulers in other processes")
	f.StringVar(&natsPassword, "nats-password", "", "password of --nats-user (default $"+natsPasswordEnv+")")
	f.StringVar(&natsWorkerUser, "nats-worker-user", "", "NATS user for remote workers, with only the rights a worker needs")
	f.StringVar(&natsWorkerPassword, "nats-worker-password", "", "password of --nats-worker-user (default $"+natsWorkerPasswordEnv+")")
	f.IntVar(&workers, "workers", 1, "local workers")
	f.IntVar(&concurrency, "concurrency", 1, "jobs each local worker runs at once")
	queue.register(f)
	return cmd
}

func newSchedulerCmd(s streams) *cobra.Command {
	var (
		conn  natsFlags
		api   apiFlags
		queue queueFlags
	)
	cmd := &cobra.Command{
		Use:   "scheduler",
		Short: "Serve the farm's gRPC API on a NATS JetStream server",
		Long: "Sets up the farm's streams and buckets on the NATS server and serves the gRPC API.\n" +
			"Holds no state of its own: stop, restart or run several at will.",
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			log := serverLogger(s)
			// In a container the API listens on all interfaces and the
			// host publishes the port; warn rather than refuse.
			creds, err := api.load(true)
			if err != nil {
				return withCode(ExitUsage, err)
			}
			if !api.beyondLoopbackOK {
				log.Warn("API reachable beyond loopback without token and TLS; publish its port on loopback only", "listen", api.listen)
			}
			settings, err := queue.settings()
			if err != nil {
				return withCode(ExitUsage, err)
			}
			limits, err := api.limits.limits()
			if err != nil {
				return withCode(ExitUsage, err)
			}
			reg := newMetricsRegistry()
			stopMetrics, err := serveMetrics(api.metricsListen, reg, log)
			if err != nil {
				return withCode(ExitUsage, err)
			}
			defer stopMetrics()
			nc, err := conn.connect("soak-scheduler", log)
			if err != nil {
				return withCode(ExitFailure, err)
			}
			defer nc.Close()
			lis, err := net.Listen("tcp", api.listen)
			if err != nil {
				return withCode(ExitFailure, fmt.Errorf("--listen: %w", err))
			}
			srv, err := scheduler.Start(cmd.Context(), nc, lis, scheduler.Config{
				Settings: settings, Clients: api.clients(), TLS: creds,
				MaxMessageBytes: api.maxMessageBytes, Limits: limits, Metrics: reg, Logger: log,
			})
			if err != nil {
				lis.Close()
				return withCode(ExitFailure, err)
			}
			fmt.Fprintf(s.out, "farm API on %s\n", srv.Addr())
			api.announce(s.out)
			reloadOnHangup(cmd.Context(), api.tokens, log)
			<-cmd.Context().Done()
			if err := closeWithGrace(srv.Close); err != nil {
				return withCode(ExitFailure, err)
			}
			return nil
		},
	}
	conn.register(cmd.Flags())
	api.register(cmd.Flags())
	queue.register(cmd.Flags())
	return cmd
}

func newWorkerCmd(s streams) *cobra.Command {
	var (
		conn                     natsFlags
		cfg                      worker.Config
		workDir                  string
		maxJobMemory, maxJobDisk string
		metricsListen            string
	)
	cmd := &cobra.Command{
		Use:   "worker",
		Short: "Compute the farm's jobs on this machine",
		Long: "Takes jobs from the farm's queue on the NATS server, computes them and uploads the results.\n" +
			"On interrupt it hands running jobs back to the queue and exits.",
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			log := serverLogger(s)
			if cfg.Concurrency < 1 {
				return withCode(ExitUsage, fmt.Errorf("--concurrency: must be at least 1, got %d", cfg.Concurrency))
			}
			for _, limit := range []struct {
				flag, value string
				bytes       *int64
			}{{"--max-job-memory", maxJobMemory, &cfg.MaxJobMemory}, {"--max-job-disk", maxJobDisk, &cfg.MaxJobDisk}} {
				if limit.value == "" {
					continue
				}
				b, err := parseBytes(limit.value)
				if err != nil {
					return withCode(ExitUsage, fmt.Errorf("%s: %w", limit.flag, err))
				}
				*limit.bytes = b
			}
			cfg.WorkDir = workDir
			cfg.Logger = log
			if cfg.Name == "" {
				cfg.Name = worker.DefaultName()
			}
			reg := newMetricsRegistry()
			stopMetrics, err := serveMetrics(metricsListen, reg, log)
			if err != nil {
				return withCode(ExitUsage, err)
			}
			defer stopMetrics()
			if cfg.Metrics, err = worker.NewMetrics(reg); err != nil {
				return withCode(ExitFailure, err)
			}
			// The worker user may hear replies only under the worker inbox.
			nc, err := conn.connect("soak-worker "+cfg.Name, log, store.WorkerInbox())
			if err != nil {
				return withCode(ExitFailure, err)
			}
			defer nc.Close()
			if err := worker.New(nc, cfg).Run(cmd.Context()); err != nil {
				return withCode(ExitFailure, err)
			}
			return nil
		},
	}
	conn.register(cmd.Flags())
	f := cmd.Flags()
	f.IntVar(&cfg.Concurrency, "concurrency", 1, "jobs computed at once")
	f.StringVar(&cfg.Name, "name", "", "worker name shown in job records (default host-pid)")
	f.IntVar(&cfg.Threads, "threads", 0, "solver threads per job (default: cores / concurrency)")
	f.StringVar(&workDir, "work-dir", "", "folder for result files before upload (default: system temporary folder)")
	f.StringVar(&metricsListen, "metrics-listen", "", "serve Prometheus metrics at http://ADDR/metrics, e.g. 127.0.0.1:9432 (default: off)")
	f.StringVar(&maxJobMemory, "max-job-memory", "", "fail jobs whose grid memory estimate is larger, e.g. 2GiB (default: no limit)")
	f.StringVar(&maxJobDisk, "max-job-disk", "", "fail jobs whose result files grow larger, e.g. 500MiB (default: no limit)")
	return cmd
}
