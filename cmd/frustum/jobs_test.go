package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"net"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/emptypb"
	"google.golang.org/protobuf/types/known/timestamppb"

	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// fakeServer is an in-memory JobService that runs every job in-process
// with package tasks, as frustumd does, but keeps nothing on disk. It is
// served over TCP on 127.0.0.1.
type fakeServer struct {
	frustumv1.UnimplementedJobServiceServer

	addr string
	// inline is the largest result that travels inside GetJob; larger ones
	// go through GetJobResult in chunks of chunk bytes.
	inline, chunk int
	// hold keeps new jobs RUNNING until release is closed.
	hold    bool
	release chan struct{}
	// refuse, when set, is CreateJob's error.
	refuse error

	mu      sync.Mutex
	jobs    map[string]*fakeJob
	order   []string // names, oldest first
	next    int
	changed chan struct{} // closed at every change
	auth    []string      // authorization metadata of every call
	results int           // GetJobResult calls
	sent    []string      // "STATE stage" of every job WatchJob sent
}

type fakeJob struct {
	job    *frustumv1.Job // without the result
	result proto.Message
	cancel context.CancelFunc
}

func startFake(t *testing.T) *fakeServer {
	t.Helper()
	f := &fakeServer{inline: 1 << 20, chunk: 1 << 10, jobs: map[string]*fakeJob{}, changed: make(chan struct{}), release: make(chan struct{})}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := grpc.NewServer(grpc.UnaryInterceptor(f.unaryAuth), grpc.StreamInterceptor(f.streamAuth))
	frustumv1.RegisterJobServiceServer(srv, f)
	go srv.Serve(lis)
	t.Cleanup(srv.Stop)
	f.addr = lis.Addr().String()
	return f
}

func (f *fakeServer) recordAuth(ctx context.Context) {
	md, _ := metadata.FromIncomingContext(ctx)
	f.mu.Lock()
	f.auth = append(f.auth, md.Get("authorization")...)
	f.mu.Unlock()
}

func (f *fakeServer) unaryAuth(ctx context.Context, req any, _ *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
	f.recordAuth(ctx)
	return h(ctx, req)
}

func (f *fakeServer) streamAuth(srv any, ss grpc.ServerStream, _ *grpc.StreamServerInfo, h grpc.StreamHandler) error {
	f.recordAuth(ss.Context())
	return h(srv, ss)
}

// notify wakes the watchers; f.mu is held.
func (f *fakeServer) notify() {
	close(f.changed)
	f.changed = make(chan struct{})
}

// put adds a job as it is (for jobs that the tests script).
func (f *fakeServer) put(j *frustumv1.Job, result proto.Message) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.jobs[j.GetName()] = &fakeJob{job: j, result: result}
	f.order = append(f.order, j.GetName())
	f.notify()
}

// update changes a job under the lock and wakes the watchers.
func (f *fakeServer) update(name string, fn func(*fakeJob)) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if fj, ok := f.jobs[name]; ok {
		fn(fj)
		f.notify()
	}
}

func (f *fakeServer) snapshot(name string) *frustumv1.Job {
	f.mu.Lock()
	defer f.mu.Unlock()
	if fj, ok := f.jobs[name]; ok {
		return proto.Clone(fj.job).(*frustumv1.Job)
	}
	return nil
}

func (f *fakeServer) CreateJob(ctx context.Context, req *frustumv1.CreateJobRequest) (*frustumv1.Job, error) {
	if f.refuse != nil {
		return nil, f.refuse
	}
	spec := req.GetSpec()
	task := ""
	switch {
	case spec.GetSpectrum() != nil:
		task = "spectrum"
	case spec.GetThermo() != nil:
		task = "thermo"
	case spec.GetMagnetization() != nil:
		task = "magnetization"
	default:
		return nil, status.Error(codes.InvalidArgument, "spec: no task")
	}
	f.mu.Lock()
	f.next++
	name := fmt.Sprintf("jobs/%04d", f.next)
	jctx, cancel := context.WithCancel(context.Background())
	job := &frustumv1.Job{Name: name, Owner: "tester", RequestId: req.GetRequestId(), Spec: spec, Task: task,
		State: frustumv1.Job_QUEUED, CreateTime: timestamppb.Now(), Progress: &frustumv1.JobProgress{}}
	f.jobs[name] = &fakeJob{job: job, cancel: cancel}
	f.order = append(f.order, name)
	f.notify()
	out := proto.Clone(job).(*frustumv1.Job)
	f.mu.Unlock()
	go f.execute(jctx, name, spec)
	return out, nil
}

