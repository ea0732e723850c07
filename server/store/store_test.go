package store

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	frustumv1 "frustum/proto/frustum/v1"
)

// The name format is the brief's: "jobs/" + 16 hex of the creation time in
// ns + 8 random hex.
var nameRE = regexp.MustCompile(`^jobs/[0-9a-f]{24}$`)

// Round trip (invariant, no source): what Create stored, Get returns; what
// Update stored, Get returns; after Delete, the job is gone everywhere.
func TestCreateGetUpdateDelete(t *testing.T) {
	s, path := openTemp(t)
	in := queued("usera", "")
	before := time.Now()
	job := mustCreate(t, s, in)
	if in.Name != "" {
		t.Errorf("Create modified its argument: name %q", in.Name)
	}
	if !nameRE.MatchString(job.Name) {
		t.Fatalf("name %q is not jobs/ + 24 hex", job.Name)
	}
	// The id starts with the creation time in ns.
	var ns uint64
	fmt.Sscanf(job.Name[len("jobs/"):len("jobs/")+16], "%x", &ns)
	if got := time.Unix(0, int64(ns)); got.Before(before.Add(-time.Second)) || got.After(time.Now().Add(time.Second)) {
		t.Errorf("id time %v is not the creation time (about %v)", got, before)
	}
	want := proto.Clone(in).(*frustumv1.Job)
	want.Name = job.Name
	if !proto.Equal(job, want) {
		t.Errorf("Create set more than the name:\n got %v\nwant %v", job, want)
	}
	got, err := s.Get(job.Name)
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(got, want) {
		t.Errorf("Get:\n got %v\nwant %v", got, want)
	}

	start := timestamppb.Now()
	updated, err := s.Update(job.Name, func(j *frustumv1.Job) error {
		j.State = frustumv1.Job_RUNNING
		j.StartTime = start
		j.Attempts++
		j.Progress = &frustumv1.JobProgress{Stage: "diagonalize sectors", Done: 1, Total: 3, Fraction: 0.3}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	want.State, want.StartTime, want.Attempts = frustumv1.Job_RUNNING, start, 1
	want.Progress = &frustumv1.JobProgress{Stage: "diagonalize sectors", Done: 1, Total: 3, Fraction: 0.3}
	if !proto.Equal(updated, want) {
		t.Errorf("Update returned\n %v\nwant %v", updated, want)
	}
	if got, _ := s.Get(job.Name); !proto.Equal(got, want) {
		t.Errorf("Get after Update:\n got %v\nwant %v", got, want)
	}

	if err := s.Delete(job.Name); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Get(job.Name); err != ErrNotFound {
		t.Errorf("Get after Delete: %v, want ErrNotFound", err)
	}
	if err := s.Delete(job.Name); err != ErrNotFound {
		t.Errorf("second Delete: %v, want ErrNotFound", err)
	}
	if _, err := s.Update(job.Name, func(*frustumv1.Job) error { return nil }); err != ErrNotFound {
		t.Errorf("Update after Delete: %v, want ErrNotFound", err)
	}
	if jobs, _, _ := s.List("usera", 0, 0, ""); len(jobs) != 0 {
		t.Errorf("List after Delete: %v", names(jobs))
	}

	// Open made the file 0600 in a new directory 0700.
	for p, mode := range map[string]os.FileMode{path: 0o600, filepath.Dir(path): 0o700 | os.ModeDir} {
		if fi, err := os.Stat(p); err != nil || fi.Mode() != mode {
			t.Errorf("%s: mode %v (%v), want %v", p, fi.Mode(), err, mode)
		}
	}
}

// Names that are not "jobs/" + 24 lowercase hex are simply not found
// (invariant, no source): the name comes from the user.
func TestMalformedNamesNotFound(t *testing.T) {
	s, _ := openTemp(t)
	job := mustCreate(t, s, queued("usera", ""))
	id := strings.TrimPrefix(job.Name, "jobs/")
	for _, name := range []string{
		"", "jobs/", "jobs", id, "job/" + id, "jobs/" + strings.ToUpper(id),
		job.Name[:len(job.Name)-1], job.Name + "0", "jobs/" + id[:23] + "g",
		"jobs/../" + id, "/" + job.Name, job.Name + "/", "jobs/\x00" + id[1:],
	} {
		if _, err := s.Get(name); err != ErrNotFound {
			t.Errorf("Get(%q): %v, want ErrNotFound", name, err)
		}
		if _, err := s.Update(name, func(*frustumv1.Job) error { return nil }); err != ErrNotFound {
			t.Errorf("Update(%q): %v, want ErrNotFound", name, err)
		}
		if _, err := s.SetResult(name, "frustum.v1.SpectrumResult", nil, func(*frustumv1.Job) error { return nil }); err != ErrNotFound {
			t.Errorf("SetResult(%q): %v, want ErrNotFound", name, err)
		}
		if _, _, err := s.Result(name); err != ErrNotFound {
			t.Errorf("Result(%q): %v, want ErrNotFound", name, err)
		}
		if err := s.Delete(name); err != ErrNotFound {
			t.Errorf("Delete(%q): %v, want ErrNotFound", name, err)
		}
	}
	if _, err := s.Get(job.Name); err != nil {
		t.Errorf("the real job is gone: %v", err)
	}
}

// request_id idempotence (jobs.proto, CreateJobRequest.request_id: "makes a
// retried create idempotent (per user)").
func TestRequestIDIdempotent(t *testing.T) {
	s, _ := openTemp(t)
	first := mustCreate(t, s, queued("usera", "req-1"))

	retry := queued("usera", "req-1")
	retry.Spec = dimerSpec(99) // a retry returns the first job, whatever it says
	again, created, err := s.Create(retry)
	if err != nil || created {
		t.Fatalf("retried Create: created %v, err %v; want false, nil", created, err)
	}
	if !proto.Equal(again, first) {
		t.Errorf("retried Create returned\n %v\nwant the first job\n %v", again, first)
	}

	// The same request id of another owner is another job.
	userb := mustCreate(t, s, queued("userb", "req-1"))
	if userb.Name == first.Name {
		t.Errorf("userb's request req-1 returned usera's job")
	}
	// Without a request id every Create is new.
	a := mustCreate(t, s, queued("usera", ""))
	b := mustCreate(t, s, queued("usera", ""))
	if a.Name == b.Name {
		t.Errorf("two creates without request id gave one job")
	}
	if n, _ := s.Stats(); n[frustumv1.Job_QUEUED] != 4 {
		t.Errorf("%d jobs queued, want 4", n[frustumv1.Job_QUEUED])
	}

	// Concurrent retries of one request make one job.
	var wg sync.WaitGroup
	results := make([]*frustumv1.Job, 10)
	createdCount := make([]bool, 10)
	for i := range results {
		wg.Go(func() {
			j, c, err := s.Create(queued("userc", "req-2"))
			if err != nil {
				t.Error(err)
				return
			}
			results[i], createdCount[i] = j, c
		})
	}
	wg.Wait()
	n := 0
	for i, j := range results {
		if createdCount[i] {
			n++
		}
		if j == nil || j.Name != results[0].Name {
			t.Errorf("concurrent retry %d got %v, want %s", i, j, results[0].Name)
		}
	}
	if n != 1 {
		t.Errorf("%d of 10 concurrent retries created a job, want 1", n)
	}

	// Once the job is deleted, its request id makes a new job.
	if err := s.Delete(first.Name); err != nil {
		t.Fatal(err)
	}
	if fresh := mustCreate(t, s, queued("usera", "req-1")); fresh.Name == first.Name {
		t.Errorf("create after delete returned the deleted job")
	}
}

// Ids sort by creation and are unique (the brief: 16 hex of the creation
// time + 8 random), also under concurrency: 20 goroutines create 500 jobs,
// each of them is stored once and listed once.
func TestConcurrentCreateUniqueSortedIDs(t *testing.T) {
	s, _ := openTemp(t)
	const workers, perWorker = 20, 25
	made := make([][]string, workers)
	var wg sync.WaitGroup
	for w := range workers {
		wg.Go(func() {
			for range perWorker {
				job, created, err := s.Create(queued("usera", ""))
				if err != nil || !created {
					t.Errorf("Create: created %v, err %v", created, err)
					return
				}
				made[w] = append(made[w], job.Name)
			}
		})
	}
	wg.Wait()
	seen := map[string]bool{}
	for w, names := range made {
		if len(names) != perWorker {
			t.Fatalf("worker %d made %d jobs", w, len(names))
		}
		// Each worker's jobs were created one after another: their ids rise.
		if !slices.IsSorted(names) {
			t.Errorf("worker %d: ids not in creation order: %v", w, names)
		}
		for _, n := range names {
			if seen[n] {
				t.Errorf("%s handed out twice", n)
			}
			seen[n] = true
		}
	}
	var listed []string
	token := ""
	for {
		jobs, next, err := s.List("usera", 0, 77, token)
		if err != nil {
			t.Fatal(err)
		}
		listed = append(listed, names(jobs)...)
		if next == "" {
			break
		}
		token = next
	}
	if len(listed) != workers*perWorker {
		t.Errorf("listed %d jobs, want %d", len(listed), workers*perWorker)
	}
	for _, n := range listed {
		if !seen[n] {
			t.Errorf("listed %s, which no Create returned", n)
		}
		delete(seen, n)
	}
	if len(seen) != 0 {
		t.Errorf("%d jobs not listed", len(seen))
	}
	if n, _ := s.Stats(); n[frustumv1.Job_QUEUED] != workers*perWorker {
		t.Errorf("Stats: %v", n)
	}
}

// Sequential creates get rising ids, also across a reopen (invariant, no
// source: the store lifts the time part above the newest id stored).
func TestIDsRiseAcrossReopen(t *testing.T) {
	path := filepath.Join(t.TempDir(), "jobs.db")
	var last string
	for round := range 3 {
		s, err := Open(path)
		if err != nil {
			t.Fatal(err)
		}
		for range 5 {
			j := mustCreate(t, s, queued("usera", ""))
			if j.Name <= last {
				t.Errorf("round %d: %s after %s", round, j.Name, last)
			}
			last = j.Name
		}
		checkIndexes(t, s)
		s.Close()
	}
}

// Ids keep rising when the clock stalls or steps back, within one process
// and across a reopen (invariant, no source; NTP may step the clock).
func TestIDsRiseWhenClockStepsBack(t *testing.T) {
	path := filepath.Join(t.TempDir(), "jobs.db")
	s, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	clock := time.Now()
	s.now = func() time.Time { return clock }
	var last string
	check := func(what string) {
		t.Helper()
		j := mustCreate(t, s, queued("usera", ""))
		// The time parts ("jobs/" + 16 hex) rise, not only the names.
		if last != "" && j.Name[:21] <= last[:21] {
			t.Errorf("%s: %s after %s", what, j.Name, last)
		}
		last = j.Name
	}
	check("first")
	check("stalled clock")
	clock = clock.Add(-time.Hour)
	check("clock stepped back")
	// The newest id stays used even when its job is gone.
	if err := s.Delete(last); err != nil {
		t.Fatal(err)
	}
	check("newest job deleted")
	s.Close()

	if s, err = Open(path); err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	s.now = func() time.Time { return clock.Add(-time.Hour) }
	check("clock stepped back before a restart")
	checkIndexes(t, s)
}

// Update refuses to change what identifies a job and returns fn's error
// unchanged, storing nothing (the brief; invariant).
func TestUpdateRefuses(t *testing.T) {
	s, _ := openTemp(t)
	job := mustCreate(t, s, queued("usera", "r"))
	for what, fn := range map[string]func(*frustumv1.Job) error{
		"owner":      func(j *frustumv1.Job) error { j.Owner = "userm"; j.State = frustumv1.Job_RUNNING; return nil },
		"name":       func(j *frustumv1.Job) error { j.Name = "jobs/000000000000000000000000"; return nil },
		"request id": func(j *frustumv1.Job) error { j.RequestId = "other"; return nil },
		"result": func(j *frustumv1.Job) error {
			j.Result = &frustumv1.Job_SpectrumResult{SpectrumResult: &frustumv1.SpectrumResult{}}
			return nil
		},
	} {
		if _, err := s.Update(job.Name, fn); err == nil {
			t.Errorf("Update changing the %s: no error", what)
		} else if !strings.Contains(err.Error(), job.Name) {
			t.Errorf("Update changing the %s: error %q does not name the job", what, err)
		}
	}
	errBusy := errors.New("busy")
	if _, err := s.Update(job.Name, func(j *frustumv1.Job) error {
		j.State = frustumv1.Job_CANCELLED
		return errBusy
	}); err != errBusy {
		t.Errorf("Update returned %v, want fn's error itself", err)
	}
	got, err := s.Get(job.Name)
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(got, job) {
		t.Errorf("a refused Update changed the job:\n got %v\nwant %v", got, job)
	}
	if jobs, _, _ := s.List("userm", 0, 0, ""); len(jobs) != 0 {
		t.Errorf("userm lists %v", names(jobs))
	}
}

// Create refuses an owner with a NUL byte: it would break the owner index
// (owner+"\x00"+id) apart from other owners.
func TestCreateRefusesNULOwner(t *testing.T) {
	s, _ := openTemp(t)
	if _, _, err := s.Create(queued("usera\x00userb", "")); err == nil {
		t.Error("Create with a NUL in the owner: no error")
	}
	if _, _, err := s.Create(nil); err == nil {
		t.Error("Create(nil): no error")
	}
}

// Durability (DESIGN.md: "a restart finds every job again ... and loses no
// result"): create, close, reopen; everything is there, and Unfinished
// lists the queued and running jobs oldest first.
func TestReopenFindsEverything(t *testing.T) {
	path := filepath.Join(t.TempDir(), "jobs.db")
	s, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	var want []*frustumv1.Job
	var unfinished []string
	states := []frustumv1.Job_State{
		frustumv1.Job_QUEUED, frustumv1.Job_RUNNING, frustumv1.Job_SUCCEEDED,
		frustumv1.Job_FAILED, frustumv1.Job_CANCELLED, frustumv1.Job_QUEUED, frustumv1.Job_RUNNING,
	}
	for i, st := range states {
		owner := []string{"usera", "userb"}[i%2]
		j := mustCreate(t, s, queued(owner, fmt.Sprint("req-", i)))
		if st == frustumv1.Job_SUCCEEDED {
			j, err = s.SetResult(j.Name, "frustum.v1.SpectrumResult", []byte("result bytes"), func(j *frustumv1.Job) error {
				j.State = st
				j.SpecHash = "hash"
				return nil
			})
			if err != nil {
				t.Fatal(err)
			}
		} else if st != frustumv1.Job_QUEUED {
			j = setState(t, s, j.Name, st, time.Time{})
		}
		if st == frustumv1.Job_QUEUED || st == frustumv1.Job_RUNNING {
			unfinished = append(unfinished, j.Name)
		}
		want = append(want, j)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}

	s, err = Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	for _, w := range want {
		got, err := s.Get(w.Name)
		if err != nil || !proto.Equal(got, w) {
			t.Errorf("after reopen Get(%s) = %v, %v\nwant %v", w.Name, got, err, w)
		}
	}
	u, err := s.Unfinished()
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(names(u), unfinished) {
		t.Errorf("Unfinished = %v, want %v (oldest first)", names(u), unfinished)
	}
	for _, j := range u {
		if j.Spec == nil {
			t.Errorf("Unfinished: %s without its spec", j.Name)
		}
	}
	if typ, data, err := s.Result(want[2].Name); err != nil || typ != "frustum.v1.SpectrumResult" || string(data) != "result bytes" {
		t.Errorf("Result after reopen: %q %q %v", typ, data, err)
	}
	if j, ok, err := s.FindSucceeded("usera", "hash"); err != nil || !ok || j.Name != want[2].Name {
		t.Errorf("FindSucceeded after reopen: %v %v %v", j, ok, err)
	}
	if j, created, err := s.Create(queued("usera", "req-0")); err != nil || created || j.Name != want[0].Name {
		t.Errorf("request id after reopen: %v %v %v", j, created, err)
	}
	checkIndexes(t, s)
}

// A second Open of a file in use fails within about a second, naming the
// file (the brief: another frustumd on the same data dir must not hang).
func TestSecondOpenFails(t *testing.T) {
	_, path := openTemp(t)
	start := time.Now()
	s2, err := Open(path)
	elapsed := time.Since(start)
	if err == nil {
		s2.Close()
		t.Fatal("second Open of the same file succeeded")
	}
	if !strings.Contains(err.Error(), path) {
		t.Errorf("error %q does not name %s", err, path)
	}
	if elapsed > 1500*time.Millisecond {
		t.Errorf("second Open took %v, want about 1 s", elapsed)
	}
	t.Logf("second Open failed after %v: %v", elapsed.Round(time.Millisecond), err)
}

// Stats counts jobs per state (invariant, no source).
func TestStats(t *testing.T) {
	s, _ := openTemp(t)
	if n, err := s.Stats(); err != nil || len(n) != 0 {
		t.Errorf("empty store: %v, %v", n, err)
	}
	for range 3 {
		mustCreate(t, s, queued("usera", ""))
	}
	j := mustCreate(t, s, queued("userb", ""))
	setState(t, s, j.Name, frustumv1.Job_FAILED, time.Now())
	n, err := s.Stats()
	if err != nil {
		t.Fatal(err)
	}
	want := map[frustumv1.Job_State]int{frustumv1.Job_QUEUED: 3, frustumv1.Job_FAILED: 1}
	if fmt.Sprint(n) != fmt.Sprint(want) {
		t.Errorf("Stats = %v, want %v", n, want)
	}
}
