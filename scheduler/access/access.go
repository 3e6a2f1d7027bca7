// Package access owns who may call the farm's API: named clients whose
// bearer tokens the operator lists, by SHA-256 hash only, in a token file;
// which of them hold operator rights; and the gRPC interceptors that
// authenticate each call and attach its client to the call's context. The
// scheduler asks the context which client calls, and shows each client its
// own jobs only, unless it is an operator.
package access

import (
	"bytes"
	"context"
	"crypto/rand"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base64"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"sync/atomic"

	"go.yaml.in/yaml/v3"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
)

// LocalName is the one implicit client of a farm served without a token
// file, on loopback only: whoever can reach the port is on this machine and
// gets operator rights.
const LocalName = "local"

// Client is an authenticated caller.
type Client struct {
	Name string
	// Operator clients see, watch, fetch and cancel every job.
	Operator bool
}

// Local is the implicit client of a farm without a token file.
func Local() Client { return Client{Name: LocalName, Operator: true} }

// MayAccess reports whether c may see or act on a job owned by owner.
func (c Client) MayAccess(owner string) bool {
	return c.Operator || (owner != "" && owner == c.Name)
}

// Authenticator maps a bearer token to its client.
type Authenticator interface {
	Lookup(token string) (Client, bool)
}

// maxTokenFileBytes bounds the token file: a line per client.
const maxTokenFileBytes = 1 << 20

// tokenFile is the token file's format:
//
//	clients:
//	  - name: press-shop
//	    token_sha256: 9f86d081884c7d659a2feaa0c55ad015a3bf4f1b2b0b822cd15d6c15b0f00a08
//	    operator: false
type tokenFile struct {
	Clients []tokenEntry `yaml:"clients"`
}

type tokenEntry struct {
	Name        string `yaml:"name"`
	TokenSHA256 string `yaml:"token_sha256"`
	Operator    bool   `yaml:"operator"`
}

type registered struct {
	Client
	hash [sha256.Size]byte
}

// Registry is a parsed token file. It is immutable.
type Registry struct {
	clients []registered
}

// ParseRegistry reads a token file, reporting every bad entry at once.
func ParseRegistry(data []byte) (*Registry, error) {
	var f tokenFile
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	if err := dec.Decode(&f); err != nil && !errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("token file: %w", err)
	}
	r := &Registry{}
	var problems []string
	names := map[string]bool{}
	hashes := map[[sha256.Size]byte]string{}
	for i, e := range f.Clients {
		field := fmt.Sprintf("clients[%d]", i)
		switch {
		case !validName(e.Name):
			problems = append(problems, fmt.Sprintf("%s.name: want 1 to 64 letters, digits, '.', '_' or '-', got %q", field, e.Name))
			continue
		case e.Name == LocalName:
			problems = append(problems, fmt.Sprintf("%s.name: %q is the implicit client of a farm without tokens; choose another name", field, e.Name))
			continue
		case names[e.Name]:
			problems = append(problems, fmt.Sprintf("%s.name: %q is listed twice", field, e.Name))
			continue
		}
		names[e.Name] = true
		raw, err := hex.DecodeString(e.TokenSHA256)
		if err != nil || len(raw) != sha256.Size {
			problems = append(problems, fmt.Sprintf("%s.token_sha256: want 64 hex digits (the SHA-256 of the token), got %q", field, e.TokenSHA256))
			continue
		}
		reg := registered{Client: Client{Name: e.Name, Operator: e.Operator}}
		copy(reg.hash[:], raw)
		if other, dup := hashes[reg.hash]; dup {
			problems = append(problems, fmt.Sprintf("%s.token_sha256: same token as client %q; give each client its own", field, other))
			continue
		}
		hashes[reg.hash] = e.Name
		r.clients = append(r.clients, reg)
	}
	if len(problems) > 0 {
		return nil, fmt.Errorf("token file:\n%s", strings.Join(problems, "\n"))
	}
	return r, nil
}

func validName(s string) bool {
	if len(s) == 0 || len(s) > 64 {
		return false
	}
	for _, c := range s {
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '.' || c == '_' || c == '-') {
			return false
		}
	}
	return true
}

// Len is the number of clients.
func (r *Registry) Len() int { return len(r.clients) }

// Lookup finds the client of token. It compares the token's hash with
// every entry in constant time and does not stop at a match, so the time
// taken tells nothing about which entry matched or how closely.
func (r *Registry) Lookup(token string) (Client, bool) {
	sum := sha256.Sum256([]byte(token))
	var found Client
	ok := 0
	for _, c := range r.clients {
		match := subtle.ConstantTimeCompare(sum[:], c.hash[:])
		if match == 1 {
			found = c.Client
		}
		ok |= match
	}
	return found, ok == 1
}