// execute runs the job's task in-process with package tasks.
func (f *fakeServer) execute(ctx context.Context, name string, spec *frustumv1.JobSpec) {
	f.update(name, func(fj *fakeJob) {
		if fj.job.State == frustumv1.Job_QUEUED {
			fj.job.State, fj.job.StartTime, fj.job.Attempts = frustumv1.Job_RUNNING, timestamppb.Now(), 1
		}
	})
	if f.hold {
		f.update(name, func(fj *fakeJob) {
			fj.job.Progress = &frustumv1.JobProgress{Stage: "wait for the test", Done: 1, Total: 4, Fraction: 0.25, SecondsLeft: proto.Float64(75)}
		})
		select {
		case <-ctx.Done():
			return
		case <-f.release:
		}
	}
	opt := ed.Options{Progress: func(stage string, done, total int) {
		f.update(name, func(fj *fakeJob) {
			frac := 0.0
			if total > 0 {
				frac = float64(done) / float64(total)
			}
			fj.job.Progress = &frustumv1.JobProgress{Stage: stage, Done: int64(done), Total: int64(total), Fraction: frac}
		})
	}}
	var (
		res proto.Message
		err error
	)
	switch {
	case spec.GetSpectrum() != nil:
		res, err = tasks.Spectrum(ctx, spec.GetCluster(), spec.GetSpectrum(), opt)
	case spec.GetThermo() != nil:
		res, err = tasks.Thermo(ctx, spec.GetCluster(), spec.GetThermo(), opt)
	default:
		res, err = tasks.Magnetization(ctx, spec.GetCluster(), spec.GetMagnetization(), opt)
	}
	f.update(name, func(fj *fakeJob) {
		if fj.job.State != frustumv1.Job_RUNNING {
			return // cancelled meanwhile
		}
		fj.job.EndTime = timestamppb.Now()
		if err != nil {
			fj.job.State = frustumv1.Job_FAILED
			fj.job.Error = &frustumv1.JobError{Code: "INVALID_ARGUMENT", Message: err.Error()}
			var re *ed.RequestError
			if errors.As(err, &re) {
				fj.job.Error.FieldViolations = []*frustumv1.FieldViolation{{Field: "spec." + fj.job.Task + "." + re.Field, Description: re.Reason}}
			}
			return
		}
		fj.job.State, fj.result = frustumv1.Job_SUCCEEDED, res
		fj.job.ResultSizeBytes = int64(proto.Size(res))
		fj.job.Progress = &frustumv1.JobProgress{Stage: "done", Done: 1, Total: 1, Fraction: 1, SecondsLeft: proto.Float64(0)}
	})
}

func (f *fakeServer) find(name string) (*fakeJob, error) {
	fj, ok := f.jobs[name]
	if !ok {
		return nil, status.Errorf(codes.NotFound, "%s not found", name)
	}
	return fj, nil
}

func (f *fakeServer) GetJob(ctx context.Context, req *frustumv1.GetJobRequest) (*frustumv1.Job, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	fj, err := f.find(req.GetName())
	if err != nil {
		return nil, err
	}
	out := proto.Clone(fj.job).(*frustumv1.Job)
	if fj.result != nil && proto.Size(fj.result) <= f.inline {
		switch r := fj.result.(type) {
		case *frustumv1.SpectrumResult:
			out.Result = &frustumv1.Job_SpectrumResult{SpectrumResult: r}
		case *frustumv1.ThermoResult:
			out.Result = &frustumv1.Job_ThermoResult{ThermoResult: r}
		case *frustumv1.MagnetizationResult:
			out.Result = &frustumv1.Job_MagnetizationResult{MagnetizationResult: r}
		}
	}
	return out, nil
}

func (f *fakeServer) ListJobs(ctx context.Context, req *frustumv1.ListJobsRequest) (*frustumv1.ListJobsResponse, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	var all []*frustumv1.Job
	for i := len(f.order) - 1; i >= 0; i-- {
		j := f.jobs[f.order[i]]
		if j == nil || (req.GetState() != 0 && j.job.GetState() != req.GetState()) {
			continue
		}
		c := proto.Clone(j.job).(*frustumv1.Job)
		c.Spec = nil
		all = append(all, c)
	}
	// Pages of two, so that the client follows tokens.
	start, _ := strconv.Atoi(req.GetPageToken())
	end := min(start+2, len(all))
	resp := &frustumv1.ListJobsResponse{Jobs: all[start:end]}
	if end < len(all) {
		resp.NextPageToken = strconv.Itoa(end)
	}
	return resp, nil
}

