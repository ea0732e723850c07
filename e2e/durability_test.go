package e2e

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os/exec"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"google.golang.org/protobuf/proto"

	"frustum/cluster"
	frustumv1 "frustum/proto/frustum/v1"
)

// TestDurabilitySIGKILL kills frustumd with SIGKILL while a job runs and
// checks, after a restart on the same data directory, that no job is lost,
// none runs twice, and each ends SUCCEEDED once with the in-process result.
func TestDurabilitySIGKILL(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs frustumd for about 15 s")
	}
	const workers = 1
	dataDir := t.TempDir()
	opt := engineOptions(workers)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()

	type submitted struct {
		label     string
		requestID string
		spec      *frustumv1.JobSpec
		name      string
	}
	// Three short jobs, the long one, then more short ones: with one worker
	// slot and one owner the scheduler runs them in this order, so the first
	// three have succeeded when the long one runs and the last ones are
	// still queued when the process is killed.
	jobs := []*submitted{
		{label: "dimer spectrum", spec: spectrumSpec(cluster.Chain(2, 0.5, 1.5, false).ToProto(), []float64{0, 0, 1})},
		{label: "triangle thermo", spec: thermoSpec(cluster.Triangle(0.5, 2).ToProto(), linspace(0.2, 20, 25), []float64{0, 0, 0.5})},
		{label: "tetrahedron magnetization", spec: magnetizationSpec(cluster.Tetrahedron(0.5, 1).ToProto(), []float64{0, 0.5, 2}, linspace(0, 6, 31), nil)},
		{label: "long DM chain magnetization", spec: longSpec()},
		{label: "ring spectrum", spec: spectrumSpec(cluster.Chain(6, 0.5, 1, true).ToProto(), nil)},
		{label: "spin-1 chain thermo", spec: thermoSpec(cluster.Chain(4, 1, 0.8, false).ToProto(), linspace(0.5, 10, 20), nil)},
		{label: "J1-J2 ring magnetization", spec: magnetizationSpec(cluster.ChainJ1J2(6, 1, 0.5).ToProto(), []float64{0.2}, linspace(0, 5, 21), []float64{0, 0, 1})},
		{label: "spin-3/2 dimer spectrum", spec: spectrumSpec(cluster.Chain(2, 1.5, -1, false).ToProto(), []float64{0.3, 0, 0})},
		{label: "multimer thermo", spec: thermoSpec(cluster.DefectMultimer(cluster.MultimerParams{JPlanar: 1, JDefect: 0.4}).ToProto(), linspace(0.5, 5, 10), nil)},
	}
	const long = 3
	for i, j := range jobs {
		j.requestID = fmt.Sprintf("durability-%d", i)
	}

	d1 := startDaemon(t, dataDir, workers)
	for _, j := range jobs {
		job, err := d1.jobs.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: j.spec, RequestId: j.requestID})
		if err != nil {
			t.Fatalf("CreateJob %s: %v", j.label, err)
		}
		j.name = job.GetName()
	}

	// Wait until the long job runs and the engine has reported progress, so
	// that the kill falls in the middle of its diagonalizations.
	wctx, wcancel := context.WithTimeout(ctx, 60*time.Second)
	msgs, err := watchUntil(wctx, d1.jobs, jobs[long].name, func(j *frustumv1.Job) bool {
		return j.GetState() == frustumv1.Job_RUNNING && j.GetProgress().GetDone() > 0 || terminal(j.GetState())
	})
	wcancel()
	if err != nil {
		t.Fatalf("watching the long job: %v", err)
	}
	if last := msgs[len(msgs)-1]; last.GetState() != frustumv1.Job_RUNNING {
		t.Fatalf("the long job is %s before the kill, want RUNNING", last.GetState())
	}

	// What was there just before the kill.
	before := map[string]*frustumv1.Job{}
	var succeededBefore []string
	for _, j := range jobs {
		job, err := d1.jobs.GetJob(ctx, &frustumv1.GetJobRequest{Name: j.name})
		if err != nil {
			t.Fatalf("GetJob %s before the kill: %v", j.label, err)
		}
		before[j.name] = job
		if job.GetState() == frustumv1.Job_SUCCEEDED {
			succeededBefore = append(succeededBefore, j.name)
		}
	}
	if len(succeededBefore) == 0 {
		t.Fatal("no job had succeeded before the kill: the test needs at least one")
	}
	if err := d1.cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	d1.kill() // waits for the process
	t.Logf("killed frustumd while %s ran (attempt %d, %d/%d done); %d jobs had succeeded",
		jobs[long].label, before[jobs[long].name].GetAttempts(), msgs[len(msgs)-1].GetProgress().GetDone(),
		msgs[len(msgs)-1].GetProgress().GetTotal(), len(succeededBefore))

	restart := time.Now()
	d2 := startDaemon(t, dataDir, workers)

	// Every job is still there, once.
	listed, err := listAll(ctx, d2.jobs, 4, frustumv1.Job_STATE_UNSPECIFIED, 100)
	if err != nil {
		t.Fatal(err)
	}
	checkListed(t, "after the restart", listed, jobs2names(jobs, func(j *submitted) string { return j.name }))

	// A retried create with a request id of before the kill returns the
	// same job.
	again, err := d2.jobs.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: jobs[1].spec, RequestId: jobs[1].requestID})
	if err != nil {
		t.Fatalf("CreateJob retried after the restart: %v", err)
	}
	if again.GetName() != jobs[1].name {
		t.Errorf("CreateJob retried with request id %q after the restart returned %s, want the first job %s",
			jobs[1].requestID, again.GetName(), jobs[1].name)
	}

	// Each job ends SUCCEEDED, and its watch sees that exactly once.
	final := map[string]*frustumv1.Job{}
	for _, j := range jobs {
		job, msgs, err := waitTerminal(ctx, d2.jobs, j.name)
		if err != nil {
			t.Fatalf("%s: %v", j.label, err)
		}
		final[j.name] = job
		n := 0
		for _, m := range msgs {
			if m.GetState() == frustumv1.Job_SUCCEEDED {
				n++
			}
		}
		if job.GetState() != frustumv1.Job_SUCCEEDED || n != 1 {
			t.Errorf("%s (%s): state %s, %d SUCCEEDED messages in its watch, want SUCCEEDED once (error: %v)",
				j.label, j.name, job.GetState(), n, job.GetError())
		}
	}
	t.Logf("all %d jobs succeeded %.1fs after the restart", len(jobs), time.Since(restart).Seconds())

	// Results equal the in-process run byte for byte; attempts count one run
	// per job, two for the one that was killed.
	for i, j := range jobs {
		job := final[j.name]
		if job.GetState() != frustumv1.Job_SUCCEEDED {
			continue
		}
		got, err := resultJSON(ctx, d2.jobs, job)
		if err != nil {
			t.Errorf("%s: result: %v", j.label, err)
			continue
		}
		if want := inProcessJSON(t, j.spec, opt); !bytes.Equal(got, want) {
			t.Errorf("%s: result differs from the in-process run\n got: %.400s\nwant: %.400s", j.label, got, want)
		}
		wantAttempts := int32(1)
		if i == long {
			wantAttempts = 2
		}
		if job.GetAttempts() != wantAttempts {
			t.Errorf("%s: attempts = %d, want %d", j.label, job.GetAttempts(), wantAttempts)
		}
		if job.GetFromCache() {
			t.Errorf("%s: from_cache, want a run of its own", j.label)
		}
	}

	// A job that had succeeded before the kill kept its result and did not
	// run again.
	for _, name := range succeededBefore {
		b, a := before[name], final[name]
		if a.GetAttempts() != 1 || !proto.Equal(a.GetStartTime(), b.GetStartTime()) || !proto.Equal(a.GetEndTime(), b.GetEndTime()) {
			t.Errorf("%s succeeded before the kill but ran again: attempts %d, start %v -> %v, end %v -> %v", name,
				a.GetAttempts(), b.GetStartTime().AsTime(), a.GetStartTime().AsTime(), b.GetEndTime().AsTime(), a.GetEndTime().AsTime())
		}
		bj, err1 := resultJSON(ctx, d2.jobs, b)
		aj, err2 := resultJSON(ctx, d2.jobs, a)
		if err1 != nil || err2 != nil || !bytes.Equal(aj, bj) {
			t.Errorf("%s: result changed across the restart (errors %v, %v)", name, err1, err2)
		}
	}

	// An identical spec after the restart is answered from the stored
	// result of a job that succeeded before the kill.
	cached, err := d2.jobs.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: jobs[0].spec, RequestId: "durability-cache"})
	if err != nil {
		t.Fatalf("CreateJob of a repeated spec: %v", err)
	}
	if cached.GetState() != frustumv1.Job_SUCCEEDED || !cached.GetFromCache() || cached.GetCachedFrom() != jobs[0].name {
		t.Errorf("repeated spec after the restart: state %s, from_cache %v, cached_from %q; want SUCCEEDED from the cache of %s",
			cached.GetState(), cached.GetFromCache(), cached.GetCachedFrom(), jobs[0].name)
	} else if got, err := resultJSON(ctx, d2.jobs, cached); err != nil || !bytes.Equal(got, inProcessJSON(t, jobs[0].spec, opt)) {
		t.Errorf("cached result differs from the in-process run (err %v)", err)
	}

	// Nothing was duplicated: the nine jobs and the cached one, each once.
	listed, err = listAll(ctx, d2.jobs, 3, frustumv1.Job_STATE_UNSPECIFIED, 100)
	if err != nil {
		t.Fatal(err)
	}
	want := jobs2names(jobs, func(j *submitted) string { return j.name })
	want[cached.GetName()] = true
	checkListed(t, "at the end", listed, want)
	for _, j := range listed {
		if j.GetState() != frustumv1.Job_SUCCEEDED {
			t.Errorf("ListJobs at the end: %s is %s, want SUCCEEDED", j.GetName(), j.GetState())
		}
	}
}

