package client

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"errors"
	"fmt"
	"math/big"
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
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/emptypb"

	frustumv1 "frustum/proto/frustum/v1"
)

// fake is a JobService whose methods the tests script. It records the calls
// and the authorization metadata of each.
type fake struct {
	frustumv1.UnimplementedJobServiceServer

	create func(context.Context, *frustumv1.CreateJobRequest) (*frustumv1.Job, error)
	get    func(context.Context, *frustumv1.GetJobRequest) (*frustumv1.Job, error)
	list   func(*frustumv1.ListJobsRequest) (*frustumv1.ListJobsResponse, error)
	// watch gets the number of the call, from 1.
	watch  func(n int, req *frustumv1.WatchJobRequest, s grpc.ServerStreamingServer[frustumv1.Job]) error
	cancel func(*frustumv1.CancelJobRequest) (*frustumv1.Job, error)
	result func(*frustumv1.GetJobResultRequest, grpc.ServerStreamingServer[frustumv1.ResultChunk]) error

	mu    sync.Mutex
	calls map[string]int
	auth  map[string][]string
	names []string // the job names of the calls, in order
}

func (f *fake) record(ctx context.Context, method, name string) int {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.calls == nil {
		f.calls, f.auth = map[string]int{}, map[string][]string{}
	}
	f.calls[method]++
	md, _ := metadata.FromIncomingContext(ctx)
	f.auth[method] = append(f.auth[method], md.Get("authorization")...)
	if name != "" {
		f.names = append(f.names, method+" "+name)
	}
	return f.calls[method]
}

func (f *fake) count(method string) int {
	f.mu.Lock()
	defer f.mu.Unlock()
	return f.calls[method]
}

func (f *fake) CreateJob(ctx context.Context, req *frustumv1.CreateJobRequest) (*frustumv1.Job, error) {
	f.record(ctx, "CreateJob", "")
	if f.create == nil {
		return &frustumv1.Job{Name: "jobs/j1", State: frustumv1.Job_QUEUED}, nil
	}
	return f.create(ctx, req)
}

func (f *fake) GetJob(ctx context.Context, req *frustumv1.GetJobRequest) (*frustumv1.Job, error) {
	f.record(ctx, "GetJob", req.GetName())
	if f.get == nil {
		return nil, status.Error(codes.Unimplemented, "no GetJob")
	}
	return f.get(ctx, req)
}

func (f *fake) ListJobs(ctx context.Context, req *frustumv1.ListJobsRequest) (*frustumv1.ListJobsResponse, error) {
	f.record(ctx, "ListJobs", "")
	return f.list(req)
}

func (f *fake) WatchJob(req *frustumv1.WatchJobRequest, s grpc.ServerStreamingServer[frustumv1.Job]) error {
	n := f.record(s.Context(), "WatchJob", req.GetName())
	return f.watch(n, req, s)
}

func (f *fake) CancelJob(ctx context.Context, req *frustumv1.CancelJobRequest) (*frustumv1.Job, error) {
	f.record(ctx, "CancelJob", req.GetName())
	if f.cancel == nil {
		return &frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_CANCELLED}, nil
	}
	return f.cancel(req)
}

func (f *fake) DeleteJob(ctx context.Context, req *frustumv1.DeleteJobRequest) (*emptypb.Empty, error) {
	f.record(ctx, "DeleteJob", req.GetName())
	return &emptypb.Empty{}, nil
}

func (f *fake) GetJobResult(req *frustumv1.GetJobResultRequest, s grpc.ServerStreamingServer[frustumv1.ResultChunk]) error {
	f.record(s.Context(), "GetJobResult", req.GetName())
	return f.result(req, s)
}

// serveOn serves f on addr ("127.0.0.1:0" for any port) over TCP.
func serveOn(t *testing.T, addr string, f *fake, opts ...grpc.ServerOption) (*grpc.Server, string) {
	t.Helper()
	lis, err := net.Listen("tcp", addr)
	if err != nil {
		t.Fatal(err)
	}
	srv := grpc.NewServer(opts...)
	frustumv1.RegisterJobServiceServer(srv, f)
	go srv.Serve(lis)
	t.Cleanup(srv.Stop)
	return srv, lis.Addr().String()
}