func (f *fakeServer) WatchJob(req *frustumv1.WatchJobRequest, s grpc.ServerStreamingServer[frustumv1.Job]) error {
	for {
		f.mu.Lock()
		fj, err := f.find(req.GetName())
		if err != nil {
			f.mu.Unlock()
			return err
		}
		j := proto.Clone(fj.job).(*frustumv1.Job)
		j.Spec = nil
		changed := f.changed
		f.sent = append(f.sent, j.GetState().String()+" "+j.GetProgress().GetStage())
		f.mu.Unlock()
		if err := s.Send(j); err != nil {
			return err
		}
		if j.GetState() == frustumv1.Job_SUCCEEDED || j.GetState() == frustumv1.Job_FAILED || j.GetState() == frustumv1.Job_CANCELLED {
			return nil
		}
		select {
		case <-changed:
		case <-s.Context().Done():
			return s.Context().Err()
		}
	}
}

func (f *fakeServer) CancelJob(ctx context.Context, req *frustumv1.CancelJobRequest) (*frustumv1.Job, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	fj, err := f.find(req.GetName())
	if err != nil {
		return nil, err
	}
	if s := fj.job.GetState(); s != frustumv1.Job_QUEUED && s != frustumv1.Job_RUNNING {
		return nil, status.Errorf(codes.FailedPrecondition, "%s has ended (%s)", req.GetName(), s)
	}
	fj.job.State, fj.job.EndTime = frustumv1.Job_CANCELLED, timestamppb.Now()
	fj.job.Error = &frustumv1.JobError{Code: "CANCELLED", Message: "cancelled by the owner"}
	if fj.cancel != nil {
		fj.cancel()
	}
	f.notify()
	return proto.Clone(fj.job).(*frustumv1.Job), nil
}

func (f *fakeServer) DeleteJob(ctx context.Context, req *frustumv1.DeleteJobRequest) (*emptypb.Empty, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	fj, err := f.find(req.GetName())
	if err != nil {
		return nil, err
	}
	if s := fj.job.GetState(); s == frustumv1.Job_QUEUED || s == frustumv1.Job_RUNNING {
		return nil, status.Errorf(codes.FailedPrecondition, "%s is %s: cancel it first", req.GetName(), s)
	}
	delete(f.jobs, req.GetName())
	f.order = slices.DeleteFunc(f.order, func(n string) bool { return n == req.GetName() })
	return &emptypb.Empty{}, nil
}

func (f *fakeServer) GetJobResult(req *frustumv1.GetJobResultRequest, s grpc.ServerStreamingServer[frustumv1.ResultChunk]) error {
	f.mu.Lock()
	f.results++
	fj, err := f.find(req.GetName())
	var res proto.Message
	if err == nil {
		res = fj.result
	}
	f.mu.Unlock()
	if err != nil {
		return err
	}
	if res == nil {
		return status.Errorf(codes.FailedPrecondition, "%s has no result", req.GetName())
	}
	b, err := proto.Marshal(res)
	if err != nil {
		return err
	}
	typ := string(res.ProtoReflect().Descriptor().FullName())
	for off := 0; off == 0 || off < len(b); off += f.chunk {
		end := min(off+f.chunk, len(b))
		if err := s.Send(&frustumv1.ResultChunk{Type: typ, Offset: int64(off), TotalSize: int64(len(b)), Data: b[off:end]}); err != nil {
			return err
		}
	}
	return nil
}

