package server

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"maps"
	"net"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// testServer is a Server on a real TCP listener on 127.0.0.1 with a client
// connection to it.
type testServer struct {
	*Server
	addr   string
	conn   *grpc.ClientConn
	client frustumv1.JobServiceClient
	served chan error
}

// testLogger writes the server's log to the test log when -v is given.
func testLogger(t *testing.T) *slog.Logger {
	if !testing.Verbose() {
		return slog.New(slog.DiscardHandler)
	}
	return slog.New(slog.NewTextHandler(testWriter{t}, &slog.HandlerOptions{Level: slog.LevelDebug}))
}

type testWriter struct{ t *testing.T }

func (w testWriter) Write(p []byte) (int, error) {
	w.t.Log(strings.TrimRight(string(p), "\n"))
	return len(p), nil
}

// start starts a server with cfg (DataDir: a new temporary directory when
// empty; Listen: loopback) after tweak has changed its test settings, and
// shuts it down at the end of the test.
func start(t *testing.T, cfg Config, tweak func(*Server)) *testServer {
	t.Helper()
	if cfg.DataDir == "" {
		cfg.DataDir = t.TempDir()
	}
	if cfg.Listen == "" {
		cfg.Listen = "127.0.0.1:0"
	}
	s, err := New(cfg, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	if tweak != nil {
		tweak(s)
	}
	return serveOn(t, s, nil)
}

// serveOn serves s on a new loopback listener and dials it (with dial
// options opts, insecure when none).
func serveOn(t *testing.T, s *Server, opts []grpc.DialOption) *testServer {
	t.Helper()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	ts := &testServer{Server: s, addr: lis.Addr().String(), served: make(chan error, 1)}
	go func() { ts.served <- s.Serve(lis) }()
	if opts == nil {
		opts = []grpc.DialOption{grpc.WithTransportCredentials(insecure.NewCredentials())}
	}
	ts.conn, err = grpc.NewClient(ts.addr, opts...)
	if err != nil {
		t.Fatal(err)
	}
	ts.client = frustumv1.NewJobServiceClient(ts.conn)
	t.Cleanup(func() {
		ts.conn.Close()
		ts.stop(t)
	})
	return ts
}

// stop shuts the server down (again: later calls do nothing).
func (ts *testServer) stop(t *testing.T) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	if err := ts.Shutdown(ctx); err != nil {
		t.Errorf("Shutdown: %v", err)
	}
}

// as returns a context that sends token as the bearer token.
func as(token string) context.Context {
	ctx := context.Background()
	if token == "" {
		return ctx
	}
	return metadata.AppendToOutgoingContext(ctx, "authorization", "Bearer "+token)
}

// tctx returns a context for one call of a test, ending with the test.
func tctx(t *testing.T, token string) context.Context {
	ctx, cancel := context.WithTimeout(as(token), 30*time.Second)
	t.Cleanup(cancel)
	return ctx
}

// watchUntil watches the job until it reaches a terminal state and
// returns every message received.
func watchUntil(t *testing.T, c frustumv1.JobServiceClient, ctx context.Context, name string) []*frustumv1.Job {
	t.Helper()
	stream, err := c.WatchJob(ctx, &frustumv1.WatchJobRequest{Name: name})
	if err != nil {
		t.Fatalf("WatchJob %s: %v", name, err)
	}
	var out []*frustumv1.Job
	for {
		j, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("WatchJob %s: %v after %d messages", name, err, len(out))
		}
		out = append(out, j)
	}
	if len(out) == 0 || !terminal(out[len(out)-1].GetState()) {
		t.Fatalf("watch of %s ended without a terminal state: %v", name, out)
	}
	return out
}

// waitFor polls cond every 10 ms until it holds or d has passed.
func waitFor(t *testing.T, d time.Duration, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(d)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out after %v waiting for %s", d, what)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// wantCode fails unless err is a status error with code c.
func wantCode(t *testing.T, what string, err error, c codes.Code) {
	t.Helper()
	if got := status.Code(err); got != c {
		t.Errorf("%s: %v (code %v), want %v", what, err, got, c)
	}
}

// fieldPaths returns the fields of the BadRequest details of err.
func fieldPaths(err error) []string {
	var out []string
	for _, d := range status.Convert(err).Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			for _, v := range br.GetFieldViolations() {
				out = append(out, v.GetField())
			}
		}
	}
	return out
}

// errorInfo returns the ErrorInfo detail of err, or nil.
func errorInfo(err error) *errdetails.ErrorInfo {
	for _, d := range status.Convert(err).Details() {
		if ei, ok := d.(*errdetails.ErrorInfo); ok {
			return ei
		}
	}
	return nil
}

