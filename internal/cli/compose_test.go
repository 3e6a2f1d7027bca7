package cli

import (
	"io"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/nats-io/nats-server/v2/server"
	"go.yaml.in/yaml/v3"
)

// composeFile is the part of compose.yaml the checks below read.
type composeFile struct {
	Services map[string]struct {
		Image         string   `yaml:"image"`
		Command       []string `yaml:"command"`
		ContainerName string   `yaml:"container_name"`
		Ports         []string `yaml:"ports"`
		Volumes       []string `yaml:"volumes"`
		Healthcheck   struct {
			Test []string `yaml:"test"`
		} `yaml:"healthcheck"`
	} `yaml:"services"`
	Volumes map[string]any `yaml:"volumes"`
}

func readCompose(t *testing.T) composeFile {
	t.Helper()
	data, err := os.ReadFile("../../compose.yaml")
	if err != nil {
		t.Fatal(err)
	}
	var c composeFile
	if err := yaml.Unmarshal(data, &c); err != nil {
		t.Fatalf("compose.yaml: %v", err)
	}
	return c
}

// soakImage is the image the Dockerfile builds, whose entrypoint is soak.
const soakImage = "soakfarm/soak:local"

// TestComposeCommandsExist checks that every soak command line in
// compose.yaml (service commands and health checks) names commands and
// flags the binary has, since docker cannot run here.
func TestComposeCommandsExist(t *testing.T) {
	t.Parallel()
	c := readCompose(t)
	var lines [][]string
	for name, svc := range c.Services {
		if svc.Image == soakImage {
			lines = append(lines, svc.Command)
		}
		if test := svc.Healthcheck.Test; len(test) > 1 && test[0] == "CMD" && filepath.Base(test[1]) == "soak" {
			lines = append(lines, test[2:])
		} else if svc.Image == soakImage && len(test) > 0 {
			t.Errorf("service %s: health check %q does not call soak, the only program in the image", name, test)
		}
	}
	if len(lines) < 3 {
		t.Fatalf("found %d soak command lines in compose.yaml, want the scheduler's, the workers' and a health check", len(lines))
	}
	for _, args := range lines {
		root := newRoot(streams{in: strings.NewReader(""), out: io.Discard, err: io.Discard})
		cmd, rest, err := root.Find(args)
		if err != nil || cmd == root {
			t.Errorf("soak %s: no such command (%v)", strings.Join(args, " "), err)
			continue
		}
		if err := cmd.ParseFlags(rest); err != nil {
			t.Errorf("soak %s: %v", strings.Join(args, " "), err)
			continue
		}
		if err := cmd.ValidateArgs(cmd.Flags().Args()); err != nil {
			t.Errorf("soak %s: %v", strings.Join(args, " "), err)
		}
	}
}

func TestComposeWorkersScale(t *testing.T) {
	t.Parallel()
	w, ok := readCompose(t).Services["worker"]
	if !ok {
		t.Fatal("compose.yaml has no worker service")
	}
	// A fixed container name or host port stops `--scale worker=N`.
	if w.ContainerName != "" || len(w.Ports) > 0 {
		t.Errorf("worker has container_name %q and ports %v; neither may be set on a scaled service", w.ContainerName, w.Ports)
	}
}

// TestComposeNATSConfig reads the mounted NATS config with the NATS
// server's own parser: JetStream on the named volume, synced on every
// write, monitoring on the port the health check asks.
func TestComposeNATSConfig(t *testing.T) {
	t.Parallel()
	c := readCompose(t)
	nats, ok := c.Services["nats"]
	if !ok {
		t.Fatal("compose.yaml has no nats service")
	}
	var confHost, dataVolume string
	for _, v := range nats.Volumes {
		parts := strings.Split(v, ":")
		switch {
		case len(parts) >= 2 && parts[1] == "/data":
			dataVolume = parts[0]
		case len(parts) >= 2 && slices.Contains(nats.Command, parts[1]):
			confHost = parts[0]
		}
	}
	if _, named := c.Volumes[dataVolume]; !named {
		t.Errorf("nats /data comes from %q, want a named volume declared under volumes:", dataVolume)
	}
	if confHost == "" {
		t.Fatalf("no mounted config file named in the nats command %q", nats.Command)
	}
	opts, err := server.ProcessConfigFile(filepath.Join("../..", confHost))
	if err != nil {
		t.Fatalf("%s: %v", confHost, err)
	}
	if !opts.JetStream || opts.StoreDir != "/data" || !opts.SyncAlways {
		t.Errorf("%s: jetstream %v, store_dir %q, sync always %v; want true, /data, true", confHost, opts.JetStream, opts.StoreDir, opts.SyncAlways)
	}
	if health := strings.Join(nats.Healthcheck.Test, " "); opts.HTTPPort == 0 || !strings.Contains(health, ":"+strconv.Itoa(opts.HTTPPort)+"/healthz") {
		t.Errorf("health check %q does not ask the monitoring port %d", health, opts.HTTPPort)
	}
}
