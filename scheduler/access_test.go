package scheduler_test

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"io"
	"math/big"
	"net"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/status"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler"
	"soakfarm/scheduler/access"
	"soakfarm/worker"
)

// startSchedulerWith serves the API with cfg on a loopback port.
func startSchedulerWith(t *testing.T, nc *nats.Conn, cfg scheduler.Config) *scheduler.Server {
	t.Helper()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	if cfg.Logger == nil {
		cfg.Logger = testLogger(t)
	}
	srv, err := scheduler.Start(t.Context(), nc, lis, cfg)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		srv.Close(ctx)
	})
	return srv
}

// bearer sends a token on a loopback test connection.
type bearer string

func (b bearer) GetRequestMetadata(context.Context, ...string) (map[string]string, error) {
	return map[string]string{"authorization": "Bearer " + string(b)}, nil
}
func (b bearer) RequireTransportSecurity() bool { return false }

func dialConn(t *testing.T, addr string, opts ...grpc.DialOption) *grpc.ClientConn {
	t.Helper()
	conn, err := grpc.NewClient(addr, opts...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return conn
}

func dialAs(t *testing.T, addr, token string) soakv1.FarmServiceClient {
	opts := []grpc.DialOption{grpc.WithTransportCredentials(insecure.NewCredentials())}
	if token != "" {
		opts = append(opts, grpc.WithPerRPCCredentials(bearer(token)))
	}
	return soakv1.NewFarmServiceClient(dialConn(t, addr, opts...))
}

func TestClientsSeeOnlyTheirOwnJobs(t *testing.T) {
	t.Parallel()
	ns := startNATS(t)
	nc := connect(t, ns)
	press, pressHash := access.NewToken()
	lab, labHash := access.NewToken()
	lead, leadHash := access.NewToken()
	reg, err := access.ParseRegistry([]byte("clients:\n" +
		access.EntryYAML("press-shop", pressHash, false) +
		access.EntryYAML("heat-lab", labHash, false) +
		access.EntryYAML("shift-lead", leadHash, true)))
	if err != nil {
		t.Fatal(err)
	}
	srv := startSchedulerWith(t, nc, scheduler.Config{Settings: testSettings(), Clients: reg})
	startWorker(t, nc, worker.Config{Name: "w1", Runner: quickRunner})
	addr := srv.Addr().String()
	pressC, labC, leadC, nobody := dialAs(t, addr, press), dialAs(t, addr, lab), dialAs(t, addr, lead), dialAs(t, addr, "")

	job := submit(t, pressC, sphereSpec("press-part"), "batch-1")
	if job.GetOwner() != "press-shop" {
		t.Fatalf("owner %q, want press-shop", job.GetOwner())
	}
	if _, err := watchAll(t.Context(), pressC, job.GetId(), 0); err != nil {
		t.Fatal(err)
	}
	// The same client key from another client is another job.
	if other := submit(t, labC, sphereSpec("lab-part"), "batch-1"); other.GetId() == job.GetId() || other.GetOwner() != "heat-lab" {
		t.Errorf("heat-lab's submit with press-shop's key gave job %s owned by %q", other.GetId(), other.GetOwner())
	}

	id := job.GetId()
	calls := map[string]func(c soakv1.FarmServiceClient) error{
		"get": func(c soakv1.FarmServiceClient) error {
			_, err := c.GetJob(t.Context(), &soakv1.GetJobRequest{JobId: id})
			return err
		},
		"watch": func(c soakv1.FarmServiceClient) error {
			_, err := watchAll(t.Context(), c, id, 0)
			return err
		},
		"fetch": func(c soakv1.FarmServiceClient) error {
			stream, err := c.FetchArtifact(t.Context(), &soakv1.FetchArtifactRequest{JobId: id, Name: "summary.json"})
			if err != nil {
				return err
			}
			for {
				if _, err := stream.Recv(); err != nil {
					if err == io.EOF {
						return nil
					}
					return err
				}
			}
		},
		"cancel": func(c soakv1.FarmServiceClient) error {
			_, err := c.CancelJob(t.Context(), &soakv1.CancelJobRequest{JobId: id})
			return err
		},
	}
	for name, call := range calls {
		for _, tc := range []struct {
			who    string
			client soakv1.FarmServiceClient
			want   codes.Code
		}{
			{"owner", pressC, codes.OK},
			{"other client", labC, codes.NotFound},
			{"operator", leadC, codes.OK},
			{"no token", nobody, codes.Unauthenticated},
		} {
			if got := status.Code(call(tc.client)); got != tc.want {
				t.Errorf("%s by %s: %v, want %v", name, tc.who, got, tc.want)
			}
		}
	}
	listed := func(c soakv1.FarmServiceClient) map[string]bool {
		resp, err := c.ListJobs(t.Context(), &soakv1.ListJobsRequest{})
		if err != nil {
			t.Fatal(err)
		}
		owners := map[string]bool{}
		for _, j := range resp.GetJobs() {
			owners[j.GetOwner()] = true
		}
		return owners
	}
	if got := listed(labC); len(got) != 1 || !got["heat-lab"] {
		t.Errorf("heat-lab lists jobs of %v, want its own only", got)
	}
	if got := listed(leadC); !got["heat-lab"] || !got["press-shop"] {
		t.Errorf("operator lists jobs of %v, want every client's", got)
	}
	// Health needs no token.
	health := healthpb.NewHealthClient(dialConn(t, addr, grpc.WithTransportCredentials(insecure.NewCredentials())))
	if _, err := health.Check(t.Context(), &healthpb.HealthCheckRequest{}); err != nil {
		t.Errorf("health check without token: %v", err)
	}
}

// testPKI is a throwaway CA with a server certificate for 127.0.0.1.
type testPKI struct {
	ca     *x509.Certificate
	caKey  *ecdsa.PrivateKey
	server tls.Certificate
}

func newCA(t *testing.T, name string) (*x509.Certificate, *ecdsa.PrivateKey) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: name},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
		IsCA: true, BasicConstraintsValid: true, KeyUsage: x509.KeyUsageCertSign,
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	cert, err := x509.ParseCertificate(der)
	if err != nil {
		t.Fatal(err)
	}
	return cert, key
}