// Test clusters.

// dimer is a Heisenberg dimer with exchange j (distinct j, distinct specs).
func dimer(j float64) *frustumv1.Cluster {
	return &frustumv1.Cluster{
		Name: fmt.Sprintf("dimer J=%g", j),
		Sites: []*frustumv1.Site{
			{Label: "a", Group: "left"},
			{Label: "b", Group: "right", G: proto.Float64(2.2)},
		},
		Bonds: []*frustumv1.Bond{{A: "a", B: "b", Exchange: proto.Float64(j)}},
	}
}

// dmChain is an open chain of n spins 1/2 with exchange j and a DM vector
// along z on every bond; with a field along x nothing is conserved and each
// field point is a dense complex diagonalization of dimension 2^n.
func dmChain(n int, j float64) *frustumv1.Cluster {
	c := &frustumv1.Cluster{Name: fmt.Sprintf("DM chain of %d, J=%g", n, j)}
	for i := range n {
		c.Sites = append(c.Sites, &frustumv1.Site{Label: fmt.Sprintf("s%d", i), Group: []string{"even", "odd"}[i%2]})
	}
	for i := 0; i+1 < n; i++ {
		c.Bonds = append(c.Bonds, &frustumv1.Bond{A: fmt.Sprintf("s%d", i), B: fmt.Sprintf("s%d", i+1), Exchange: proto.Float64(j), Dm: []float64{0, 0, 0.2 * j}})
	}
	return c
}

// fields returns n field values from 0.5 T in steps of 0.5 T.
func fields(n int) []float64 {
	out := make([]float64, n)
	for i := range out {
		out[i] = 0.5 * float64(i+1)
	}
	return out
}

// slowSpec is a magnetization job of the 9-site DM chain along x: about a
// quarter of a second per field point on this machine's two cores (8 sites
// under the race detector, for about the same time).
func slowSpec(nFields int, j float64) *frustumv1.JobSpec {
	n := 9
	if raceEnabled {
		n = 8
	}
	return &frustumv1.JobSpec{Cluster: dmChain(n, j), Task: &frustumv1.JobSpec_Magnetization{Magnetization: &frustumv1.MagnetizationParameters{
		Temperatures: []float64{2}, Fields: fields(nFields), Direction: []float64{1, 0, 0},
	}}}
}

func thermoSpec(j float64) *frustumv1.JobSpec {
	return &frustumv1.JobSpec{Cluster: dimer(j), Task: &frustumv1.JobSpec_Thermo{Thermo: &frustumv1.ThermoParameters{
		Temperatures: []float64{1, 2, 5, 10}, Field: []float64{0, 0, 1},
	}}}
}

// fakeTask is a stand-in for tasks.Run: it records how many run at once,
// reports progress steps times, sleeping step between them, and returns an
// empty result of the spec's task.
type fakeTask struct {
	step  time.Duration
	steps int

	mu      sync.Mutex
	running int
	maxRun  int
	order   []string // cluster names in the order they started
}

func (f *fakeTask) run(ctx context.Context, spec *frustumv1.JobSpec, opt ed.Options) (proto.Message, error) {
	f.mu.Lock()
	f.running++
	f.maxRun = max(f.maxRun, f.running)
	f.order = append(f.order, spec.GetCluster().GetName())
	f.mu.Unlock()
	defer func() {
		f.mu.Lock()
		f.running--
		f.mu.Unlock()
	}()
	for i := range f.steps {
		select {
		case <-ctx.Done():
			return nil, ctx.Err()
		case <-time.After(f.step):
		}
		if opt.Progress != nil {
			opt.Progress("fake work", i+1, f.steps)
		}
	}
	return &frustumv1.ThermoResult{ClusterName: spec.GetCluster().GetName()}, nil
}

func (f *fakeTask) started() []string {
	f.mu.Lock()
	defer f.mu.Unlock()
	return slices.Clone(f.order)
}

// writeTokens writes a token file for users name -> token and returns its path.
func writeTokens(t *testing.T, users map[string]string) string {
	t.Helper()
	var b strings.Builder
	b.WriteString("# test users\n\n")
	for _, name := range slices.Sorted(maps.Keys(users)) {
		fmt.Fprintf(&b, "%s %s\n", name, HashToken(users[name]))
	}
	path := filepath.Join(t.TempDir(), "tokens")
	if err := os.WriteFile(path, []byte(b.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	return path
}