func serve(t *testing.T, f *fake, opts ...grpc.ServerOption) string {
	_, addr := serveOn(t, "127.0.0.1:0", f, opts...)
	return addr
}

func dial(t *testing.T, addr string, opts ...Option) *Client {
	t.Helper()
	c, err := Dial(context.Background(), addr, opts...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

func testContext(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	t.Cleanup(cancel)
	return ctx
}

// spectrumSpec is a spectrum task on a dimer.
func spectrumSpec() *frustumv1.JobSpec {
	return &frustumv1.JobSpec{
		Cluster: &frustumv1.Cluster{
			Name:  "dimer",
			Sites: []*frustumv1.Site{{Label: "a"}, {Label: "b"}},
			Bonds: []*frustumv1.Bond{{A: "a", B: "b", Exchange: proto.Float64(10)}},
		},
		Task: &frustumv1.JobSpec_Spectrum{Spectrum: &frustumv1.SpectrumParameters{}},
	}
}

// spectrumResult is a spectrum result with n energies.
func spectrumResult(n int) *frustumv1.SpectrumResult {
	r := &frustumv1.SpectrumResult{ClusterName: "dimer", Field: []float64{0, 0, 0}, TotalStates: int64(n),
		Engine: &frustumv1.EngineReport{Method: "full diagonalization", Dimension: int64(n)}}
	for i := range n {
		r.Energies = append(r.Energies, float64(i)*0.25-7.5)
	}
	r.Levels = []*frustumv1.Level{{Energy: -7.5, Degeneracy: 1, TotalSpin: proto.Float64(0)}}
	return r
}

// watchStates streams one job per state and ends.
func watchStates(states ...frustumv1.Job_State) func(int, *frustumv1.WatchJobRequest, grpc.ServerStreamingServer[frustumv1.Job]) error {
	return func(_ int, req *frustumv1.WatchJobRequest, s grpc.ServerStreamingServer[frustumv1.Job]) error {
		for i, st := range states {
			j := &frustumv1.Job{Name: req.GetName(), State: st, Progress: &frustumv1.JobProgress{Stage: "diagonalize sectors", Done: int64(i), Total: int64(len(states))}}
			if err := s.Send(j); err != nil {
				return err
			}
		}
		return nil
	}
}

// chunked splits the serialization of m into chunks of at most size bytes.
func chunked(t *testing.T, m proto.Message, size int) []*frustumv1.ResultChunk {
	t.Helper()
	b, err := proto.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	typ := string(m.ProtoReflect().Descriptor().FullName())
	var out []*frustumv1.ResultChunk
	for off := 0; off < len(b); off += size {
		end := min(off+size, len(b))
		out = append(out, &frustumv1.ResultChunk{Type: typ, Offset: int64(off), TotalSize: int64(len(b)), Data: b[off:end]})
	}
	return out
}

func sendChunks(chunks []*frustumv1.ResultChunk) func(*frustumv1.GetJobResultRequest, grpc.ServerStreamingServer[frustumv1.ResultChunk]) error {
	return func(_ *frustumv1.GetJobResultRequest, s grpc.ServerStreamingServer[frustumv1.ResultChunk]) error {
		for _, c := range chunks {
			if err := s.Send(c); err != nil {
				return err
			}
		}
		return nil
	}
}

func TestTokenMetadata(t *testing.T) {
	f := &fake{}
	addr := serve(t, f)
	ctx := testContext(t)

	if _, err := dial(t, addr, WithToken("s3cret")).Create(ctx, spectrumSpec(), ""); err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(t.TempDir(), "token")
	os.WriteFile(file, []byte("  from-file \nsecond line\n"), 0o600)
	if _, err := dial(t, addr, WithTokenFile(file)).Create(ctx, spectrumSpec(), ""); err != nil {
		t.Fatal(err)
	}
	if _, err := dial(t, addr).Create(ctx, spectrumSpec(), ""); err != nil {
		t.Fatal(err)
	}
	want := []string{"Bearer s3cret", "Bearer from-file"}
	if got := f.auth["CreateJob"]; !slices.Equal(got, want) {
		t.Errorf("authorization metadata %q, want %q (and none without a token)", got, want)
	}
}

func TestDialErrors(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	empty := filepath.Join(dir, "empty")
	os.WriteFile(empty, []byte("\nsecond\n"), 0o600)
	notPEM := filepath.Join(dir, "ca.pem")
	os.WriteFile(notPEM, []byte("not a certificate"), 0o600)
	for _, tc := range []struct {
		addr string
		opts []Option
		want string
	}{
		{"frustum.example.org:7447", []Option{WithToken("t")}, "plain text"},
		{"10.0.0.1:7447", []Option{WithToken("t")}, "plain text"},
		{"127.0.0.1:7447", []Option{WithTokenFile(filepath.Join(dir, "missing"))}, "token file"},
		{"127.0.0.1:7447", []Option{WithTokenFile(empty)}, "first line is empty"},
		{"127.0.0.1:7447", []Option{WithTLSCA(notPEM)}, "no PEM certificate"},
		{"", nil, "no server address"},
	} {
		c, err := Dial(ctx, tc.addr, tc.opts...)
		if err == nil {
			c.Close()
			t.Errorf("Dial(%q): no error, want %q", tc.addr, tc.want)
		} else if !strings.Contains(err.Error(), tc.want) {
			t.Errorf("Dial(%q): %v, want %q", tc.addr, err, tc.want)
		}
	}
	// Loopback addresses and TLS carry tokens; no token needs no TLS.
	for _, tc := range []struct {
		addr string
		opts []Option
	}{
		{"127.0.0.1:7447", []Option{WithToken("t")}},
		{"[::1]:7447", []Option{WithToken("t")}},
		{"localhost:7447", []Option{WithToken("t")}},
		{"frustum.example.org:7447", []Option{WithToken("t"), WithTLS(&tls.Config{})}},
		{"frustum.example.org:7447", nil},
	} {
		c, err := Dial(ctx, tc.addr, tc.opts...)
		if err != nil {
			t.Errorf("Dial(%q): %v", tc.addr, err)
			continue
		}
		c.Close()
	}
}

func TestRunInlineResult(t *testing.T) {
	want := spectrumResult(4)
	f := &fake{
		watch: watchStates(frustumv1.Job_QUEUED, frustumv1.Job_RUNNING, frustumv1.Job_SUCCEEDED),
		get: func(_ context.Context, req *frustumv1.GetJobRequest) (*frustumv1.Job, error) {
			return &frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_SUCCEEDED,
				Result: &frustumv1.Job_SpectrumResult{SpectrumResult: want}}, nil
		},
	}
	c := dial(t, serve(t, f))
	var seen []frustumv1.Job_State
	res, err := c.Run(testContext(t), spectrumSpec(), "req-1", func(j *frustumv1.Job) { seen = append(seen, j.GetState()) })
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(res, want) {
		t.Errorf("result %v, want %v", res, want)
	}
	if !slices.Equal(seen, []frustumv1.Job_State{frustumv1.Job_QUEUED, frustumv1.Job_RUNNING, frustumv1.Job_SUCCEEDED}) {
		t.Errorf("callback saw %v", seen)
	}
	if n := f.count("GetJobResult"); n != 0 {
		t.Errorf("GetJobResult called %d times for an inline result", n)
	}
}

func TestRunAnsweredAtOnce(t *testing.T) {
	want := spectrumResult(4)
	f := &fake{create: func(_ context.Context, req *frustumv1.CreateJobRequest) (*frustumv1.Job, error) {
		return &frustumv1.Job{Name: "jobs/cached", State: frustumv1.Job_SUCCEEDED, FromCache: true,
			Result: &frustumv1.Job_SpectrumResult{SpectrumResult: want}}, nil
	}}
	c := dial(t, serve(t, f))
	calls := 0
	res, err := c.Run(testContext(t), spectrumSpec(), "", func(*frustumv1.Job) { calls++ })
	if err != nil || !proto.Equal(res, want) {
		t.Fatalf("Run: %v, %v", res, err)
	}
	if calls != 1 || f.count("WatchJob") != 0 || f.count("GetJob") != 0 {
		t.Errorf("callback %d times, WatchJob %d, GetJob %d; want 1, 0, 0", calls, f.count("WatchJob"), f.count("GetJob"))
	}
}

func TestRunLargeResult(t *testing.T) {
	want := spectrumResult(20000) // about 160 kB
	chunks := chunked(t, want, 16<<10)
	if len(chunks) < 5 {
		t.Fatalf("only %d chunks", len(chunks))
	}
	f := &fake{
		watch: watchStates(frustumv1.Job_RUNNING, frustumv1.Job_SUCCEEDED),
		get: func(_ context.Context, req *frustumv1.GetJobRequest) (*frustumv1.Job, error) {
			return &frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_SUCCEEDED, ResultSizeBytes: int64(proto.Size(want))}, nil
		},
		result: sendChunks(chunks),
	}
	c := dial(t, serve(t, f))
	res, err := c.Run(testContext(t), spectrumSpec(), "", nil)
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(res, want) {
		t.Errorf("reassembled result differs from the sent one")
	}
	if f.count("GetJobResult") != 1 {
		t.Errorf("GetJobResult called %d times", f.count("GetJobResult"))
	}
}