// TokenFile is a token file that can be read again while the scheduler
// runs (on SIGHUP in the soak commands). Safe for concurrent use.
type TokenFile struct {
	path    string
	current atomic.Pointer[Registry]
}

// LoadTokenFile reads the token file at path.
func LoadTokenFile(path string) (*TokenFile, error) {
	f := &TokenFile{path: path}
	if err := f.Reload(); err != nil {
		return nil, err
	}
	return f, nil
}

// Reload reads the file again. On an error the clients read before stay in
// force, so a slip while editing locks nobody out.
func (f *TokenFile) Reload() error {
	file, err := os.Open(f.path)
	if err != nil {
		return fmt.Errorf("token file: %w", err)
	}
	defer file.Close()
	data, err := io.ReadAll(io.LimitReader(file, maxTokenFileBytes+1))
	if err != nil {
		return fmt.Errorf("token file %s: %w", f.path, err)
	}
	if len(data) > maxTokenFileBytes {
		return fmt.Errorf("token file %s: larger than %d bytes", f.path, maxTokenFileBytes)
	}
	r, err := ParseRegistry(data)
	if err != nil {
		return fmt.Errorf("%s: %w", f.path, err)
	}
	f.current.Store(r)
	return nil
}

// Path is the file's path.
func (f *TokenFile) Path() string { return f.path }

// Len is the number of clients read last.
func (f *TokenFile) Len() int { return f.current.Load().Len() }

// Lookup implements Authenticator with the clients read last.
func (f *TokenFile) Lookup(token string) (Client, bool) { return f.current.Load().Lookup(token) }

// tokenBytes is the randomness of a new token: 256 bits.
const tokenBytes = 32

// NewToken returns a fresh random token and the SHA-256 hash the token
// file stores for it.
func NewToken() (token, hashHex string) {
	raw := make([]byte, tokenBytes)
	rand.Read(raw) // never fails (crypto/rand documents it)
	token = "soak_" + base64.RawURLEncoding.EncodeToString(raw)
	return token, HashToken(token)
}

// HashToken is the hex SHA-256 of a token, as the token file holds it.
func HashToken(token string) string {
	sum := sha256.Sum256([]byte(token))
	return hex.EncodeToString(sum[:])
}

// EntryYAML is the token file entry of a client, to paste under clients:.
func EntryYAML(name, hashHex string, operator bool) string {
	return fmt.Sprintf("  - {name: %s, token_sha256: %s, operator: %t}\n", name, hashHex, operator)
}

// ValidName reports whether name may name a client.
func ValidName(name string) bool { return validName(name) && name != LocalName }

type clientKey struct{}

// WithClient attaches the calling client to ctx.
func WithClient(ctx context.Context, c Client) context.Context {
	return context.WithValue(ctx, clientKey{}, c)
}

// FromContext returns the client WithClient attached; false when none is.
func FromContext(ctx context.Context) (Client, bool) {
	c, ok := ctx.Value(clientKey{}).(Client)
	return c, ok
}

// Guard authenticates calls. With a nil Authenticator every call is the
// implicit Local client.
type Guard struct {
	Auth Authenticator
}

// healthPrefix marks calls that need no token: load balancers and probes
// check health without credentials.
const healthPrefix = "/grpc.health.v1.Health/"

func (g Guard) authenticate(ctx context.Context, method string) (context.Context, error) {
	if g.Auth == nil {
		return WithClient(ctx, Local()), nil
	}
	if strings.HasPrefix(method, healthPrefix) {
		return ctx, nil
	}
	md, _ := metadata.FromIncomingContext(ctx)
	for _, v := range md.Get("authorization") {
		if token, ok := strings.CutPrefix(v, "Bearer "); ok {
			if c, ok := g.Auth.Lookup(token); ok {
				return WithClient(ctx, c), nil
			}
		}
	}
	return nil, status.Error(codes.Unauthenticated, "missing or unknown bearer token (send \"authorization: Bearer TOKEN\" with a token from the farm's token file)")
}

// Unary is the guard's unary interceptor.
func (g Guard) Unary(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	ctx, err := g.authenticate(ctx, info.FullMethod)
	if err != nil {
		return nil, err
	}
	return handler(ctx, req)
}

// Stream is the guard's stream interceptor.
func (g Guard) Stream(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
	ctx, err := g.authenticate(ss.Context(), info.FullMethod)
	if err != nil {
		return err
	}
	return handler(srv, &clientStream{ServerStream: ss, ctx: ctx})
}

// clientStream carries the authenticated context into a stream handler.
type clientStream struct {
	grpc.ServerStream
	ctx context.Context
}

func (s *clientStream) Context() context.Context { return s.ctx }
