package server

import (
	"fmt"
	"runtime"
	"sync"
	"testing"
	"time"

	frustumv1 "frustum/proto/frustum/v1"
)

// TestLoad has 20 concurrent clients submit 500 small jobs in all and wait
// for them: every job is accounted for, none runs twice, and the server's
// heap stays bounded.
func TestLoad(t *testing.T) {
	if testing.Short() {
		t.Skip("load test")
	}
	const clients, perClient = 20, 25
	var runs runCounter
	ts := start(t, Config{Workers: 2}, runs.hook)
	runtime.GC()
	var before runtime.MemStats
	runtime.ReadMemStats(&before)

	t0 := time.Now()
	var mu sync.Mutex
	names := map[string]bool{}
	var wg sync.WaitGroup
	errs := make(chan error, clients*perClient)
	for c := range clients {
		wg.Add(1)
		go func() {
			defer wg.Done()
			ctx := tctx(t, "")
			var mine []string
			for i := range perClient {
				spec := thermoSpec(1 + float64(c*perClient+i)/7)
				j, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec, RequestId: fmt.Sprintf("c%d-%d", c, i)})
				if err != nil {
					errs <- err
					return
				}
				mine = append(mine, j.GetName())
			}
			for _, n := range mine {
				stream, err := ts.client.WatchJob(ctx, &frustumv1.WatchJobRequest{Name: n})
				if err != nil {
					errs <- err
					return
				}
				var last *frustumv1.Job
				for {
					j, err := stream.Recv()
					if err != nil {
						break
					}
					last = j
				}
				if last.GetState() != frustumv1.Job_SUCCEEDED {
					errs <- fmt.Errorf("%s ended %v", n, last.GetState())
					return
				}
			}
			mu.Lock()
			for _, n := range mine {
				if names[n] {
					errs <- fmt.Errorf("%s created twice", n)
				}
				names[n] = true
			}
			mu.Unlock()
		}()
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Fatal(err)
	}
	d := time.Since(t0)
	if len(names) != clients*perClient {
		t.Errorf("%d distinct jobs, want %d", len(names), clients*perClient)
	}
	for n := range names {
		if runs.count(n) != 1 {
			t.Errorf("%s ran %d times", n, runs.count(n))
		}
	}
	if runs.total() != clients*perClient {
		t.Errorf("%d runs in all, want %d", runs.total(), clients*perClient)
	}
	resp, err := ts.client.ListJobs(tctx(t, ""), &frustumv1.ListJobsRequest{State: frustumv1.Job_SUCCEEDED, PageSize: 1000})
	if err != nil || len(resp.GetJobs()) != clients*perClient {
		t.Errorf("%d succeeded jobs listed (%v)", len(resp.GetJobs()), err)
	}
	runtime.GC()
	var after runtime.MemStats
	runtime.ReadMemStats(&after)
	growth := int64(after.HeapInuse) - int64(before.HeapInuse)
	if growth > 64<<20 {
		t.Errorf("heap grew by %d MiB over 500 small jobs", growth>>20)
	}
	t.Logf("%d jobs from %d clients in %v (%.0f jobs/s); heap %+d KiB", len(names), clients, d, float64(len(names))/d.Seconds(), growth>>10)
}
