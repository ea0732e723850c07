package server

import (
	"bytes"
	"context"
	"errors"
	"io"
	"slices"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"

	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// TestResultsEqualInProcess runs each task through the service and checks
// that the result, as protojson, is byte for byte the in-process result of
// the same spec, in the job and through GetJobResult.
func TestResultsEqualInProcess(t *testing.T) {
	ts := start(t, Config{Workers: 2}, func(s *Server) { s.chunkBytes = 100 })
	ctx := tctx(t, "")
	opt := ed.Options{Workers: ts.cfg.engineWorkers()}
	sp := &frustumv1.SpectrumParameters{Field: []float64{0, 0, 3}}
	th := &frustumv1.ThermoParameters{Temperatures: []float64{0.5, 1, 2, 5, 10, 20}, Field: []float64{0.5, 0, 1}}
	mp := &frustumv1.MagnetizationParameters{Temperatures: []float64{0, 2, 5}, Fields: fields(12), Direction: []float64{1, 1, 0}}
	c := dmChain(5, 10)
	wantSp, err := tasks.Spectrum(context.Background(), c, sp, opt)
	if err != nil {
		t.Fatal(err)
	}
	wantTh, err := tasks.Thermo(context.Background(), c, th, opt)
	if err != nil {
		t.Fatal(err)
	}
	wantM, err := tasks.Magnetization(context.Background(), c, mp, opt)
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		spec   *frustumv1.JobSpec
		want   proto.Message
		result func(*frustumv1.Job) proto.Message
	}{
		{&frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Spectrum{Spectrum: sp}}, wantSp,
			func(j *frustumv1.Job) proto.Message { return j.GetSpectrumResult() }},
		{&frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Thermo{Thermo: th}}, wantTh,
			func(j *frustumv1.Job) proto.Message { return j.GetThermoResult() }},
		{&frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Magnetization{Magnetization: mp}}, wantM,
			func(j *frustumv1.Job) proto.Message { return j.GetMagnetizationResult() }},
	} {
		task := tasks.TaskName(tc.spec)
		job, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: tc.spec})
		if err != nil {
			t.Fatalf("%s: CreateJob: %v", task, err)
		}
		if !namePattern.MatchString(job.GetName()) || job.GetOwner() != LocalUser || job.GetTask() != task ||
			job.GetPlan().GetMemoryBytes() <= 0 || len(job.GetSpecHash()) != 64 || job.GetCreateTime() == nil {
			t.Errorf("%s: created job incomplete: %v", task, job)
		}
		msgs := watchUntil(t, ts.client, ctx, job.GetName())
		last := msgs[len(msgs)-1]
		if last.GetState() != frustumv1.Job_SUCCEEDED || last.GetSpec() != nil || last.GetResult() != nil {
			t.Fatalf("%s: watch ended with %v", task, last)
		}
		got, err := ts.client.GetJob(ctx, &frustumv1.GetJobRequest{Name: job.GetName()})
		if err != nil {
			t.Fatal(err)
		}
		if got.GetAttempts() != 1 || got.GetStartTime() == nil || got.GetEndTime() == nil || got.GetFromCache() ||
			!proto.Equal(got.GetSpec(), tc.spec) || got.GetProgress().GetFraction() != 1 {
			t.Errorf("%s: finished job: %v", task, got)
		}
		gotJSON, err := tasks.MarshalJSON(tc.result(got))
		if err != nil {
			t.Fatal(err)
		}
		wantJSON, err := tasks.MarshalJSON(tc.want)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(gotJSON, wantJSON) {
			t.Errorf("%s: result through the service differs from the in-process result:\n%s\nwant\n%s", task, gotJSON, wantJSON)
		}

		// GetJobResult: chunks of the serialized message.
		stream, err := ts.client.GetJobResult(ctx, &frustumv1.GetJobResultRequest{Name: job.GetName()})
		if err != nil {
			t.Fatal(err)
		}
		var data []byte
		chunks := 0
		for {
			ch, err := stream.Recv()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatal(err)
			}
			if ch.GetOffset() != int64(len(data)) || ch.GetTotalSize() != got.GetResultSizeBytes() ||
				ch.GetType() != string(tc.want.ProtoReflect().Descriptor().FullName()) {
				t.Fatalf("%s: chunk %d: offset %d type %q total %d (have %d bytes, size %d)", task, chunks,
					ch.GetOffset(), ch.GetType(), ch.GetTotalSize(), len(data), got.GetResultSizeBytes())
			}
			data = append(data, ch.GetData()...)
			chunks++
		}
		if int64(len(data)) != got.GetResultSizeBytes() || chunks < 2 {
			t.Errorf("%s: %d bytes in %d chunks, result_size_bytes %d", task, len(data), chunks, got.GetResultSizeBytes())
		}
		back := tc.want.ProtoReflect().New().Interface()
		if err := proto.Unmarshal(data, back); err != nil {
			t.Fatal(err)
		}
		if b, _ := tasks.MarshalJSON(back); !bytes.Equal(b, wantJSON) {
			t.Errorf("%s: GetJobResult differs from the in-process result", task)
		}
	}
}

