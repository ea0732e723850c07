package server

import (
	"fmt"
	"slices"
	"testing"
	"time"

	frustumv1 "frustum/proto/frustum/v1"
)

// TestFairness queues many jobs of one user on one slot, then one of
// another user: the second user's job starts before the first user's
// queue drains.
func TestFairness(t *testing.T) {
	tokens := writeTokens(t, map[string]string{"usera": "a-token", "userb": "b-token"})
	f := &fakeTask{step: 20 * time.Millisecond, steps: 4}
	ts := start(t, Config{Workers: 1, TokenFile: tokens}, func(s *Server) { s.runTask = f.run })
	usera, userb := tctx(t, "a-token"), tctx(t, "b-token")
	var useraJobs []string
	for i := range 20 {
		j, err := ts.client.CreateJob(usera, &frustumv1.CreateJobRequest{Spec: thermoSpec(float64(100 + i))})
		if err != nil {
			t.Fatal(err)
		}
		useraJobs = append(useraJobs, j.GetName())
	}
	startedBefore := len(f.started())
	userbs, err := ts.client.CreateJob(userb, &frustumv1.CreateJobRequest{Spec: thermoSpec(1)})
	if err != nil {
		t.Fatal(err)
	}
	if startedBefore > len(useraJobs)-3 {
		t.Fatalf("usera's queue nearly drained (%d started) before userb submitted: the test proves nothing", startedBefore)
	}
	watchUntil(t, ts.client, userb, userbs.GetName())
	order := f.started()
	// At userb's submission one of usera's jobs runs; at most one more of
	// hers (the turn may be hers) starts before userb's.
	pos := slices.Index(order, "dimer J=1")
	if pos < 0 || pos > startedBefore+1 {
		t.Errorf("userb's first job started as number %d of %q, with %d of usera's started when userb submitted", pos+1, order, startedBefore)
	}
	// Usera's own jobs keep their order.
	for _, n := range useraJobs {
		watchUntil(t, ts.client, usera, n)
	}
	var useraOrder []string
	for _, n := range f.started() {
		if n != "dimer J=1" {
			useraOrder = append(useraOrder, n)
		}
	}
	for i, n := range useraOrder {
		if want := fmt.Sprintf("dimer J=%d", 100+i); n != want {
			t.Fatalf("usera's job %d started as %q, want %q (FIFO per user): %q", i, n, want, useraOrder)
		}
	}
}

// TestRoundRobin checks the scheduler's turn order directly: one job of
// each owner per turn, each owner's jobs in their order.
func TestRoundRobin(t *testing.T) {
	sc := newScheduler(nil, 100, 100, 1)
	sc.stopped = true // queue without starting
	for _, q := range []queued{
		{"a1", "a", 1}, {"a2", "a", 1}, {"a3", "a", 1}, {"b1", "b", 1}, {"c1", "c", 1}, {"b2", "b", 1},
	} {
		sc.enqueue(q)
	}
	sc.stopped = false
	var started []string
	sc.dispatchForTest(func(q queued) { started = append(started, q.name) })
	if want := []string{"a1", "b1", "c1", "a2", "b2", "a3"}; !slices.Equal(started, want) {
		t.Errorf("turn order %q, want %q", started, want)
	}
	if len(sc.ring) != 0 || len(sc.inQueue) != 0 || sc.used != 6 {
		t.Errorf("after dispatch: ring %q, queued %v, used %d", sc.ring, sc.inQueue, sc.used)
	}
}

// TestMemoryAdmission checks that jobs start only while their estimates
// fit the server's memory together, whatever the free slots.
func TestMemoryAdmission(t *testing.T) {
	// The estimate of one slow job, as the server plans it.
	probe := start(t, Config{Workers: 2}, nil)
	one, err := probe.client.CreateJob(tctx(t, ""), &frustumv1.CreateJobRequest{Spec: slowSpec(1, 1)})
	if err != nil {
		t.Fatal(err)
	}
	mem := one.GetPlan().GetMemoryBytes()
	probe.stop(t)

	f := &fakeTask{step: 30 * time.Millisecond, steps: 2}
	ts := start(t, Config{Workers: 2, MaxMemory: mem * 3 / 2}, func(s *Server) { s.runTask = f.run })
	ctx := tctx(t, "")
	var names []string
	for i := range 4 {
		j, err := ts.client.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: slowSpec(1, float64(i+2))})
		if err != nil {
			t.Fatal(err)
		}
		names = append(names, j.GetName())
	}
	for _, n := range names {
		if msgs := watchUntil(t, ts.client, ctx, n); msgs[len(msgs)-1].GetState() != frustumv1.Job_SUCCEEDED {
			t.Errorf("%s ended %v", n, msgs[len(msgs)-1].GetState())
		}
	}
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.maxRun != 1 {
		t.Errorf("%d jobs of %d bytes ran at once under a limit of %d bytes", f.maxRun, mem, mem*3/2)
	}
}

// TestMemoryReservation checks that a job that does not fit yet is not
// starved by later small jobs of other owners.
func TestMemoryReservation(t *testing.T) {
	sc := newScheduler(nil, 4, 100, 1)
	sc.stopped = true
	sc.enqueue(queued{"big", "a", 80})
	sc.enqueue(queued{"s1", "b", 10})
	sc.enqueue(queued{"s2", "c", 10})
	// 50 bytes are in use by a running job: "big" cannot start; the small
	// ones may use only what is left after its reservation (100-50-80 < 0).
	sc.used = 50
	sc.stopped = false
	sc.running["x"] = &runningJob{queued: queued{"x", "z", 50}}
	var startedNames []string
	sc.dispatchForTest(func(q queued) { startedNames = append(startedNames, q.name) })
	if len(startedNames) != 0 {
		t.Errorf("started %q beside a reserved job", startedNames)
	}
	// With the running job gone, the big job starts first.
	delete(sc.running, "x")
	sc.used = 0
	sc.dispatchForTest(func(q queued) { startedNames = append(startedNames, q.name) })
	if len(startedNames) == 0 || startedNames[0] != "big" {
		t.Errorf("started %q, want big first", startedNames)
	}
}

// dispatchForTest runs one dispatch with started in place of running the
// jobs that get a slot.
func (sc *scheduler) dispatchForTest(started func(queued)) {
	sc.mu.Lock()
	defer sc.mu.Unlock()
	sc.launch = func(rj *runningJob) { started(rj.queued) }
	sc.dispatchLocked()
}