func TestResultChunkErrors(t *testing.T) {
	msg := spectrumResult(100)
	good := func() []*frustumv1.ResultChunk { return chunked(t, msg, 200) }
	for _, tc := range []struct {
		name   string
		chunks func() []*frustumv1.ResultChunk
		code   codes.Code
		want   string
	}{
		{"gap", func() []*frustumv1.ResultChunk { c := good(); return slices.Delete(c, 1, 2) }, codes.DataLoss, "chunk at offset 400, expected offset 200"},
		{"overlap", func() []*frustumv1.ResultChunk { c := good(); c[2].Offset -= 10; return c }, codes.DataLoss, "expected offset 400"},
		{"repeated", func() []*frustumv1.ResultChunk { c := good(); return slices.Insert(c, 1, c[0]) }, codes.DataLoss, "chunk at offset 0, expected offset 200"},
		{"short", func() []*frustumv1.ResultChunk { c := good(); return c[:len(c)-1] }, codes.DataLoss, "the stream ended after"},
		{"too long", func() []*frustumv1.ResultChunk {
			c := good()
			last := c[len(c)-1]
			return append(c, &frustumv1.ResultChunk{Type: last.Type, TotalSize: last.TotalSize, Offset: last.TotalSize, Data: []byte{1}})
		}, codes.DataLoss, "runs past the total size"},
		{"total changes", func() []*frustumv1.ResultChunk { c := good(); c[1].TotalSize++; return c }, codes.DataLoss, "gives the total size"},
		{"type changes", func() []*frustumv1.ResultChunk { c := good(); c[1].Type = "frustum.v1.ThermoResult"; return c }, codes.DataLoss, "of type"},
		{"no type", func() []*frustumv1.ResultChunk { c := good(); c[0].Type = ""; return c }, codes.DataLoss, "names no type"},
		{"no chunks", func() []*frustumv1.ResultChunk { return nil }, codes.DataLoss, "no chunk"},
		{"unknown type", func() []*frustumv1.ResultChunk {
			c := good()
			for _, x := range c {
				x.Type = "frustum.v9.FutureResult"
			}
			return c
		}, codes.Unimplemented, "frustum.v9.FutureResult"},
		{"not the message", func() []*frustumv1.ResultChunk {
			return []*frustumv1.ResultChunk{{Type: "frustum.v1.SpectrumResult", TotalSize: 3, Data: []byte{0xff, 0xff, 0xff}}}
		}, codes.DataLoss, "result of jobs/j1"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			f := &fake{result: sendChunks(tc.chunks())}
			c := dial(t, serve(t, f))
			res, err := c.Result(testContext(t), "j1")
			if err == nil {
				t.Fatalf("no error; result %v", res)
			}
			if status.Code(err) != tc.code || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v (code %v), want %v with %q", err, status.Code(err), tc.code, tc.want)
			}
		})
	}
	// An empty result message is one chunk without data.
	f := &fake{result: sendChunks([]*frustumv1.ResultChunk{{Type: "frustum.v1.ThermoResult"}})}
	res, err := dial(t, serve(t, f)).Result(testContext(t), "jobs/j1")
	if err != nil {
		t.Fatal(err)
	}
	if _, ok := res.(*frustumv1.ThermoResult); !ok {
		t.Errorf("result %T, want *frustumv1.ThermoResult", res)
	}
}