// TestLargeResultLeftOut checks that a result over the inline limit is left
// out of GetJob and comes through GetJobResult.
func TestLargeResultLeftOut(t *testing.T) {
	ts := start(t, Config{Workers: 1}, func(s *Server) { s.inlineResultBytes = 64 })
	ctx := tctx(t, "")
	job, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(10)})
	if err != nil {
		t.Fatal(err)
	}
	watchUntil(t, ts.client, ctx, job.GetName())
	got, err := ts.client.GetJob(ctx, &frustumv1.GetJobRequest{Name: job.GetName()})
	if err != nil {
		t.Fatal(err)
	}
	if got.GetState() != frustumv1.Job_SUCCEEDED || got.GetResult() != nil || got.GetResultSizeBytes() <= 64 {
		t.Errorf("large result: state %v, result %v, size %d", got.GetState(), got.GetResult() != nil, got.GetResultSizeBytes())
	}
}

func TestRequestIDAndCache(t *testing.T) {
	ts := start(t, Config{Workers: 1}, nil)
	ctx := tctx(t, "")
	spec := thermoSpec(7)
	first, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec, RequestId: "retry-1"})
	if err != nil {
		t.Fatal(err)
	}
	again, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec, RequestId: "retry-1"})
	if err != nil {
		t.Fatal(err)
	}
	if again.GetName() != first.GetName() {
		t.Errorf("a repeated request_id created %s beside %s", again.GetName(), first.GetName())
	}
	watchUntil(t, ts.client, ctx, first.GetName())
	list, err := ts.client.ListJobs(ctx, &frustumv1.ListJobsRequest{})
	if err != nil {
		t.Fatal(err)
	}
	if len(list.GetJobs()) != 1 {
		t.Errorf("%d jobs listed after a retried create, want 1", len(list.GetJobs()))
	}
	// Still the same job after it finished.
	again, err = ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec, RequestId: "retry-1"})
	if err != nil || again.GetName() != first.GetName() || again.GetState() != frustumv1.Job_SUCCEEDED {
		t.Errorf("retry after the end: %v, %v", again, err)
	}
	// The same request id with another spec is refused, naming the field.
	_, err = ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(8), RequestId: "retry-1"})
	wantCode(t, "reused request_id", err, codes.AlreadyExists)
	if p := fieldPaths(err); !slices.Equal(p, []string{"request_id"}) {
		t.Errorf("reused request_id names %q", p)
	}
	done, err := ts.client.GetJob(ctx, &frustumv1.GetJobRequest{Name: first.GetName()})
	if err != nil {
		t.Fatal(err)
	}

	// The same spec again, without a request id: answered from the store.
	t0 := time.Now()
	cached, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec})
	if err != nil {
		t.Fatal(err)
	}
	if cached.GetName() == first.GetName() || cached.GetState() != frustumv1.Job_SUCCEEDED || !cached.GetFromCache() ||
		cached.GetCachedFrom() != first.GetName() || cached.GetSpecHash() != done.GetSpecHash() || cached.GetAttempts() != 0 {
		t.Errorf("identical spec: %v", cached)
	}
	if !proto.Equal(cached.GetThermoResult(), done.GetThermoResult()) || cached.GetResultSizeBytes() != done.GetResultSizeBytes() {
		t.Error("the cached result differs from the first job's")
	}
	t.Logf("answered from cache in %v", time.Since(t0))
	// A different request id with the same spec is another job, also cached.
	other, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec, RequestId: "retry-2"})
	if err != nil || other.GetName() == first.GetName() || !other.GetFromCache() {
		t.Errorf("another request id: %v, %v", other, err)
	}
	// A spec differing in one number is not.
	fresh, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(7.5)})
	if err != nil || fresh.GetFromCache() || fresh.GetSpecHash() == done.GetSpecHash() {
		t.Errorf("a different spec: %v, %v", fresh, err)
	}
	long := string(bytes.Repeat([]byte("x"), MaxRequestIDLength+1))
	_, err = ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec, RequestId: long})
	wantCode(t, "overlong request_id", err, codes.InvalidArgument)
	if p := fieldPaths(err); !slices.Equal(p, []string{"request_id"}) {
		t.Errorf("overlong request_id names %q", p)
	}
}