func issue(t *testing.T, ca *x509.Certificate, caKey *ecdsa.PrivateKey, name string, usage x509.ExtKeyUsage) tls.Certificate {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(time.Now().UnixNano()), Subject: pkix.Name{CommonName: name},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
		KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{usage},
		IPAddresses: []net.IP{net.ParseIP("127.0.0.1")},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, ca, &key.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	return tls.Certificate{Certificate: [][]byte{der}, PrivateKey: key}
}

func TestTLSWithOptionalClientCertificates(t *testing.T) {
	t.Parallel()
	ca, caKey := newCA(t, "soak test CA")
	rogueCA, rogueKey := newCA(t, "some other CA")
	pool := x509.NewCertPool()
	pool.AddCert(ca)
	serverCreds := credentials.NewTLS(&tls.Config{
		MinVersion:   tls.VersionTLS12,
		Certificates: []tls.Certificate{issue(t, ca, caKey, "farm", x509.ExtKeyUsageServerAuth)},
		ClientCAs:    pool, ClientAuth: tls.VerifyClientCertIfGiven,
	})
	ns := startNATS(t)
	srv := startSchedulerWith(t, connect(t, ns), scheduler.Config{Settings: testSettings(), TLS: serverCreds})
	addr := srv.Addr().String()

	// The client presents its certificate whatever CAs the server names,
	// as a client trying its luck would.
	clientTLS := func(certs ...tls.Certificate) grpc.DialOption {
		return grpc.WithTransportCredentials(credentials.NewTLS(&tls.Config{RootCAs: pool,
			GetClientCertificate: func(*tls.CertificateRequestInfo) (*tls.Certificate, error) {
				if len(certs) == 0 {
					return &tls.Certificate{}, nil
				}
				return &certs[0], nil
			}}))
	}
	tests := []struct {
		name string
		opt  grpc.DialOption
		ok   bool
	}{
		{"TLS without client certificate", clientTLS(), true},
		{"TLS with client certificate of the CA", clientTLS(issue(t, ca, caKey, "press-shop", x509.ExtKeyUsageClientAuth)), true},
		{"TLS with client certificate of another CA", clientTLS(issue(t, rogueCA, rogueKey, "intruder", x509.ExtKeyUsageClientAuth)), false},
		{"TLS not trusting the farm's CA", grpc.WithTransportCredentials(credentials.NewTLS(&tls.Config{})), false},
		{"plaintext", grpc.WithTransportCredentials(insecure.NewCredentials()), false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			c := soakv1.NewFarmServiceClient(dialConn(t, addr, tc.opt))
			ctx, cancel := context.WithTimeout(t.Context(), 5*time.Second)
			defer cancel()
			_, err := c.ListJobs(ctx, &soakv1.ListJobsRequest{})
			if (err == nil) != tc.ok {
				t.Errorf("list jobs: %v, want success %v", err, tc.ok)
			}
		})
	}
}

// TestHealthFollowsNATS stops the NATS server under a running scheduler
// and starts it again on the same port and folder.
func TestHealthFollowsNATS(t *testing.T) {
	t.Parallel()
	storeDir := t.TempDir()
	run := func(port int) *server.Server {
		ns, err := server.NewServer(&server.Options{
			Host: "127.0.0.1", Port: port, JetStream: true, StoreDir: storeDir, NoSigs: true, NoLog: true,
		})
		if err != nil {
			t.Fatal(err)
		}
		go ns.Start()
		if !ns.ReadyForConnections(10 * time.Second) {
			t.Fatal("NATS not ready")
		}
		return ns
	}
	ns := run(-1)
	port := ns.Addr().(*net.TCPAddr).Port
	nc, err := nats.Connect(ns.ClientURL(), nats.MaxReconnects(-1), nats.ReconnectWait(50*time.Millisecond))
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	srv := startSchedulerWith(t, nc, scheduler.Config{Settings: testSettings()})
	health := healthpb.NewHealthClient(dialConn(t, srv.Addr().String(), grpc.WithTransportCredentials(insecure.NewCredentials())))
	statusOf := func() healthpb.HealthCheckResponse_ServingStatus {
		resp, err := health.Check(t.Context(), &healthpb.HealthCheckRequest{Service: soakv1.FarmService_ServiceDesc.ServiceName})
		if err != nil {
			t.Fatal(err)
		}
		return resp.GetStatus()
	}
	if st := statusOf(); st != healthpb.HealthCheckResponse_SERVING {
		t.Fatalf("health %v with NATS up", st)
	}
	ns.Shutdown()
	ns.WaitForShutdown()
	waitFor(t, "NOT_SERVING with NATS down", func() bool { return statusOf() == healthpb.HealthCheckResponse_NOT_SERVING })
	ns = run(port)
	defer func() {
		ns.Shutdown()
		ns.WaitForShutdown()
	}()
	waitFor(t, "SERVING after NATS restarted", func() bool { return statusOf() == healthpb.HealthCheckResponse_SERVING })
}