// jobs2names returns the set of the names of xs.
func jobs2names[T any](xs []T, name func(T) string) map[string]bool {
	out := map[string]bool{}
	for _, x := range xs {
		out[name(x)] = true
	}
	return out
}

// checkListed checks that a listing holds each wanted name once and
// nothing else.
func checkListed(t *testing.T, when string, listed []*frustumv1.Job, want map[string]bool) {
	t.Helper()
	seen := map[string]int{}
	for _, j := range listed {
		seen[j.GetName()]++
	}
	for name, n := range seen {
		switch {
		case !want[name]:
			t.Errorf("ListJobs %s: %s was never created", when, name)
		case n > 1:
			t.Errorf("ListJobs %s: %s listed %d times", when, name, n)
		}
	}
	for name := range want {
		if seen[name] == 0 {
			t.Errorf("ListJobs %s: %s is missing", when, name)
		}
	}
}

// TestSIGTERMRequeues stops frustumd with SIGTERM while a job runs past a
// short grace period: the process exits cleanly, the job is queued again
// and runs again after the restart (attempts 2); cancelling it then frees
// its slot within about a second for the job queued behind it.
func TestSIGTERMRequeues(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs frustumd")
	}
	const workers = 1
	dataDir := t.TempDir()
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()

	d1 := startDaemon(t, dataDir, workers, "--grace", "300ms")
	long, err := d1.jobs.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: longSpec(), RequestId: "sigterm-long"})
	if err != nil {
		t.Fatal(err)
	}
	shortSpec := spectrumSpec(cluster.Triangle(1, 1).ToProto(), []float64{0, 0, 2})
	short, err := d1.jobs.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: shortSpec, RequestId: "sigterm-short"})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := watchUntil(ctx, d1.jobs, long.GetName(), func(j *frustumv1.Job) bool {
		return j.GetState() == frustumv1.Job_RUNNING && j.GetProgress().GetDone() > 0 || terminal(j.GetState())
	}); err != nil {
		t.Fatal(err)
	}

	sent := time.Now()
	if err := d1.cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	select {
	case <-d1.exited:
	case <-time.After(20 * time.Second):
		t.Fatal("frustumd still runs 20 s after SIGTERM with --grace 300ms")
	}
	if d1.waitErr != nil {
		t.Errorf("frustumd after SIGTERM: %v, want exit status 0", d1.waitErr)
	}
	t.Logf("frustumd stopped %.2fs after SIGTERM (grace 300ms)", time.Since(sent).Seconds())

	d2 := startDaemon(t, dataDir, workers)
	msgs, err := watchUntil(ctx, d2.jobs, long.GetName(), func(j *frustumv1.Job) bool {
		return j.GetState() == frustumv1.Job_RUNNING || terminal(j.GetState())
	})
	if err != nil {
		t.Fatal(err)
	}
	if j := msgs[len(msgs)-1]; j.GetState() != frustumv1.Job_RUNNING || j.GetAttempts() != 2 {
		t.Fatalf("the interrupted job after the restart: %s, attempts %d; want RUNNING, attempt 2", j.GetState(), j.GetAttempts())
	}
	cancelled := time.Now()
	if _, err := d2.jobs.CancelJob(ctx, &frustumv1.CancelJobRequest{Name: long.GetName()}); err != nil {
		t.Fatalf("CancelJob: %v", err)
	}
	job, _, err := waitTerminal(ctx, d2.jobs, short.GetName())
	if err != nil {
		t.Fatal(err)
	}
	if job.GetState() != frustumv1.Job_SUCCEEDED || job.GetAttempts() != 1 {
		t.Errorf("the job queued behind: %s, attempts %d; want SUCCEEDED, attempt 1", job.GetState(), job.GetAttempts())
	}
	// One worker slot: the queued job starts only once the cancelled engine
	// has returned.
	freed := job.GetStartTime().AsTime().Sub(cancelled)
	t.Logf("the queued job started %.3fs after CancelJob", freed.Seconds())
	if freed > 2*time.Second {
		t.Errorf("the queued job started %v after CancelJob of the running one, want within about a second", freed)
	}
	lj, err := d2.jobs.GetJob(ctx, &frustumv1.GetJobRequest{Name: long.GetName()})
	if err != nil {
		t.Fatal(err)
	}
	if lj.GetState() != frustumv1.Job_CANCELLED || lj.GetAttempts() != 2 {
		t.Errorf("the cancelled job: %s, attempts %d; want CANCELLED, attempts 2", lj.GetState(), lj.GetAttempts())
	}
}