// TestServerOutputEqualsInProcess runs each task in-process and with
// --server and compares stdout and stderr byte for byte, with the result
// inline in the job and with it fetched in chunks.
func TestServerOutputEqualsInProcess(t *testing.T) {
	f := startFake(t)
	cases := [][]string{
		{"spectrum", "--cluster", dimerFile},
		{"spectrum", "--cluster", triangleFile, "--field", "0,0,10", "--levels", "4"},
		{"thermo", "--cluster", chainFile, "--temps", "log:0.5:300:40"},
		{"thermo", "--cluster", dimerFile, "--temps", "1,2,5", "--field", "0,0,2"},
		{"magnetization", "--cluster", starFile, "--temps", "0,2", "--fields", "0:30:31"},
		{"magnetization", "--cluster", demoFile, "--temps", "2,5,10", "--fields", "0:15:16", "--direction", "1,1,0"},
	}
	for _, inline := range []bool{true, false} {
		f.inline = 1 << 20
		if !inline {
			f.inline = 0
		}
		for _, args := range cases {
			for _, format := range [][]string{nil, {"--json"}, {"--csv"}} {
				local := append(slices.Clone(args), format...)
				code, wantOut, wantErr := frustum(local...)
				if code != 0 {
					t.Fatalf("frustum %s: exit %d, %s", strings.Join(local, " "), code, wantErr)
				}
				remote := append(slices.Clone(local), "--server", f.addr)
				code, gotOut, gotErr := frustum(remote...)
				if code != 0 {
					t.Errorf("frustum %s: exit %d, %s", strings.Join(remote, " "), code, gotErr)
					continue
				}
				if gotOut != wantOut || gotErr != wantErr {
					t.Errorf("frustum %s (inline %v) prints differently from in-process:\n--- in-process\n%s%s\n--- server\n%s%s",
						strings.Join(remote, " "), inline, wantOut, wantErr, gotOut, gotErr)
				}
			}
		}
	}
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.results == 0 {
		t.Error("no result was fetched in chunks")
	}
}

var reJobName = regexp.MustCompile(`^jobs/[0-9a-z]+\n$`)

// TestSubmitAndFollow submits a job and follows it with the job commands.
func TestSubmitAndFollow(t *testing.T) {
	f := startFake(t)
	code, stdout, stderr := frustum("submit", "spectrum", "--cluster", dimerFile, "--field", "0,0,1", "--server", f.addr, "--request-id", "r1")
	if code != 0 || stderr != "" || !reJobName.MatchString(stdout) {
		t.Fatalf("submit: exit %d, stdout %q, stderr %q; want the job name alone", code, stdout, stderr)
	}
	name := strings.TrimSpace(stdout)
	id := strings.TrimPrefix(name, "jobs/")

	// The spec is the one the in-process command builds from the same flags.
	job := f.snapshot(name)
	c, err := loadCluster(dimerFile)
	if err != nil {
		t.Fatal(err)
	}
	want := &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Spectrum{Spectrum: &frustumv1.SpectrumParameters{Field: []float64{0, 0, 1}}}}
	if !proto.Equal(job.GetSpec(), want) || job.GetRequestId() != "r1" {
		t.Errorf("submitted spec %v (request id %q), want %v", job.GetSpec(), job.GetRequestId(), want)
	}

	// watch: plain lines on a pipe, the last one SUCCEEDED, exit 0.
	stdout, stderr = mustRun(t, "watch", id, "--server", f.addr)
	lines := strings.Split(strings.TrimSuffix(stdout, "\n"), "\n")
	last := lines[len(lines)-1]
	if stderr != "" || !regexp.MustCompile(`^SUCCEEDED done 1/1 100\.0% eta 0s$`).MatchString(last) {
		t.Errorf("watch: stdout %q, stderr %q", stdout, stderr)
	}
	for _, l := range lines {
		if !regexp.MustCompile(`^[A-Z]+ .+ [0-9]+/[0-9]+ [0-9.]+% eta \S+$`).MatchString(l) {
			t.Errorf("watch line %q is not STATE stage done/total fraction%% eta", l)
		}
	}

	// job --json: the Job's protojson, with the state by name and the result.
	for _, ref := range []string{id, name} {
		stdout, _ = mustRun(t, "job", ref, "--json", "--server", f.addr)
		var raw map[string]json.RawMessage
		if err := json.Unmarshal([]byte(stdout), &raw); err != nil {
			t.Fatalf("job --json: %v\n%s", err, stdout)
		}
		if string(raw["state"]) != `"SUCCEEDED"` || string(raw["name"]) != `"`+name+`"` {
			t.Errorf("job --json: state %s, name %s", raw["state"], raw["name"])
		}
		var j frustumv1.Job
		if err := protojson.Unmarshal([]byte(stdout), &j); err != nil || j.GetSpectrumResult() == nil {
			t.Errorf("job --json is not a Job with its result: %v", err)
		}
	}

	// job: details for people.
	stdout, _ = mustRun(t, "job", id, "--server", f.addr)
	for _, w := range []string{"Job:", name, "Task:", "spectrum", "State:", "SUCCEEDED", "Owner:", "tester", `Cluster:`, "Parameters: field=[0 0 1]\n", "Request id:", "r1", "Result:", "inline"} {
		if !strings.Contains(stdout, w) {
			t.Errorf("job output lacks %q:\n%s", w, stdout)
		}
	}

	// delete, then the job is gone.
	stdout, _ = mustRun(t, "delete", id, "--server", f.addr)
	if stdout != name+": deleted\n" {
		t.Errorf("delete: %q", stdout)
	}
	code, stdout, stderr = frustum("job", id, "--server", f.addr)
	if code != 1 || stdout != "" || !strings.Contains(stderr, "frustum job: NOT_FOUND: "+name+" not found") {
		t.Errorf("job after delete: exit %d, stdout %q, stderr %q", code, stdout, stderr)
	}
	checkOneLine(t, []string{"job", id}, stderr)
}