// TestCancelRunning cancels a job that would run for seconds: it is
// CANCELLED at once and the engine frees its slot within a second.
func TestCancelRunning(t *testing.T) {
	ts := start(t, Config{Workers: 1}, nil)
	ctx := tctx(t, "")
	job, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: slowSpec(40, 10)})
	if err != nil {
		t.Fatal(err)
	}
	// Wait for the first progress report, so that the engine is working.
	stream, err := ts.client.WatchJob(ctx, &frustumv1.WatchJobRequest{Name: job.GetName()})
	if err != nil {
		t.Fatal(err)
	}
	for {
		j, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if j.GetProgress().GetDone() > 0 {
			if j.GetProgress().SecondsLeft == nil || j.GetProgress().GetTotal() != 40 || j.GetProgress().GetFraction() <= 0 {
				t.Errorf("progress: %v", j.GetProgress())
			}
			break
		}
	}
	queuedBehind, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(3)})
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Now()
	cancelled, err := ts.client.CancelJob(ctx, &frustumv1.CancelJobRequest{Name: job.GetName()})
	if err != nil {
		t.Fatal(err)
	}
	if cancelled.GetState() != frustumv1.Job_CANCELLED || cancelled.GetEndTime() == nil || cancelled.GetError().GetCode() != "CANCELLED" {
		t.Errorf("CancelJob returned %v", cancelled)
	}
	// The watch sees CANCELLED and ends.
	for {
		j, err := stream.Recv()
		if err != nil {
			t.Fatalf("watch after cancel: %v", err)
		}
		if terminal(j.GetState()) {
			if j.GetState() != frustumv1.Job_CANCELLED {
				t.Errorf("watch ended in %v", j.GetState())
			}
			break
		}
	}
	if _, err := stream.Recv(); !errors.Is(err, io.EOF) {
		t.Errorf("watch did not end after CANCELLED: %v", err)
	}
	if d := time.Since(t0); d > time.Second {
		t.Errorf("CANCELLED after %v, want within a second", d)
	}
	// The engine stops and frees the only slot: the job queued behind runs.
	watchUntil(t, ts.client, ctx, queuedBehind.GetName())
	if d := time.Since(t0); d > 1500*time.Millisecond {
		t.Errorf("the next job finished %v after the cancel: the engine did not stop within a second", d)
	}
	t.Logf("cancel: CANCELLED and next job done %v after CancelJob", time.Since(t0))
	got, _ := ts.client.GetJob(ctx, &frustumv1.GetJobRequest{Name: job.GetName()})
	if got.GetState() != frustumv1.Job_CANCELLED || got.GetResult() != nil {
		t.Errorf("cancelled job later: %v", got.GetState())
	}
	_, err = ts.client.CancelJob(ctx, &frustumv1.CancelJobRequest{Name: job.GetName()})
	wantCode(t, "cancel a cancelled job", err, codes.FailedPrecondition)
	_, err = ts.client.CancelJob(ctx, &frustumv1.CancelJobRequest{Name: queuedBehind.GetName()})
	wantCode(t, "cancel a succeeded job", err, codes.FailedPrecondition)
	stream2, err := ts.client.GetJobResult(ctx, &frustumv1.GetJobResultRequest{Name: job.GetName()})
	if err == nil {
		_, err = stream2.Recv()
	}
	wantCode(t, "result of a cancelled job", err, codes.FailedPrecondition)
}