func TestRunFailedJob(t *testing.T) {
	f := &fake{watch: func(_ int, req *frustumv1.WatchJobRequest, s grpc.ServerStreamingServer[frustumv1.Job]) error {
		s.Send(&frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_RUNNING})
		return s.Send(&frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_FAILED, Error: &frustumv1.JobError{
			Code: "INVALID_ARGUMENT", Message: "bonds[1].b: unknown site \"z\"",
			FieldViolations: []*frustumv1.FieldViolation{{Field: "spec.cluster.bonds[1].b", Description: "unknown site \"z\""}},
		}})
	}}
	c := dial(t, serve(t, f))
	_, err := c.Run(testContext(t), spectrumSpec(), "", nil)
	var je *JobError
	if !errors.As(err, &je) {
		t.Fatalf("error %v (%T), want a *JobError", err, err)
	}
	if je.Name != "jobs/j1" || je.Code != codes.InvalidArgument || je.State != frustumv1.Job_FAILED || !strings.Contains(je.Message, "unknown site") {
		t.Errorf("JobError %+v", je)
	}
	want := []FieldViolation{{Field: "spec.cluster.bonds[1].b", Description: "unknown site \"z\""}}
	if !slices.Equal(je.Fields, want) || !slices.Equal(FieldViolations(err), want) {
		t.Errorf("fields %v / %v, want %v", je.Fields, FieldViolations(err), want)
	}
	if status.Code(err) != codes.InvalidArgument {
		t.Errorf("status.Code = %v", status.Code(err))
	}
	st, _ := status.FromError(err)
	if len(st.Details()) != 1 {
		t.Errorf("status details %v, want the BadRequest", st.Details())
	}
	for _, w := range []string{"jobs/j1 failed", "INVALID_ARGUMENT", "spec.cluster.bonds[1].b"} {
		if !strings.Contains(err.Error(), w) {
			t.Errorf("error %q lacks %q", err, w)
		}
	}
}