func TestJobsList(t *testing.T) {
	f := startFake(t)
	for i := range 5 {
		state := []frustumv1.Job_State{frustumv1.Job_SUCCEEDED, frustumv1.Job_FAILED, frustumv1.Job_RUNNING, frustumv1.Job_QUEUED, frustumv1.Job_CANCELLED}[i]
		j := &frustumv1.Job{Name: fmt.Sprintf("jobs/j%d", i), Task: "thermo", Owner: "tester", State: state, CreateTime: timestamppb.New(time.Date(2026, 1, 2, 3, 4, i, 0, time.UTC))}
		switch state {
		case frustumv1.Job_RUNNING:
			j.Progress = &frustumv1.JobProgress{Stage: "diagonalize sectors", Done: 3, Total: 6, Fraction: 0.5, SecondsLeft: proto.Float64(12)}
		case frustumv1.Job_FAILED:
			j.Error = &frustumv1.JobError{Code: "RESOURCE_EXHAUSTED", Message: "too big"}
		}
		f.put(j, nil)
	}
	stdout, _ := mustRun(t, "jobs", "--server", f.addr)
	lines := strings.Split(strings.TrimSuffix(stdout, "\n"), "\n")
	if len(lines) != 6 || !regexp.MustCompile(`^ID +TASK +STATE +CREATED +OWNER +PROGRESS$`).MatchString(lines[0]) {
		t.Fatalf("jobs table:\n%s", stdout)
	}
	for i, want := range []string{`^j4 +thermo +CANCELLED +2026-.* tester +-$`, `^j3 +thermo +QUEUED `, `^j2 +thermo +RUNNING .* +50% diagonalize sectors, eta 12s$`,
		`^j1 +thermo +FAILED .*RESOURCE_EXHAUSTED$`, `^j0 +thermo +SUCCEEDED .* done$`} {
		if !regexp.MustCompile(want).MatchString(lines[i+1]) {
			t.Errorf("jobs row %d %q does not match %s", i+1, lines[i+1], want)
		}
	}

	stdout, _ = mustRun(t, "jobs", "--state", "Running", "--server", f.addr)
	if strings.Count(stdout, "\n") != 2 || !strings.Contains(stdout, "j2 ") {
		t.Errorf("jobs --state running:\n%s", stdout)
	}

	stdout, _ = mustRun(t, "jobs", "--json", "--server", f.addr)
	var resp frustumv1.ListJobsResponse
	if err := protojson.Unmarshal([]byte(stdout), &resp); err != nil || len(resp.GetJobs()) != 5 {
		t.Errorf("jobs --json: %v, %d jobs\n%s", err, len(resp.GetJobs()), stdout)
	}
	if !strings.Contains(stdout, `"state": "RUNNING"`) && !strings.Contains(stdout, `"state":  "RUNNING"`) {
		t.Errorf("jobs --json does not name the states:\n%s", stdout)
	}
}