func TestCancelQueuedAndDelete(t *testing.T) {
	f := &fakeTask{step: 20 * time.Millisecond, steps: 50}
	ts := start(t, Config{Workers: 1}, func(s *Server) { s.runTask = f.run })
	ctx := tctx(t, "")
	running, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(1)})
	if err != nil {
		t.Fatal(err)
	}
	waitFor(t, 5*time.Second, "the first job to start", func() bool { return len(f.started()) == 1 })
	queuedJob, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(2)})
	if err != nil {
		t.Fatal(err)
	}
	_, err = ts.client.DeleteJob(ctx, &frustumv1.DeleteJobRequest{Name: queuedJob.GetName()})
	wantCode(t, "delete a queued job", err, codes.FailedPrecondition)
	_, err = ts.client.DeleteJob(ctx, &frustumv1.DeleteJobRequest{Name: running.GetName()})
	wantCode(t, "delete a running job", err, codes.FailedPrecondition)
	c, err := ts.client.CancelJob(ctx, &frustumv1.CancelJobRequest{Name: queuedJob.GetName()})
	if err != nil || c.GetState() != frustumv1.Job_CANCELLED || c.GetStartTime() != nil {
		t.Fatalf("cancel a queued job: %v, %v", c, err)
	}
	if _, err := ts.client.DeleteJob(ctx, &frustumv1.DeleteJobRequest{Name: queuedJob.GetName()}); err != nil {
		t.Errorf("delete a cancelled job: %v", err)
	}
	_, err = ts.client.GetJob(ctx, &frustumv1.GetJobRequest{Name: queuedJob.GetName()})
	wantCode(t, "get a deleted job", err, codes.NotFound)
	_, err = ts.client.DeleteJob(ctx, &frustumv1.DeleteJobRequest{Name: queuedJob.GetName()})
	wantCode(t, "delete a deleted job", err, codes.NotFound)
	watchUntil(t, ts.client, ctx, running.GetName())
	if _, err := ts.client.DeleteJob(ctx, &frustumv1.DeleteJobRequest{Name: running.GetName()}); err != nil {
		t.Errorf("delete a succeeded job: %v", err)
	}
	stream, err := ts.client.GetJobResult(ctx, &frustumv1.GetJobResultRequest{Name: running.GetName()})
	if err == nil {
		_, err = stream.Recv()
	}
	wantCode(t, "result of a deleted job", err, codes.NotFound)
	// The cancelled queued job never ran.
	if got := f.started(); len(got) != 1 {
		t.Errorf("started %q, want only the first job", got)
	}

	for _, name := range []string{"", "jobs/", "jobs/123", "jobs/0123456789abcdef0123456g", "0123456789abcdef01234567", "jobs/0123456789ABCDEF01234567"} {
		_, err := ts.client.GetJob(ctx, &frustumv1.GetJobRequest{Name: name})
		wantCode(t, "GetJob "+name, err, codes.InvalidArgument)
		if p := fieldPaths(err); !slices.Equal(p, []string{"name"}) {
			t.Errorf("GetJob %q names the fields %q", name, p)
		}
		_, err = ts.client.CancelJob(ctx, &frustumv1.CancelJobRequest{Name: name})
		wantCode(t, "CancelJob "+name, err, codes.InvalidArgument)
	}
	_, err = ts.client.GetJob(ctx, &frustumv1.GetJobRequest{Name: "jobs/0123456789abcdef01234567"})
	wantCode(t, "GetJob of an unknown id", err, codes.NotFound)
	if ei := errorInfo(err); ei.GetReason() != "JOB_NOT_FOUND" || ei.GetDomain() != ErrorDomain {
		t.Errorf("NOT_FOUND error info: %v", ei)
	}
}