func TestRunCancelledElsewhere(t *testing.T) {
	f := &fake{watch: watchStates(frustumv1.Job_RUNNING, frustumv1.Job_CANCELLED)}
	_, err := dial(t, serve(t, f)).Run(testContext(t), spectrumSpec(), "", nil)
	var je *JobError
	if !errors.As(err, &je) || je.Code != codes.Canceled || je.State != frustumv1.Job_CANCELLED {
		t.Fatalf("error %v, want a JobError CANCELLED", err)
	}
	if !strings.Contains(err.Error(), "was cancelled") {
		t.Errorf("error %q", err)
	}
}

func TestFieldViolationsOfStatus(t *testing.T) {
	f := &fake{create: func(context.Context, *frustumv1.CreateJobRequest) (*frustumv1.Job, error) {
		st, _ := status.New(codes.InvalidArgument, "bad cluster").WithDetails(&errdetails.BadRequest{FieldViolations: []*errdetails.BadRequest_FieldViolation{
			{Field: "spec.cluster.sites[0].spin", Description: "0.7 is not a multiple of 1/2"},
			{Field: "spec.cluster.bonds[3].b", Description: "unknown site"},
		}})
		return nil, st.Err()
	}}
	_, err := dial(t, serve(t, f)).Run(testContext(t), spectrumSpec(), "", nil)
	if status.Code(err) != codes.InvalidArgument {
		t.Fatalf("error %v, want INVALID_ARGUMENT", err)
	}
	got := FieldViolations(fmt.Errorf("wrapped: %w", err))
	if len(got) != 2 || got[0].Field != "spec.cluster.sites[0].spin" || got[1].Field != "spec.cluster.bonds[3].b" {
		t.Errorf("field violations %v", got)
	}
	if FieldViolations(errors.New("plain")) != nil || FieldViolations(nil) != nil {
		t.Error("field violations from an error without them")
	}
}