func TestWatchAndCancel(t *testing.T) {
	f := startFake(t)
	f.hold = true
	name := strings.TrimSpace(mustRunOut(t, "submit", "thermo", "--cluster", dimerFile, "--temps", "1,2", "--server", f.addr))

	// watch in the background; cancel ends it with exit 1.
	type result struct {
		code           int
		stdout, stderr string
	}
	done := make(chan result, 1)
	go func() {
		code, stdout, stderr := frustum("watch", name, "--server", f.addr)
		done <- result{code, stdout, stderr}
	}()
	waitFor(t, func() bool {
		f.mu.Lock()
		defer f.mu.Unlock()
		return slices.Contains(f.sent, "RUNNING wait for the test")
	})
	stdout, _ := mustRun(t, "cancel", name, "--server", f.addr)
	if stdout != name+": CANCELLED\n" {
		t.Errorf("cancel: %q", stdout)
	}
	r := <-done
	if r.code != 1 || !strings.Contains(r.stdout, "RUNNING wait for the test 1/4 25.0% eta 1m15s\n") || !strings.HasSuffix(r.stdout, "CANCELLED wait for the test 1/4 25.0% eta 1m15s\n") {
		t.Errorf("watch of a cancelled job: exit %d, stdout %q", r.code, r.stdout)
	}
	if !strings.Contains(r.stderr, "frustum watch: "+name+" was cancelled: CANCELLED: cancelled by the owner") {
		t.Errorf("watch stderr %q", r.stderr)
	}
	checkOneLine(t, []string{"watch"}, r.stderr)

	// Cancelling again, or deleting a running job, is FAILED_PRECONDITION.
	code, _, stderr := frustum("cancel", name, "--server", f.addr)
	if code != 1 || !strings.Contains(stderr, "frustum cancel: FAILED_PRECONDITION: ") {
		t.Errorf("second cancel: exit %d, %q", code, stderr)
	}
	other := strings.TrimSpace(mustRunOut(t, "submit", "thermo", "--cluster", dimerFile, "--temps", "1,2", "--server", f.addr))
	code, _, stderr = frustum("delete", other, "--server", f.addr)
	if code != 1 || !strings.Contains(stderr, "FAILED_PRECONDITION: "+other+" is RUNNING: cancel it first") {
		t.Errorf("delete of a running job: exit %d, %q", code, stderr)
	}
	close(f.release)
	mustRun(t, "watch", other, "--server", f.addr)
	if f.snapshot(other).GetState() != frustumv1.Job_SUCCEEDED {
		t.Errorf("released job: %v", f.snapshot(other))
	}
}

// TestInterruptCancelsTheJob interrupts a task run with --server: the job
// is cancelled on the server and the command says so.
func TestInterruptCancelsTheJob(t *testing.T) {
	f := startFake(t)
	f.hold = true
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	done := make(chan int, 1)
	var stdout, stderr strings.Builder
	go func() {
		done <- runContext(ctx, []string{"thermo", "--cluster", dimerFile, "--temps", "1,2", "--server", f.addr}, &stdout, &stderr)
	}()
	waitFor(t, func() bool {
		f.mu.Lock()
		defer f.mu.Unlock()
		return slices.Contains(f.sent, "RUNNING wait for the test")
	})
	cancel()
	if code := <-done; code != 1 || stdout.String() != "" {
		t.Errorf("interrupted: exit %d, stdout %q", code, stdout.String())
	}
	if !strings.Contains(stderr.String(), "interrupted: jobs/0001 cancelled on the server") {
		t.Errorf("stderr %q", stderr.String())
	}
	if s := f.snapshot("jobs/0001").GetState(); s != frustumv1.Job_CANCELLED {
		t.Errorf("job state %v after the interrupt, want CANCELLED", s)
	}
}