func TestPagingAndStateFilter(t *testing.T) {
	f := &fakeTask{step: 10 * time.Millisecond, steps: 300}
	ts := start(t, Config{Workers: 1, Grace: 50 * time.Millisecond}, func(s *Server) { s.runTask = f.run })
	ctx := tctx(t, "")
	var names []string
	for i := range 8 {
		j, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(float64(i + 1))})
		if err != nil {
			t.Fatal(err)
		}
		names = append(names, j.GetName())
	}
	waitFor(t, 5*time.Second, "the first job to start", func() bool { return len(f.started()) == 1 })
	// Cancel three queued jobs: the first still runs, four stay queued.
	cancelled := []string{names[2], names[4], names[7]}
	for _, n := range cancelled {
		if _, err := ts.client.CancelJob(ctx, &frustumv1.CancelJobRequest{Name: n}); err != nil {
			t.Fatal(err)
		}
	}

	var listed []string
	token := ""
	pages := 0
	for {
		resp, err := ts.client.ListJobs(ctx, &frustumv1.ListJobsRequest{PageSize: 3, PageToken: token})
		if err != nil {
			t.Fatal(err)
		}
		pages++
		if len(resp.GetJobs()) > 3 {
			t.Errorf("page of %d jobs, want at most 3", len(resp.GetJobs()))
		}
		for _, j := range resp.GetJobs() {
			listed = append(listed, j.GetName())
			if j.GetSpec() != nil || j.GetResult() != nil {
				t.Errorf("listed job %s carries its spec or result", j.GetName())
			}
		}
		if token = resp.GetNextPageToken(); token == "" {
			break
		}
		if pages > 10 {
			t.Fatal("paging does not end")
		}
	}
	want := slices.Clone(names)
	slices.Reverse(want) // newest first
	if !slices.Equal(listed, want) || pages != 3 {
		t.Errorf("listed %d pages:\n%q\nwant newest first\n%q", pages, listed, want)
	}

	byState := func(s frustumv1.Job_State) []string {
		resp, err := ts.client.ListJobs(ctx, &frustumv1.ListJobsRequest{State: s, PageSize: 100})
		if err != nil {
			t.Fatal(err)
		}
		var out []string
		for _, j := range resp.GetJobs() {
			if j.GetState() != s {
				t.Errorf("state filter %v listed a %v job", s, j.GetState())
			}
			out = append(out, j.GetName())
		}
		slices.Sort(out)
		return out
	}
	slices.Sort(cancelled)
	if got := byState(frustumv1.Job_CANCELLED); !slices.Equal(got, cancelled) {
		t.Errorf("CANCELLED: %q, want %q", got, cancelled)
	}
	if got := byState(frustumv1.Job_RUNNING); !slices.Equal(got, names[:1]) {
		t.Errorf("RUNNING: %q, want %q", got, names[:1])
	}
	if got := byState(frustumv1.Job_QUEUED); len(got) != 4 {
		t.Errorf("QUEUED: %q, want 4 jobs", got)
	}
	if got := byState(frustumv1.Job_SUCCEEDED); len(got) != 0 {
		t.Errorf("SUCCEEDED: %q, want none", got)
	}
	// A running job listed shows its progress.
	resp, _ := ts.client.ListJobs(ctx, &frustumv1.ListJobsRequest{State: frustumv1.Job_RUNNING})
	waitFor(t, 2*time.Second, "progress", func() bool {
		resp, _ = ts.client.ListJobs(ctx, &frustumv1.ListJobsRequest{State: frustumv1.Job_RUNNING})
		return len(resp.GetJobs()) == 1 && resp.GetJobs()[0].GetProgress().GetDone() > 0
	})

	_, err := ts.client.ListJobs(ctx, &frustumv1.ListJobsRequest{PageToken: "not a token"})
	wantCode(t, "bad page token", err, codes.InvalidArgument)
	if p := fieldPaths(err); !slices.Equal(p, []string{"page_token"}) {
		t.Errorf("bad page token names %q", p)
	}
	_, err = ts.client.ListJobs(ctx, &frustumv1.ListJobsRequest{PageSize: -1})
	wantCode(t, "negative page size", err, codes.InvalidArgument)
	_, err = ts.client.ListJobs(ctx, &frustumv1.ListJobsRequest{State: 42})
	wantCode(t, "unknown state", err, codes.InvalidArgument)
}

