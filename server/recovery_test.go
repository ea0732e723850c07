package server

import (
	"context"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	frustumv1 "frustum/proto/frustum/v1"
)

// runCounter counts the attempts started per job, across servers.
type runCounter struct {
	mu   sync.Mutex
	runs map[string]int
}

func (c *runCounter) hook(s *Server) {
	s.testHookRun = func(name string) {
		c.mu.Lock()
		defer c.mu.Unlock()
		if c.runs == nil {
			c.runs = map[string]int{}
		}
		c.runs[name]++
	}
}

func (c *runCounter) count(name string) int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.runs[name]
}

func (c *runCounter) total() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	n := 0
	for _, v := range c.runs {
		n += v
	}
	return n
}

// TestRestartRecovery shuts a server down while a job runs, with a grace
// period too short for it, and starts a new server on the same data
// directory: every job finishes exactly once, the interrupted one on its
// second attempt, and a third start runs nothing.
func TestRestartRecovery(t *testing.T) {
	dir := t.TempDir()
	var runs runCounter
	cfg := Config{DataDir: dir, Workers: 1, Grace: 300 * time.Millisecond}
	s1 := start(t, cfg, runs.hook)
	ctx := tctx(t, "")
	var names []string
	for i := range 3 {
		// The first runs for a few seconds, well past the grace period.
		n := 4
		if i == 0 {
			n = 16
		}
		j, err := s1.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: slowSpec(n, float64(i+1))})
		if err != nil {
			t.Fatal(err)
		}
		names = append(names, j.GetName())
	}
	stream, err := s1.client.WatchJob(ctx, &frustumv1.WatchJobRequest{Name: names[0]})
	if err != nil {
		t.Fatal(err)
	}
	for {
		j, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if j.GetState() == frustumv1.Job_RUNNING && j.GetProgress().GetDone() > 0 {
			break
		}
	}

	stopped := make(chan error, 1)
	go func() { stopped <- s1.Shutdown(context.Background()) }()
	// During the grace period: NOT_SERVING, and no new jobs.
	health := healthpb.NewHealthClient(s1.conn)
	waitFor(t, 2*time.Second, "health NOT_SERVING", func() bool {
		h, err := health.Check(ctx, &healthpb.HealthCheckRequest{})
		return err == nil && h.GetStatus() == healthpb.HealthCheckResponse_NOT_SERVING
	})
	_, err = s1.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(1)})
	wantCode(t, "CreateJob during shutdown", err, codes.Unavailable)
	if err := <-stopped; err != nil {
		t.Fatalf("Shutdown: %v", err)
	}
	// The watch saw the job queued again, then ended with UNAVAILABLE.
	var lastState frustumv1.Job_State
	for {
		j, err := stream.Recv()
		if err != nil {
			wantCode(t, "watch across shutdown", err, codes.Unavailable)
			break
		}
		lastState = j.GetState()
	}
	if lastState != frustumv1.Job_QUEUED {
		t.Errorf("the watch's last state before shutdown was %v, want QUEUED", lastState)
	}
	if runs.count(names[0]) != 1 || runs.count(names[1])+runs.count(names[2]) != 0 {
		t.Fatalf("runs before the restart: %v", runs.runs)
	}

	s2 := start(t, cfg, runs.hook)
	ctx2 := tctx(t, "")
	for i, n := range names {
		msgs := watchUntil(t, s2.client, ctx2, n)
		j, err := s2.client.GetJob(ctx2, &frustumv1.GetJobRequest{Name: n})
		if err != nil {
			t.Fatal(err)
		}
		wantAttempts := int32(1)
		if i == 0 {
			wantAttempts = 2
		}
		if j.GetState() != frustumv1.Job_SUCCEEDED || j.GetMagnetizationResult() == nil || j.GetAttempts() != wantAttempts ||
			runs.count(n) != int(wantAttempts) {
			t.Errorf("job %d after the restart: %v with %d attempts, %d runs, result %v; watched %d messages",
				i, j.GetState(), j.GetAttempts(), runs.count(n), j.GetMagnetizationResult() != nil, len(msgs))
		}
	}
	s2.stop(t)

	// A third start finds everything finished and runs nothing.
	before := runs.total()
	s3 := start(t, cfg, runs.hook)
	resp, err := s3.client.ListJobs(tctx(t, ""), &frustumv1.ListJobsRequest{})
	if err != nil {
		t.Fatal(err)
	}
	if len(resp.GetJobs()) != 3 {
		t.Errorf("%d jobs after two restarts, want 3", len(resp.GetJobs()))
	}
	for _, j := range resp.GetJobs() {
		if j.GetState() != frustumv1.Job_SUCCEEDED {
			t.Errorf("%s is %v after the restarts", j.GetName(), j.GetState())
		}
	}
	time.Sleep(100 * time.Millisecond)
	if runs.total() != before {
		t.Errorf("the third start ran %d attempts", runs.total()-before)
	}
}

