package e2e

import (
	"bytes"
	"context"
	"fmt"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"frustum/cluster"
	frustumv1 "frustum/proto/frustum/v1"
)

// TestLoad20Clients500Jobs has 20 clients, each on its own connection,
// submit 25 small jobs each to one frustumd and follow them to the end; it
// checks that every job is accounted for once, each with the in-process
// result, and that the server's peak memory stays bounded.
func TestLoad20Clients500Jobs(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs frustumd with 500 jobs")
	}
	const (
		clients       = 20
		jobsPerClient = 25
		total         = clients * jobsPerClient
		maxRSS        = 300 << 20
	)
	d := startDaemon(t, t.TempDir(), 0)
	opt := engineOptions(0)
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()

	_, idleHWM, err := d.memory()
	if err != nil {
		t.Fatal(err)
	}
	var peakRSS int64
	stopSampling := make(chan struct{})
	sampled := make(chan struct{})
	go func() {
		defer close(sampled)
		tick := time.NewTicker(50 * time.Millisecond)
		defer tick.Stop()
		for {
			if rss, _, err := d.memory(); err == nil {
				peakRSS = max(peakRSS, rss)
			}
			select {
			case <-stopSampling:
				return
			case <-tick.C:
			}
		}
	}()

	// shared is one spec that a job of every 20 submits, so that all but the
	// first can be answered from the stored result; every other spec is
	// different from all the others.
	shared := thermoSpec(cluster.Triangle(0.5, 1).ToProto(), []float64{0.5, 1, 2, 5, 10}, nil)
	specOf := func(k int) *frustumv1.JobSpec {
		if k%20 == 0 {
			return shared
		}
		return smallSpec(k)
	}

	conns := make([]frustumv1.JobServiceClient, clients)
	for c := range conns {
		conns[c] = d.dial(t)
	}
	names := make([][]string, clients)
	finals := make([][]*frustumv1.Job, clients)
	start := time.Now()
	var submitDone sync.WaitGroup
	submitDone.Add(clients)
	var wg sync.WaitGroup
	for c := range clients {
		wg.Add(1)
		go func() {
			defer wg.Done()
			jc := conns[c]
			for i := range jobsPerClient {
				k := c*jobsPerClient + i
				req := &frustumv1.CreateJobRequest{Spec: specOf(k), RequestId: fmt.Sprintf("load-c%02d-j%02d", c, i)}
				job, err := createWithRetry(ctx, jc, req)
				if err != nil {
					t.Errorf("client %d job %d: CreateJob: %v", c, i, err)
					continue
				}
				if k%7 == 0 {
					// A retry of the same request returns the same job.
					again, err := createWithRetry(ctx, jc, req)
					if err != nil {
						t.Errorf("client %d job %d: retried CreateJob: %v", c, i, err)
					} else if again.GetName() != job.GetName() {
						t.Errorf("client %d job %d: retried CreateJob with request id %q gave %s, the first gave %s",
							c, i, req.RequestId, again.GetName(), job.GetName())
					}
				}
				names[c] = append(names[c], job.GetName())
			}
			submitDone.Done()
			for _, name := range names[c] {
				job, _, err := waitTerminal(ctx, jc, name)
				if err != nil {
					t.Errorf("client %d: %v", c, err)
					finals[c] = append(finals[c], nil)
					continue
				}
				finals[c] = append(finals[c], job)
			}
		}()
	}
	submitDone.Wait()
	submitted := time.Since(start)
	wg.Wait()
	elapsed := time.Since(start)
	close(stopSampling)
	<-sampled
	rss, hwm, err := d.memory()
	if err != nil {
		t.Fatal(err)
	}
	peakRSS = max(peakRSS, rss)
	t.Logf("%d jobs from %d clients: all submitted in %.2fs, all finished in %.2fs (%.0f jobs/s)",
		total, clients, submitted.Seconds(), elapsed.Seconds(), total/elapsed.Seconds())
	t.Logf("frustumd memory: VmHWM %.1f MiB at start, %.1f MiB at the end; sampled VmRSS peak %.1f MiB, at the end %.1f MiB",
		mib(idleHWM), mib(hwm), mib(peakRSS), mib(rss))
	if hwm > maxRSS {
		t.Errorf("frustumd peak RSS (VmHWM) %.1f MiB, want under %.0f MiB", mib(hwm), mib(maxRSS))
	}
	if t.Failed() {
		return
	}

	// Every job accounted for: 500 distinct names, each SUCCEEDED with the
	// result of the in-process run of its spec.
	created := map[string]bool{}
	fromCache := 0
	want := map[int][]byte{} // by k, of the specs that differ
	for c := range clients {
		for i, name := range names[c] {
			k := c*jobsPerClient + i
			if created[name] {
				t.Errorf("%s was returned for two different requests", name)
			}
			created[name] = true
			job := finals[c][i]
			if job.GetState() != frustumv1.Job_SUCCEEDED {
				t.Errorf("%s (client %d job %d): %s, want SUCCEEDED (error %v)", name, c, i, job.GetState(), job.GetError())
				continue
			}
			if job.GetFromCache() {
				fromCache++
				if k%20 != 0 {
					t.Errorf("%s: from_cache (cached_from %s), but no other job has its spec", name, job.GetCachedFrom())
				}
			} else if job.GetAttempts() != 1 {
				t.Errorf("%s: attempts = %d, want 1", name, job.GetAttempts())
			}
			got, err := resultJSON(ctx, conns[c], job)
			if err != nil {
				t.Errorf("%s: result: %v", name, err)
				continue
			}
			key := k
			if k%20 == 0 {
				key = 0
			}
			if want[key] == nil {
				want[key] = inProcessJSON(t, specOf(k), opt)
			}
			if !bytes.Equal(got, want[key]) {
				t.Errorf("%s (client %d job %d): result differs from the in-process run\n got: %.300s\nwant: %.300s", name, c, i, got, want[key])
			}
		}
	}
	if len(created) != total {
		t.Errorf("%d distinct jobs created, want %d", len(created), total)
	}
	t.Logf("%d of the %d jobs of the shared spec were answered from the cache", fromCache, total/20)

	// ListJobs, paged, lists each job once.
	listed, err := listAll(ctx, conns[0], 37, frustumv1.Job_STATE_UNSPECIFIED, 100)
	if err != nil {
		t.Fatal(err)
	}
	checkListed(t, "after the load", listed, created)
	if len(listed) != total {
		t.Errorf("ListJobs lists %d jobs, want %d", len(listed), total)
	}
	succeeded, err := listAll(ctx, conns[1], 100, frustumv1.Job_SUCCEEDED, 100)
	if err != nil {
		t.Fatal(err)
	}
	checkListed(t, "state SUCCEEDED", succeeded, created)

	// The shared spec once more: at once from the cache.
	job, err := conns[2].CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: shared, RequestId: "load-shared-again"})
	if err != nil {
		t.Fatal(err)
	}
	if job.GetState() != frustumv1.Job_SUCCEEDED || !job.GetFromCache() || !created[job.GetCachedFrom()] {
		t.Errorf("the shared spec again: state %s, from_cache %v, cached_from %q; want SUCCEEDED from the cache of one of the load's jobs",
			job.GetState(), job.GetFromCache(), job.GetCachedFrom())
	}
}

// createWithRetry calls CreateJob, retrying a few times on UNAVAILABLE or
// a call deadline; the request id keeps a retry from creating a second job.
func createWithRetry(ctx context.Context, c frustumv1.JobServiceClient, req *frustumv1.CreateJobRequest) (*frustumv1.Job, error) {
	var err error
	for attempt := 0; attempt < 3; attempt++ {
		cctx, cancel := context.WithTimeout(ctx, 10*time.Second)
		var job *frustumv1.Job
		job, err = c.CreateJob(cctx, req)
		cancel()
		if err == nil {
			return job, nil
		}
		if code := status.Code(err); code != codes.Unavailable && code != codes.DeadlineExceeded {
			return nil, err
		}
		time.Sleep(100 * time.Millisecond)
	}
	return nil, err
}

func mib(b int64) float64 { return float64(b) / (1 << 20) }
