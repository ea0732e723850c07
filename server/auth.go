package server

import (
	"bufio"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"os"
	"strings"
	"unicode"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
)

// LocalUser is the owner of every job on a server without a token file.
const LocalUser = "local"

// HashToken returns the hex SHA-256 of a token, as the token file lists it.
func HashToken(token string) string {
	sum := sha256.Sum256([]byte(token))
	return hex.EncodeToString(sum[:])
}

// Tokens maps the SHA-256 of each user's token to the user's name.
type Tokens map[[sha256.Size]byte]string

// LoadTokens reads a token file; see ParseTokens.
func LoadTokens(path string) (Tokens, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("token file: %w", err)
	}
	defer f.Close()
	return ParseTokens(f, path)
}

// ParseTokens reads a token file: one line per user,
//
//	NAME SHA256HEX
//
// where SHA256HEX is the hex SHA-256 of the user's token (HashToken, or
// `frustumd hash-token`). Blank lines and lines starting with # are
// skipped. A name is printable, without spaces, and appears once; so does
// each hash. A malformed line is an error naming file and line.
func ParseTokens(r io.Reader, file string) (Tokens, error) {
	out := Tokens{}
	seen := map[string]int{}
	sc := bufio.NewScanner(r)
	for n := 1; sc.Scan(); n++ {
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		bad := func(format string, args ...any) error {
			return fmt.Errorf("token file %s:%d: %s", file, n, fmt.Sprintf(format, args...))
		}
		fields := strings.Fields(line)
		if len(fields) != 2 {
			return nil, bad("want two fields, NAME SHA256HEX, got %d", len(fields))
		}
		name, hexHash := fields[0], strings.ToLower(fields[1])
		for _, r := range name {
			if !unicode.IsPrint(r) {
				return nil, bad("user name %q has a character that is not printable", name)
			}
		}
		if len(hexHash) != 2*sha256.Size {
			return nil, bad("the hash of user %q has %d characters, want %d hex digits (the SHA-256 of the token)", name, len(hexHash), 2*sha256.Size)
		}
		var sum [sha256.Size]byte
		if _, err := hex.Decode(sum[:], []byte(hexHash)); err != nil {
			return nil, bad("the hash of user %q is not hex: %v", name, err)
		}
		if first, dup := seen[name]; dup {
			return nil, bad("user %q is listed twice (first on line %d)", name, first)
		}
		if other, dup := out[sum]; dup {
			return nil, bad("user %q has the same token as user %q", name, other)
		}
		seen[name] = n
		out[sum] = name
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("token file %s: %w", file, err)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("token file %s: lists no users", file)
	}
	return out, nil
}

// userKey is the context key of the authenticated user's name.
type userKey struct{}

// UserFrom returns the authenticated user of an RPC context.
func UserFrom(ctx context.Context) (string, bool) {
	u, ok := ctx.Value(userKey{}).(string)
	return u, ok
}

// openMethod reports whether a method needs no authentication: health
// checks and server reflection, so that standard tools work.
func openMethod(fullMethod string) bool {
	return strings.HasPrefix(fullMethod, "/grpc.health.v1.Health/") ||
		strings.HasPrefix(fullMethod, "/grpc.reflection.v1.ServerReflection/") ||
		strings.HasPrefix(fullMethod, "/grpc.reflection.v1alpha.ServerReflection/")
}

// authenticator finds the caller of each RPC.
type authenticator struct {
	tokens Tokens // nil: every caller is LocalUser
}

// authenticate returns ctx with the caller's name, or UNAUTHENTICATED.
func (a *authenticator) authenticate(ctx context.Context, fullMethod string) (context.Context, error) {
	if openMethod(fullMethod) {
		return ctx, nil
	}
	if a.tokens == nil {
		return context.WithValue(ctx, userKey{}, LocalUser), nil
	}
	md, _ := metadata.FromIncomingContext(ctx)
	vals := md.Get("authorization")
	if len(vals) == 0 {
		return nil, statusError(codes.Unauthenticated, "NO_TOKEN",
			`this server needs a token: send the metadata "authorization: Bearer TOKEN"`, nil)
	}
	scheme, token, ok := strings.Cut(vals[0], " ")
	if !ok || !strings.EqualFold(scheme, "Bearer") || strings.TrimSpace(token) == "" {
		return nil, statusError(codes.Unauthenticated, "BAD_TOKEN",
			`the authorization metadata is not of the form "Bearer TOKEN"`, nil)
	}
	user, ok := a.tokens[sha256.Sum256([]byte(strings.TrimSpace(token)))]
	if !ok {
		return nil, statusError(codes.Unauthenticated, "UNKNOWN_TOKEN", "the token is not known to this server", nil)
	}
	return context.WithValue(ctx, userKey{}, user), nil
}

func (a *authenticator) unary(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	ctx, err := a.authenticate(ctx, info.FullMethod)
	if err != nil {
		return nil, err
	}
	return handler(ctx, req)
}

func (a *authenticator) stream(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
	ctx, err := a.authenticate(ss.Context(), info.FullMethod)
	if err != nil {
		return err
	}
	return handler(srv, &contextStream{ServerStream: ss, ctx: ctx})
}

// contextStream replaces the context of a server stream.
type contextStream struct {
	grpc.ServerStream
	ctx context.Context
}

func (s *contextStream) Context() context.Context { return s.ctx }