// TestSIGKILLDuringCreates kills frustumd with SIGKILL while 8 clients
// create jobs as fast as they can: after the restart every job whose
// CreateJob had returned is there, a retry of each create that was in
// flight returns one job (never two), and every job succeeds once.
func TestSIGKILLDuringCreates(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs frustumd")
	}
	const clients = 8
	dataDir := t.TempDir()
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	d1 := startDaemon(t, dataDir, 0)

	type create struct {
		req     *frustumv1.CreateJobRequest
		name    string // "" when the call did not return a job
		retried string // the job of the retry after the restart
	}
	var (
		mu      sync.Mutex
		creates []*create
		acked   atomic.Int64
	)
	var wg sync.WaitGroup
	for c := range clients {
		jc := d1.dial(t)
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := 0; ctx.Err() == nil; i++ {
				k := 10000 + c*1000 + i
				cr := &create{req: &frustumv1.CreateJobRequest{Spec: smallSpec(k), RequestId: fmt.Sprintf("kill-c%d-j%03d", c, i)}}
				mu.Lock()
				creates = append(creates, cr)
				mu.Unlock()
				job, err := jc.CreateJob(ctx, cr.req)
				if err != nil {
					return // the server is gone
				}
				mu.Lock()
				cr.name = job.GetName()
				mu.Unlock()
				acked.Add(1)
			}
		}()
	}
	deadline := time.Now().Add(20 * time.Second)
	for acked.Load() < 150 && time.Now().Before(deadline) {
		time.Sleep(5 * time.Millisecond)
	}
	if err := d1.cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	d1.kill()
	wg.Wait()
	ackedNames := map[string]bool{}
	inFlight := 0
	for _, cr := range creates {
		if cr.name != "" {
			ackedNames[cr.name] = true
		} else {
			inFlight++
		}
	}
	t.Logf("killed frustumd after %d acknowledged creates, %d in flight", len(ackedNames), inFlight)
	if len(ackedNames) < 100 {
		t.Fatalf("only %d creates acknowledged before the kill", len(ackedNames))
	}

	d2 := startDaemon(t, dataDir, 0)
	listed, err := listAll(ctx, d2.jobs, 100, frustumv1.Job_STATE_UNSPECIFIED, 100)
	if err != nil {
		t.Fatal(err)
	}
	present := map[string]bool{}
	for _, j := range listed {
		if present[j.GetName()] {
			t.Errorf("ListJobs after the restart: %s twice", j.GetName())
		}
		present[j.GetName()] = true
	}
	for name := range ackedNames {
		if !present[name] {
			t.Errorf("%s was acknowledged by CreateJob but is gone after the SIGKILL", name)
		}
	}
	if extra := len(present) - len(ackedNames); extra < 0 || extra > inFlight {
		t.Errorf("%d jobs after the restart: %d acknowledged and %d in flight, so %d unexplained", len(present), len(ackedNames), inFlight, extra)
	}

	// Retry every create: each request id gives the job it gave before (or,
	// for one in flight, the job it may have stored), never a second one.
	want := map[string]bool{}
	for _, cr := range creates {
		job, err := d2.jobs.CreateJob(ctx, cr.req)
		if err != nil {
			t.Fatalf("retried CreateJob %s: %v", cr.req.RequestId, err)
		}
		if cr.name != "" && job.GetName() != cr.name {
			t.Errorf("retried CreateJob %s gave %s, the first call %s", cr.req.RequestId, job.GetName(), cr.name)
		}
		cr.retried = job.GetName()
		if want[job.GetName()] {
			t.Errorf("retried CreateJob %s gave %s, the job of another request", cr.req.RequestId, job.GetName())
		}
		want[job.GetName()] = true
	}
	for name := range present {
		if !want[name] {
			t.Errorf("%s is stored but no request id gives it", name)
		}
	}

	// Every job succeeds once, with the in-process result.
	opt := engineOptions(0)
	for _, cr := range creates {
		job, _, err := waitTerminal(ctx, d2.jobs, cr.retried)
		if err != nil {
			t.Fatal(err)
		}
		if job.GetState() != frustumv1.Job_SUCCEEDED || job.GetAttempts() > 2 || job.GetAttempts() < 1 {
			t.Errorf("%s (%s): %s, attempts %d; want SUCCEEDED after one run (two if it ran at the kill)",
				job.GetName(), cr.req.RequestId, job.GetState(), job.GetAttempts())
			continue
		}
		got, err := resultJSON(ctx, d2.jobs, job)
		if err != nil {
			t.Errorf("%s: %v", job.GetName(), err)
		} else if !bytes.Equal(got, inProcessJSON(t, cr.req.Spec, opt)) {
			t.Errorf("%s: result differs from the in-process run", job.GetName())
		}
	}
	listed, err = listAll(ctx, d2.jobs, 100, frustumv1.Job_STATE_UNSPECIFIED, 100)
	if err != nil {
		t.Fatal(err)
	}
	checkListed(t, "at the end", listed, want)
}

// TestSecondDaemonSameDataDir checks that a second frustumd on a data
// directory in use refuses to start, promptly and with a message that
// says why, instead of sharing the store with the first.
func TestSecondDaemonSameDataDir(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs frustumd")
	}
	dataDir := t.TempDir()
	d1 := startDaemon(t, dataDir, 1)
	port, err := freePort()
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, frustumd(t), "--listen", fmt.Sprintf("127.0.0.1:%d", port), "--data", dataDir)
	start := time.Now()
	out, err := cmd.CombinedOutput()
	var exit *exec.ExitError
	if !errors.As(err, &exit) || exit.ExitCode() != 1 {
		t.Fatalf("second frustumd on the same data directory: %v after %v, want exit status 1\n%s", err, time.Since(start), out)
	}
	if !strings.Contains(string(out), "locked") {
		t.Errorf("second frustumd's message does not say the store is locked:\n%s", out)
	}
	t.Logf("second frustumd refused in %.2fs", time.Since(start).Seconds())
	// The first one still serves.
	if err := d1.waitServing(5 * time.Second); err != nil {
		t.Error(err)
	}
}
