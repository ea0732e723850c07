package client

import (
	"bufio"
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"net"
	"os"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/backoff"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"

	frustumv1 "frustum/proto/frustum/v1"
)

// DefaultReconnectTimeout is how long Watch tries to reopen a broken stream
// unless WithReconnectTimeout says otherwise.
const DefaultReconnectTimeout = time.Minute

// Client is a connection to one frustumd. It is safe for concurrent use.
type Client struct {
	conn      *grpc.ClientConn
	rpc       frustumv1.JobServiceClient
	reconnect time.Duration
	// backoff is the first pause before a reconnection; it doubles up to
	// maxBackoff.
	backoff, maxBackoff time.Duration
}

// Option configures Dial.
type Option func(*settings)

type settings struct {
	token, tokenFile string
	caFile           string
	tls              *tls.Config
	reconnect        time.Duration
	reconnectSet     bool
}

// WithToken sends token with every call as "authorization: Bearer TOKEN".
func WithToken(token string) Option {
	return func(s *settings) { s.token = token }
}

// WithTokenFile reads the token from the first line of the file at path
// (surrounding white space removed) and sends it as WithToken does.
func WithTokenFile(path string) Option {
	return func(s *settings) { s.tokenFile = path }
}

// WithTLSCA turns TLS on and trusts the certificate authorities of the PEM
// file at path (instead of the system's).
func WithTLSCA(path string) Option {
	return func(s *settings) { s.caFile = path }
}

// WithTLS turns TLS on with the given configuration. Together with
// WithTLSCA, the CA file's pool replaces cfg.RootCAs.
func WithTLS(cfg *tls.Config) Option {
	return func(s *settings) { s.tls = cfg }
}

// WithReconnectTimeout sets how long Watch keeps trying to reopen a broken
// stream before it gives up (default DefaultReconnectTimeout); 0 turns
// reconnection off.
func WithReconnectTimeout(d time.Duration) Option {
	return func(s *settings) { s.reconnect, s.reconnectSet = d, true }
}

// Dial returns a client of the JobService at addr (HOST:PORT). It does not
// wait for the connection: a server that cannot be reached is reported by
// the first call, as codes.Unavailable. ctx is not kept.
//
// Dial fails when a token or CA file cannot be read, and when a token would
// travel in plain text to an address that is not loopback.
func Dial(ctx context.Context, addr string, opts ...Option) (*Client, error) {
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	var s settings
	for _, o := range opts {
		o(&s)
	}
	if addr == "" {
		return nil, errors.New("client: no server address")
	}
	token := s.token
	if s.tokenFile != "" {
		t, err := ReadTokenFile(s.tokenFile)
		if err != nil {
			return nil, err
		}
		token = t
	}
	var tlsConf *tls.Config
	if s.tls != nil {
		tlsConf = s.tls.Clone()
	}
	if s.caFile != "" {
		pem, err := os.ReadFile(s.caFile)
		if err != nil {
			return nil, fmt.Errorf("client: CA file: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("client: CA file %s holds no PEM certificate", s.caFile)
		}
		if tlsConf == nil {
			tlsConf = &tls.Config{MinVersion: tls.VersionTLS12}
		}
		tlsConf.RootCAs = pool
	}
	if token != "" && tlsConf == nil && !IsLoopback(addr) {
		return nil, fmt.Errorf("client: refusing to send a token in plain text to %s: give a CA file (TLS), or use a loopback address", addr)
	}

	dialOpts := []grpc.DialOption{
		// Reconnect quickly after a server restart: the default back-off
		// grows to two minutes.
		grpc.WithConnectParams(grpc.ConnectParams{
			Backoff:           backoff.Config{BaseDelay: 100 * time.Millisecond, Multiplier: 1.6, Jitter: 0.2, MaxDelay: 3 * time.Second},
			MinConnectTimeout: 5 * time.Second,
		}),
	}
	if tlsConf != nil {
		dialOpts = append(dialOpts, grpc.WithTransportCredentials(credentials.NewTLS(tlsConf)))
	} else {
		dialOpts = append(dialOpts, grpc.WithTransportCredentials(insecure.NewCredentials()))
	}
	if token != "" {
		dialOpts = append(dialOpts, grpc.WithPerRPCCredentials(bearer{token: token, secure: tlsConf != nil}))
	}
	conn, err := grpc.NewClient(addr, dialOpts...)
	if err != nil {
		return nil, fmt.Errorf("client: %w", err)
	}
	c := &Client{
		conn:       conn,
		rpc:        frustumv1.NewJobServiceClient(conn),
		reconnect:  DefaultReconnectTimeout,
		backoff:    100 * time.Millisecond,
		maxBackoff: 2 * time.Second,
	}
	if s.reconnectSet {
		c.reconnect = s.reconnect
	}
	return c, nil
}

// Close closes the connection.
func (c *Client) Close() error { return c.conn.Close() }

// JobService returns the generated stub on the client's connection, for
// calls that this package does not wrap.
func (c *Client) JobService() frustumv1.JobServiceClient { return c.rpc }

// ReadTokenFile returns the first line of the file at path, white space
// removed; an empty first line is an error.
func ReadTokenFile(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", fmt.Errorf("client: token file: %w", err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 4096), 64<<10)
	var line string
	if sc.Scan() {
		line = strings.TrimSpace(sc.Text())
	}
	if err := sc.Err(); err != nil {
		return "", fmt.Errorf("client: token file %s: %w", path, err)
	}
	if line == "" {
		return "", fmt.Errorf("client: token file %s: the first line is empty; it must hold the token", path)
	}
	return line, nil
}

// IsLoopback reports whether the host of addr (HOST:PORT, or a bare host) is
// "localhost" or a loopback IP address.
func IsLoopback(addr string) bool {
	host := addr
	if h, _, err := net.SplitHostPort(addr); err == nil {
		host = h
	}
	host = strings.Trim(host, "[]")
	if strings.EqualFold(host, "localhost") {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}

// bearer puts the token into every call's metadata.
type bearer struct {
	token  string
	secure bool
}

func (b bearer) GetRequestMetadata(ctx context.Context, uri ...string) (map[string]string, error) {
	return map[string]string{"authorization": "Bearer " + b.token}, nil
}

// RequireTransportSecurity is true with TLS on: then grpc never sends the
// token over a connection without it. Loopback tokens travel in plain text.
func (b bearer) RequireTransportSecurity() bool { return b.secure }

// JobName returns the resource name of a job given as "jobs/{id}" or as the
// bare id; an empty id stays empty.
func JobName(id string) string {
	id = strings.TrimSpace(id)
	if id == "" || strings.HasPrefix(id, "jobs/") {
		return id
	}
	return "jobs/" + id
}

// JobID returns the id of a job name ("jobs/abc" gives "abc").
func JobID(name string) string { return strings.TrimPrefix(name, "jobs/") }