func TestWatchReconnectsAfterBrokenStream(t *testing.T) {
	f := &fake{watch: func(n int, req *frustumv1.WatchJobRequest, s grpc.ServerStreamingServer[frustumv1.Job]) error {
		if n == 1 {
			s.Send(&frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_RUNNING, Progress: &frustumv1.JobProgress{Fraction: 0.5}})
			return status.Error(codes.Unavailable, "server stopping")
		}
		return s.Send(&frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_SUCCEEDED})
	}}
	c := dial(t, serve(t, f))
	var seen []frustumv1.Job_State
	job, err := c.Watch(testContext(t), "j1", func(j *frustumv1.Job) { seen = append(seen, j.GetState()) })
	if err != nil {
		t.Fatal(err)
	}
	if job.GetState() != frustumv1.Job_SUCCEEDED || job.GetName() != "jobs/j1" {
		t.Errorf("final job %v", job)
	}
	if f.count("WatchJob") != 2 || !slices.Equal(seen, []frustumv1.Job_State{frustumv1.Job_RUNNING, frustumv1.Job_SUCCEEDED}) {
		t.Errorf("%d watch calls, saw %v", f.count("WatchJob"), seen)
	}
}

func TestWatchEndOfStreamBeforeTheEnd(t *testing.T) {
	f := &fake{watch: func(n int, req *frustumv1.WatchJobRequest, s grpc.ServerStreamingServer[frustumv1.Job]) error {
		if n == 1 {
			return s.Send(&frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_QUEUED}) // then a clean end
		}
		return s.Send(&frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_FAILED})
	}}
	job, err := dial(t, serve(t, f)).Watch(testContext(t), "jobs/j1", nil)
	if err != nil || job.GetState() != frustumv1.Job_FAILED {
		t.Fatalf("Watch: %v, %v", job, err)
	}
}

// TestWatchAcrossServerRestart stops the server while a watch is open and
// starts another on the same port.
func TestWatchAcrossServerRestart(t *testing.T) {
	release := make(chan struct{})
	first := &fake{watch: func(_ int, req *frustumv1.WatchJobRequest, s grpc.ServerStreamingServer[frustumv1.Job]) error {
		s.Send(&frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_RUNNING})
		<-s.Context().Done()
		return s.Context().Err()
	}}
	srv, addr := serveOn(t, "127.0.0.1:0", first)
	second := &fake{watch: watchStates(frustumv1.Job_RUNNING, frustumv1.Job_SUCCEEDED)}
	restarted := make(chan *grpc.Server, 1)
	go func() {
		<-release
		srv.Stop()
		time.Sleep(300 * time.Millisecond) // the server is away for a while
		lis, err := net.Listen("tcp", addr)
		if err != nil {
			t.Errorf("listening again on %s: %v", addr, err)
			return
		}
		srv2 := grpc.NewServer()
		frustumv1.RegisterJobServiceServer(srv2, second)
		go srv2.Serve(lis)
		restarted <- srv2
	}()
	defer func() {
		select {
		case srv2 := <-restarted:
			srv2.Stop()
		case <-time.After(5 * time.Second):
		}
	}()
	c := dial(t, addr, WithReconnectTimeout(10*time.Second))
	var once sync.Once
	job, err := c.Watch(testContext(t), "j1", func(*frustumv1.Job) { once.Do(func() { close(release) }) })
	if err != nil {
		t.Fatal(err)
	}
	if job.GetState() != frustumv1.Job_SUCCEEDED || second.count("WatchJob") == 0 {
		t.Errorf("final %v, %d watches on the second server", job, second.count("WatchJob"))
	}
}