// TestWatchCoalescesProgress checks that a job reporting progress a few
// hundred times a second is watched at about 10 messages a second, with
// every state change.
func TestWatchCoalescesProgress(t *testing.T) {
	f := &fakeTask{step: 2 * time.Millisecond, steps: 500}
	ts := start(t, Config{Workers: 1}, func(s *Server) { s.runTask = f.run })
	ctx := tctx(t, "")
	job, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(1)})
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Now()
	msgs := watchUntil(t, ts.client, ctx, job.GetName())
	d := time.Since(t0)
	var states []frustumv1.Job_State
	progress := 0
	lastFraction := 0.0
	for _, m := range msgs {
		if len(states) == 0 || states[len(states)-1] != m.GetState() {
			states = append(states, m.GetState())
		}
		if m.GetState() == frustumv1.Job_RUNNING && m.GetProgress() != nil {
			progress++
			if f := m.GetProgress().GetFraction(); f < lastFraction {
				t.Errorf("fraction went back from %v to %v", lastFraction, f)
			} else {
				lastFraction = f
			}
		}
	}
	if want := []frustumv1.Job_State{frustumv1.Job_QUEUED, frustumv1.Job_RUNNING, frustumv1.Job_SUCCEEDED}; !slices.Equal(states, want) &&
		!slices.Equal(states, want[1:]) {
		t.Errorf("states watched %v, want %v", states, want)
	}
	if limit := int(d.Seconds()*10) + 3; progress > limit || progress < 2 {
		t.Errorf("%d progress messages in %v, want a few and at most %d", progress, d, limit)
	}
	t.Logf("%d messages, %d with progress, in %v", len(msgs), progress, d)
}

// TestPanicFailsJob checks that a panic of the engine fails that job with
// INTERNAL and the server goes on.
func TestPanicFailsJob(t *testing.T) {
	ts := start(t, Config{Workers: 1}, func(s *Server) {
		s.runTask = func(ctx context.Context, spec *frustumv1.JobSpec, opt ed.Options) (proto.Message, error) {
			if spec.GetCluster().GetName() == "dimer J=13" {
				var m map[string]int
				m["boom"]++ // nil map: panics
			}
			return tasks.Run(ctx, spec, opt)
		}
	})
	ctx := tctx(t, "")
	bad, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(13)})
	if err != nil {
		t.Fatal(err)
	}
	msgs := watchUntil(t, ts.client, ctx, bad.GetName())
	last := msgs[len(msgs)-1]
	if last.GetState() != frustumv1.Job_FAILED || last.GetError().GetCode() != "INTERNAL" || last.GetEndTime() == nil {
		t.Errorf("panicking job ended %v", last)
	}
	good, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(14)})
	if err != nil {
		t.Fatal(err)
	}
	if msgs := watchUntil(t, ts.client, ctx, good.GetName()); msgs[len(msgs)-1].GetState() != frustumv1.Job_SUCCEEDED {
		t.Errorf("the next job ended %v", msgs[len(msgs)-1])
	}
}
