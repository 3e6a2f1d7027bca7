package cli

import (
	"bytes"
	"context"
	"io"
	"strings"
	"testing"
	"time"

	"soakfarm/scheduler/access"
)

func TestTokenNewPrintsTokenAndFileLine(t *testing.T) {
	t.Parallel()
	var out, errOut bytes.Buffer
	code := Main(t.Context(), []string{"token", "new", "--name", "press-shop", "--operator"}, strings.NewReader(""), &out, &errOut)
	if code != ExitOK {
		t.Fatalf("exit %d: %s", code, errOut.String())
	}
	lines := strings.Split(out.String(), "\n")
	if len(lines) < 4 {
		t.Fatalf("output %q", out.String())
	}
	token := strings.TrimSpace(lines[1])
	reg, err := access.ParseRegistry([]byte("clients:\n" + lines[3] + "\n"))
	if err != nil {
		t.Fatalf("printed line does not parse: %v\n%s", err, out.String())
	}
	if c, ok := reg.Lookup(token); !ok || c != (access.Client{Name: "press-shop", Operator: true}) {
		t.Errorf("printed token gives %+v, %v", c, ok)
	}
	if strings.Contains(lines[3], token) {
		t.Error("the file line holds the token itself")
	}
	for _, name := range []string{"", "local", "has space"} {
		if code := Main(t.Context(), []string{"token", "new", "--name", name}, strings.NewReader(""), io.Discard, io.Discard); code != ExitUsage {
			t.Errorf("--name %q: exit %d, want %d", name, code, ExitUsage)
		}
	}
}

// TestServeWithoutFlagsSaysWhoMayCall starts `soak serve` with no
// security flags: it serves on loopback and says every caller is the
// local operator.
func TestServeWithoutFlagsSaysWhoMayCall(t *testing.T) {
	t.Parallel()
	ctx, cancel := context.WithCancel(t.Context())
	defer cancel()
	out := &lockedBuffer{}
	done := make(chan int, 1)
	go func() {
		done <- Main(ctx, []string{"serve", "--data", t.TempDir(), "--listen", "127.0.0.1:0", "--workers", "0"}, strings.NewReader(""), out, io.Discard)
	}()
	deadline := time.Now().Add(20 * time.Second)
	for !strings.Contains(out.String(), "interrupt to stop") {
		if time.Now().After(deadline) {
			t.Fatalf("serve said %q", out.String())
		}
		time.Sleep(20 * time.Millisecond)
	}
	cancel()
	if code := <-done; code != ExitOK {
		t.Errorf("exit %d", code)
	}
	for _, want := range []string{"serving loopback only", `no token file: every caller is the operator client "local"`} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("serve output lacks %q:\n%s", want, out.String())
		}
	}
}
