package access_test

import (
	"crypto/sha256"
	"encoding/hex"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"soakfarm/scheduler/access"
)

// hashOf is the token file's hash, computed here with the standard
// library's SHA-256 rather than the package's own helper.
func hashOf(token string) string {
	sum := sha256.Sum256([]byte(token))
	return hex.EncodeToString(sum[:])
}

func TestParseRegistryReportsEveryBadEntry(t *testing.T) {
	t.Parallel()
	good := hashOf("a")
	tests := []struct {
		name string
		file string
		want []string // each must appear; none means the file is valid
	}{
		{"valid", "clients:\n  - {name: press-shop, token_sha256: " + good + "}\n  - {name: lab, token_sha256: " + hashOf("b") + ", operator: true}\n", nil},
		{"empty file", "", nil},
		{"unknown key", "clients:\n  - {name: a, token: x}\n", []string{"field token not found"}},
		{"bad name and bad hash", "clients:\n  - {name: 'has space', token_sha256: " + good + "}\n  - {name: b, token_sha256: abc}\n",
			[]string{`clients[0].name: want 1 to 64 letters`, `clients[1].token_sha256: want 64 hex digits`}},
		{"duplicate name", "clients:\n  - {name: a, token_sha256: " + good + "}\n  - {name: a, token_sha256: " + hashOf("b") + "}\n", []string{`clients[1].name: "a" is listed twice`}},
		{"shared token", "clients:\n  - {name: a, token_sha256: " + good + "}\n  - {name: b, token_sha256: " + good + "}\n", []string{`clients[1].token_sha256: same token as client "a"`}},
		{"reserved name", "clients:\n  - {name: local, token_sha256: " + good + "}\n", []string{`"local" is the implicit client`}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			_, err := access.ParseRegistry([]byte(tc.file))
			if len(tc.want) == 0 {
				if err != nil {
					t.Fatal(err)
				}
				return
			}
			if err == nil {
				t.Fatal("accepted")
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q lacks %q", err, w)
				}
			}
		})
	}
}

func TestLookup(t *testing.T) {
	t.Parallel()
	r, err := access.ParseRegistry([]byte("clients:\n  - {name: press-shop, token_sha256: " + hashOf("tok-press") +
		"}\n  - {name: lead, token_sha256: " + hashOf("tok-lead") + ", operator: true}\n"))
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		token string
		want  access.Client
		ok    bool
	}{
		{"tok-press", access.Client{Name: "press-shop"}, true},
		{"tok-lead", access.Client{Name: "lead", Operator: true}, true},
		{"tok-pres", access.Client{}, false},
		{"", access.Client{}, false},
		// The hash itself is not a token.
		{hashOf("tok-press"), access.Client{}, false},
	}
	for _, tc := range tests {
		got, ok := r.Lookup(tc.token)
		if got != tc.want || ok != tc.ok {
			t.Errorf("Lookup(%q) = %+v, %v; want %+v, %v", tc.token, got, ok, tc.want, tc.ok)
		}
	}
}

func TestMayAccess(t *testing.T) {
	t.Parallel()
	tests := []struct {
		client access.Client
		owner  string
		want   bool
	}{
		{access.Client{Name: "a"}, "a", true},
		{access.Client{Name: "a"}, "b", false},
		// Jobs from before owners were recorded are the operators' alone.
		{access.Client{Name: "a"}, "", false},
		{access.Client{Name: "op", Operator: true}, "b", true},
		{access.Local(), "", true},
	}
	for _, tc := range tests {
		if got := tc.client.MayAccess(tc.owner); got != tc.want {
			t.Errorf("%+v.MayAccess(%q) = %v", tc.client, tc.owner, got)
		}
	}
}

func TestTokenFileReloadKeepsClientsOnBadFile(t *testing.T) {
	t.Parallel()
	path := filepath.Join(t.TempDir(), "tokens.yaml")
	write := func(s string) {
		if err := os.WriteFile(path, []byte(s), 0o600); err != nil {
			t.Fatal(err)
		}
	}
	write("clients:\n  - {name: a, token_sha256: " + hashOf("ta") + "}\n")
	f, err := access.LoadTokenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	write("clients:\n  - {name: a, token_sha256: oops}\n")
	if err := f.Reload(); err == nil {
		t.Fatal("bad file reloaded")
	}
	if _, ok := f.Lookup("ta"); !ok {
		t.Error("client lost after a failed reload")
	}
	write("clients:\n  - {name: b, token_sha256: " + hashOf("tb") + "}\n")
	if err := f.Reload(); err != nil {
		t.Fatal(err)
	}
	if _, ok := f.Lookup("ta"); ok {
		t.Error("removed client still accepted")
	}
	if c, ok := f.Lookup("tb"); !ok || c.Name != "b" {
		t.Errorf("new client: %+v, %v", c, ok)
	}
}

func TestNewTokenEntryParses(t *testing.T) {
	t.Parallel()
	token, hash := access.NewToken()
	other, _ := access.NewToken()
	if token == other || len(token) < 40 {
		t.Fatalf("tokens %q and %q", token, other)
	}
	if hash != hashOf(token) {
		t.Fatalf("hash %s, want SHA-256 %s", hash, hashOf(token))
	}
	r, err := access.ParseRegistry([]byte("clients:\n" + access.EntryYAML("press-shop", hash, true)))
	if err != nil {
		t.Fatal(err)
	}
	if c, ok := r.Lookup(token); !ok || c != (access.Client{Name: "press-shop", Operator: true}) {
		t.Errorf("Lookup = %+v, %v", c, ok)
	}
}