func TestServerErrors(t *testing.T) {
	f := startFake(t)
	// A job that fails: the job's code, message and field.
	code, stdout, stderr := frustum("thermo", "--cluster", dimerFile, "--temps", "-1,2", "--server", f.addr)
	if code != 1 || stdout != "" {
		t.Errorf("failed job: exit %d, stdout %q", code, stdout)
	}
	for _, w := range []string{"frustum thermo: jobs/0001 failed: INVALID_ARGUMENT: ", "temperatures[0]", "(fields: spec.thermo.temperatures[0])"} {
		if !strings.Contains(stderr, w) {
			t.Errorf("failed job: stderr %q lacks %q", stderr, w)
		}
	}
	checkOneLine(t, []string{"thermo"}, stderr)

	// A refused create: the status code, message and field paths.
	st, _ := status.New(codes.InvalidArgument, "the cluster is invalid").WithDetails(&errdetails.BadRequest{FieldViolations: []*errdetails.BadRequest_FieldViolation{
		{Field: "spec.cluster.sites[1].spin", Description: "not a multiple of 1/2"},
		{Field: "spec.cluster.bonds[0].b", Description: "unknown site"},
	}})
	f.refuse = st.Err()
	for _, args := range [][]string{
		{"spectrum", "--cluster", dimerFile, "--server", f.addr},
		{"submit", "spectrum", "--cluster", dimerFile, "--server", f.addr},
	} {
		code, stdout, stderr = frustum(args...)
		want := "frustum " + args[0] + ": INVALID_ARGUMENT: the cluster is invalid (fields: spec.cluster.sites[1].spin, spec.cluster.bonds[0].b)\n"
		if code != 1 || stdout != "" || stderr != want {
			t.Errorf("frustum %s: exit %d, stdout %q, stderr %q; want %q", strings.Join(args, " "), code, stdout, stderr, want)
		}
	}
	f.refuse = status.Error(codes.ResourceExhausted, "the task needs 12 GiB, the server allows 4 GiB")
	code, _, stderr = frustum("magnetization", "--cluster", dimerFile, "--temps", "1", "--fields", "1", "--server", f.addr)
	if code != 1 || stderr != "frustum magnetization: RESOURCE_EXHAUSTED: the task needs 12 GiB, the server allows 4 GiB\n" {
		t.Errorf("refused: exit %d, %q", code, stderr)
	}

	// No server at the address.
	lis, _ := net.Listen("tcp", "127.0.0.1:0")
	gone := lis.Addr().String()
	lis.Close()
	for _, args := range [][]string{{"jobs", "--server", gone}, {"spectrum", "--cluster", dimerFile, "--server", gone}} {
		code, stdout, stderr = frustum(args...)
		if code != 1 || stdout != "" || !strings.Contains(stderr, "UNAVAILABLE: ") || !strings.Contains(stderr, "is frustumd running at "+gone) {
			t.Errorf("frustum %s: exit %d, stdout %q, stderr %q", strings.Join(args, " "), code, stdout, stderr)
		}
		checkOneLine(t, args, stderr)
	}
}

func TestServerFlagsAndEnvironment(t *testing.T) {
	f := startFake(t)
	dir := t.TempDir()
	token := filepath.Join(dir, "token")
	os.WriteFile(token, []byte("tok-123\n"), 0o600)
	mustRun(t, "spectrum", "--cluster", dimerFile, "--server", f.addr, "--token-file", token)
	// The job commands take the server and token file from the environment.
	t.Setenv(envServer, f.addr)
	t.Setenv(envTokenFile, token)
	mustRun(t, "jobs")
	mustRun(t, "submit", "spectrum", "--cluster", dimerFile)
	f.mu.Lock()
	auth := slices.Clone(f.auth)
	f.mu.Unlock()
	if len(auth) < 3 || slices.ContainsFunc(auth, func(a string) bool { return a != "Bearer tok-123" }) {
		t.Errorf("authorization metadata %q, want Bearer tok-123 on every call", auth)
	}
	// A task runs in-process without --server, whatever the environment.
	count := func() int { f.mu.Lock(); defer f.mu.Unlock(); return len(f.order) }
	before := count()
	mustRun(t, "spectrum", "--cluster", dimerFile)
	if count() != before {
		t.Error("spectrum without --server went to the server")
	}
}