// TestShutdownGrace checks that a job finishing within the grace period
// is stored SUCCEEDED and not run again, and that queued jobs stay queued
// for the next start.
func TestShutdownGrace(t *testing.T) {
	dir := t.TempDir()
	var runs runCounter
	f := &fakeTask{step: 50 * time.Millisecond, steps: 4}
	tweak := func(s *Server) { runs.hook(s); s.runTask = f.run }
	cfg := Config{DataDir: dir, Workers: 1, Grace: 5 * time.Second}
	s1 := start(t, cfg, tweak)
	ctx := tctx(t, "")
	first, err := s1.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(1)})
	if err != nil {
		t.Fatal(err)
	}
	second, err := s1.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(2)})
	if err != nil {
		t.Fatal(err)
	}
	waitFor(t, 2*time.Second, "the first job to start", func() bool { return runs.count(first.GetName()) == 1 })
	t0 := time.Now()
	s1.stop(t)
	if d := time.Since(t0); d > 2*time.Second {
		t.Errorf("Shutdown took %v for a job of 200 ms", d)
	}
	if runs.count(second.GetName()) != 0 {
		t.Error("a queued job started during shutdown")
	}
	s2 := start(t, cfg, tweak)
	ctx2 := tctx(t, "")
	j, err := s2.client.GetJob(ctx2, &frustumv1.GetJobRequest{Name: first.GetName()})
	if err != nil || j.GetState() != frustumv1.Job_SUCCEEDED || j.GetAttempts() != 1 {
		t.Errorf("the job that finished in the grace period: %v, %v", j, err)
	}
	watchUntil(t, s2.client, ctx2, second.GetName())
	if runs.count(first.GetName()) != 1 || runs.count(second.GetName()) != 1 {
		t.Errorf("runs: %v", runs.runs)
	}
}

// TestRetention checks that finished jobs older than the retention age
// are deleted (at start, then every minute) and others kept.
func TestRetention(t *testing.T) {
	dir := t.TempDir()
	s1 := start(t, Config{DataDir: dir, Workers: 1}, nil)
	ctx := tctx(t, "")
	job, err := s1.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: thermoSpec(1)})
	if err != nil {
		t.Fatal(err)
	}
	watchUntil(t, s1.client, ctx, job.GetName())
	s1.stop(t)
	time.Sleep(20 * time.Millisecond)

	s2 := start(t, Config{DataDir: dir, Workers: 1, Retention: 10 * time.Millisecond}, nil)
	ctx2 := tctx(t, "")
	waitFor(t, 2*time.Second, "the old job to be deleted", func() bool {
		_, err := s2.client.GetJob(ctx2, &frustumv1.GetJobRequest{Name: job.GetName()})
		return err != nil
	})
	_, err = s2.client.GetJob(ctx2, &frustumv1.GetJobRequest{Name: job.GetName()})
	wantCode(t, "a job past retention", err, codes.NotFound)
}