func TestWatchGivesUp(t *testing.T) {
	// A first failure is reported at once, not retried.
	f := &fake{watch: func(int, *frustumv1.WatchJobRequest, grpc.ServerStreamingServer[frustumv1.Job]) error {
		return status.Error(codes.NotFound, "jobs/nope not found")
	}}
	c := dial(t, serve(t, f))
	if _, err := c.Watch(testContext(t), "nope", nil); status.Code(err) != codes.NotFound || f.count("WatchJob") != 1 {
		t.Errorf("Watch: %v after %d calls, want NOT_FOUND after 1", err, f.count("WatchJob"))
	}
	// An established watch on a server that is gone gives up after the
	// reconnect timeout.
	g := &fake{watch: func(n int, req *frustumv1.WatchJobRequest, s grpc.ServerStreamingServer[frustumv1.Job]) error {
		if n == 1 {
			s.Send(&frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_RUNNING})
		}
		return status.Error(codes.Unavailable, "down")
	}}
	c = dial(t, serve(t, g), WithReconnectTimeout(500*time.Millisecond))
	start := time.Now()
	_, err := c.Watch(testContext(t), "j1", nil)
	if status.Code(err) != codes.Unavailable || !strings.Contains(err.Error(), "no server for") {
		t.Errorf("Watch: %v, want UNAVAILABLE after the timeout", err)
	}
	if d := time.Since(start); d < 400*time.Millisecond || d > 5*time.Second {
		t.Errorf("gave up after %v, want about 0.5 s", d)
	}
}

func TestRunCancelCancelsTheJob(t *testing.T) {
	f := &fake{watch: func(_ int, req *frustumv1.WatchJobRequest, s grpc.ServerStreamingServer[frustumv1.Job]) error {
		s.Send(&frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_RUNNING})
		<-s.Context().Done()
		return s.Context().Err()
	}}
	c := dial(t, serve(t, f))
	ctx, cancel := context.WithCancel(testContext(t))
	defer cancel()
	_, err := c.Run(ctx, spectrumSpec(), "", func(j *frustumv1.Job) {
		if j.GetState() == frustumv1.Job_RUNNING {
			cancel()
		}
	})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("error %v, want context.Canceled", err)
	}
	if !strings.Contains(err.Error(), "jobs/j1 cancelled on the server") {
		t.Errorf("error %q", err)
	}
	f.mu.Lock()
	defer f.mu.Unlock()
	if !slices.Contains(f.names, "CancelJob jobs/j1") {
		t.Errorf("calls %v lack CancelJob jobs/j1", f.names)
	}
}

func TestListAllPages(t *testing.T) {
	f := &fake{list: func(req *frustumv1.ListJobsRequest) (*frustumv1.ListJobsResponse, error) {
		if req.GetState() != frustumv1.Job_RUNNING {
			return nil, status.Error(codes.InvalidArgument, "want RUNNING")
		}
		page := map[string]*frustumv1.ListJobsResponse{
			"":   {Jobs: []*frustumv1.Job{{Name: "jobs/5"}, {Name: "jobs/4"}}, NextPageToken: "p2"},
			"p2": {Jobs: []*frustumv1.Job{{Name: "jobs/3"}, {Name: "jobs/2"}}, NextPageToken: "p3"},
			"p3": {Jobs: []*frustumv1.Job{{Name: "jobs/1"}}},
		}[req.GetPageToken()]
		return page, nil
	}}
	c := dial(t, serve(t, f))
	jobs, err := c.ListAll(testContext(t), frustumv1.Job_RUNNING)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, j := range jobs {
		names = append(names, j.GetName())
	}
	if !slices.Equal(names, []string{"jobs/5", "jobs/4", "jobs/3", "jobs/2", "jobs/1"}) || f.count("ListJobs") != 3 {
		t.Errorf("ListAll gave %v in %d calls", names, f.count("ListJobs"))
	}

	loop := &fake{list: func(*frustumv1.ListJobsRequest) (*frustumv1.ListJobsResponse, error) {
		return &frustumv1.ListJobsResponse{Jobs: []*frustumv1.Job{{Name: "jobs/1"}}, NextPageToken: "again"}, nil
	}}
	if _, err := dial(t, serve(t, loop)).ListAll(testContext(t), 0); err == nil || !strings.Contains(err.Error(), "twice") {
		t.Errorf("ListAll on a looping server: %v", err)
	}
}