func TestJobCommandUsageErrors(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"spectrum", "--cluster", dimerFile, "--token-file", "t"}, "--token-file and --tls-ca need --server"},
		{[]string{"thermo", "--cluster", dimerFile, "--temps", "1", "--tls-ca", "ca.pem"}, "need --server"},
		{[]string{"spectrum", "--cluster", dimerFile, "--server", "127.0.0.1:1", "--max-memory", "1GiB"}, "--max-memory limits in-process runs"},
		{[]string{"spectrum", "--cluster", dimerFile, "--server", "nowhere"}, `--server "nowhere": give HOST:PORT`},
		{[]string{"jobs", "--state", "sleeping"}, `--state "sleeping": give one of queued, running, succeeded, failed, cancelled`},
		{[]string{"jobs", "extra"}, `unexpected argument "extra"`},
		{[]string{"job"}, "give the job ID"},
		{[]string{"job", "jobs/"}, "give the job ID"},
		{[]string{"job", "a", "b"}, `unexpected argument "b": give one job ID`},
		{[]string{"job", "a", "--bogus"}, "unknown flag --bogus"},
		{[]string{"watch"}, "give the job ID"},
		{[]string{"watch", "a", "--json"}, "unknown flag --json"},
		{[]string{"cancel"}, "give the job ID"},
		{[]string{"delete", "a", "b"}, `unexpected argument "b"`},
		{[]string{"submit"}, "give the task"},
		{[]string{"submit", "diagonalize"}, `unknown task "diagonalize"`},
		{[]string{"submit", "--cluster", dimerFile}, "give the task before the flag --cluster"},
		{[]string{"submit", "spectrum", "--json"}, "unknown flag --json"},
		{[]string{"submit", "thermo", "--cluster", dimerFile}, "--temps GRID is required"},
		{[]string{"submit", "spectrum"}, "--cluster FILE is required"},
	} {
		code, stdout, stderr := frustum(tc.args...)
		if code != 2 || stdout != "" || !strings.Contains(stderr, tc.want) {
			t.Errorf("frustum %s: exit %d, stdout %q, stderr %q; want 2 and %q", strings.Join(tc.args, " "), code, stdout, stderr, tc.want)
		}
		checkOneLine(t, tc.args, stderr)
	}
}

func TestJobCommandsHelp(t *testing.T) {
	for _, args := range [][]string{
		{"submit", "--help"}, {"submit", "spectrum", "--help"}, {"submit", "magnetization", "-h"},
		{"jobs", "--help"}, {"job", "--help"}, {"job", "abc", "--help"}, {"watch", "-h"}, {"cancel", "--help"}, {"delete", "--help"},
	} {
		stdout, stderr := mustRun(t, args...)
		for _, w := range []string{"Usage: frustum " + args[0], "--server HOST:PORT", "--token-file FILE", "--tls-ca FILE", "frustumd --help", "Example:\n  frustum " + args[0]} {
			if !strings.Contains(stdout, w) || stderr != "" {
				t.Errorf("frustum %s: help lacks %q:\n%s", strings.Join(args, " "), w, stdout)
			}
		}
	}
	stdout, _ := mustRun(t, "submit", "thermo", "--help")
	for _, w := range []string{"Usage: frustum submit thermo --cluster FILE --temps GRID", "--request-id ID", "\n  --temps GRID "} {
		if !strings.Contains(stdout, w) {
			t.Errorf("submit thermo --help lacks %q:\n%s", w, stdout)
		}
	}
}

func TestProgressLine(t *testing.T) {
	for _, tc := range []struct {
		job  *frustumv1.Job
		want string
	}{
		{&frustumv1.Job{State: frustumv1.Job_QUEUED}, "QUEUED - 0/0 0.0% eta -"},
		{&frustumv1.Job{State: frustumv1.Job_RUNNING, Progress: &frustumv1.JobProgress{Stage: "diagonalize sectors", Done: 7, Total: 20, Fraction: 0.3512, SecondsLeft: proto.Float64(3725.4)}},
			"RUNNING diagonalize sectors 7/20 35.1% eta 1h2m5s"},
	} {
		if got := progressLine(tc.job); got != tc.want {
			t.Errorf("progressLine = %q, want %q", got, tc.want)
		}
	}
	var b strings.Builder
	draw := barProgress(&b)
	draw(&frustumv1.Job{State: frustumv1.Job_RUNNING, Progress: &frustumv1.JobProgress{Stage: "thermal sums", Done: 1, Total: 2, Fraction: 0.5}})
	draw(&frustumv1.Job{State: frustumv1.Job_SUCCEEDED, Progress: &frustumv1.JobProgress{Fraction: 1}})
	want := "\r\033[KRUNNING   [###############...............]  50.0%  thermal sums 1/2" +
		"\r\033[KSUCCEEDED [##############################] 100.0%\n"
	if b.String() != want {
		t.Errorf("bar %q, want %q", b.String(), want)
	}
}

func mustRunOut(t *testing.T, args ...string) string {
	t.Helper()
	stdout, _ := mustRun(t, args...)
	return stdout
}

// waitFor polls cond for up to ten seconds.
func waitFor(t *testing.T, cond func() bool) {
	t.Helper()
	for range 1000 {
		if cond() {
			return
		}
		time.Sleep(10 * time.Millisecond)
	}
	t.Fatal("timed out")
}