func TestNamesAndSimpleCalls(t *testing.T) {
	for in, want := range map[string]string{"abc": "jobs/abc", "jobs/abc": "jobs/abc", " x1 ": "jobs/x1", "": ""} {
		if got := JobName(in); got != want {
			t.Errorf("JobName(%q) = %q, want %q", in, got, want)
		}
	}
	if JobID("jobs/abc") != "abc" || JobID("abc") != "abc" {
		t.Error("JobID")
	}
	f := &fake{get: func(_ context.Context, req *frustumv1.GetJobRequest) (*frustumv1.Job, error) {
		return &frustumv1.Job{Name: req.GetName(), State: frustumv1.Job_RUNNING}, nil
	}}
	c := dial(t, serve(t, f))
	ctx := testContext(t)
	if j, err := c.Get(ctx, "abc"); err != nil || j.GetName() != "jobs/abc" {
		t.Errorf("Get: %v, %v", j, err)
	}
	if j, err := c.Cancel(ctx, "abc"); err != nil || j.GetState() != frustumv1.Job_CANCELLED {
		t.Errorf("Cancel: %v, %v", j, err)
	}
	if err := c.Delete(ctx, "jobs/abc"); err != nil {
		t.Errorf("Delete: %v", err)
	}
	if want := []string{"GetJob jobs/abc", "CancelJob jobs/abc", "DeleteJob jobs/abc"}; !slices.Equal(f.names, want) {
		t.Errorf("calls %v, want %v", f.names, want)
	}
	for c, name := range map[codes.Code]string{codes.InvalidArgument: "INVALID_ARGUMENT", codes.Canceled: "CANCELLED", codes.Unauthenticated: "UNAUTHENTICATED"} {
		if CodeName(c) != name || ParseCode(name) != c {
			t.Errorf("code %v: name %q, parsed %v", c, CodeName(c), ParseCode(name))
		}
	}
	if ParseCode("NO_SUCH_CODE") != codes.Unknown || ParseCode("canceled") != codes.Canceled {
		t.Error("ParseCode of odd names")
	}
}

// TestTLS serves over TLS with a self-signed certificate for 127.0.0.1 and
// checks that a client trusting it connects and sends its token.
func TestTLS(t *testing.T) {
	dir := t.TempDir()
	certPEM, keyPEM := selfSigned(t)
	caFile := filepath.Join(dir, "ca.pem")
	os.WriteFile(caFile, certPEM, 0o600)
	cert, err := tls.X509KeyPair(certPEM, keyPEM)
	if err != nil {
		t.Fatal(err)
	}
	f := &fake{}
	addr := serve(t, f, grpc.Creds(credentials.NewTLS(&tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12})))
	ctx := testContext(t)
	if _, err := dial(t, addr, WithTLSCA(caFile), WithToken("over-tls")).Create(ctx, spectrumSpec(), ""); err != nil {
		t.Fatal(err)
	}
	if got := f.auth["CreateJob"]; !slices.Equal(got, []string{"Bearer over-tls"}) {
		t.Errorf("authorization %q", got)
	}
	// A client that does not trust the certificate cannot connect.
	_, err = dial(t, addr, WithTLS(&tls.Config{RootCAs: x509.NewCertPool()})).Create(ctx, spectrumSpec(), "")
	if status.Code(err) != codes.Unavailable {
		t.Errorf("untrusted certificate: %v, want UNAVAILABLE", err)
	}
	// A plain-text client cannot talk to a TLS server.
	if _, err := dial(t, addr).Create(ctx, spectrumSpec(), ""); err == nil {
		t.Error("plain text to a TLS server: no error")
	}
}

func selfSigned(t *testing.T) (certPEM, keyPEM []byte) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber:          big.NewInt(1),
		Subject:               pkix.Name{CommonName: "frustumd test"},
		NotBefore:             time.Now().Add(-time.Hour),
		NotAfter:              time.Now().Add(time.Hour),
		IPAddresses:           []net.IP{net.ParseIP("127.0.0.1")},
		KeyUsage:              x509.KeyUsageDigitalSignature | x509.KeyUsageCertSign,
		ExtKeyUsage:           []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
		BasicConstraintsValid: true,
		IsCA:                  true,
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	kb, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	return pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: kb})
}
