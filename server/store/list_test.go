package store

import (
	"encoding/base64"
	"errors"
	"slices"
	"testing"
	"time"

	frustumv1 "frustum/proto/frustum/v1"
)

// listAll pages through owner's jobs and returns every name in order.
func listAll(t *testing.T, s *Store, owner string, state frustumv1.Job_State, pageSize int) (all []string, pages int) {
	t.Helper()
	token := ""
	for {
		jobs, next, err := s.List(owner, state, pageSize, token)
		if err != nil {
			t.Fatal(err)
		}
		pages++
		if len(jobs) > pageSize && pageSize > 0 {
			t.Fatalf("page of %d jobs, page size %d", len(jobs), pageSize)
		}
		if next != "" && len(jobs) != pageSize {
			t.Errorf("page %d: %d jobs (page size %d) but a next token", pages, len(jobs), pageSize)
		}
		for _, j := range jobs {
			if j.Spec != nil {
				t.Errorf("List returned %s with its spec", j.Name)
			}
			if j.Owner != owner {
				t.Errorf("List(%q) returned %s of %q", owner, j.Name, j.Owner)
			}
			if state != 0 && j.State != state {
				t.Errorf("List(state %v) returned %s in %v", state, j.Name, j.State)
			}
		}
		all = append(all, names(jobs)...)
		if next == "" {
			return all, pages
		}
		token = next
	}
}

// Paging (jobs.proto ListJobs: "the caller's jobs, newest first, paged,
// without specs"; AIP-158 page_size/page_token): every page newest first,
// the pages together exactly the owner's jobs, next empty on the last page,
// with and without a state filter; other owners' jobs never appear.
func TestListPaging(t *testing.T) {
	s, _ := openTemp(t)
	var usera, running []string // in creation order
	owners := []string{"usera", "userb", "usera ", "useraa", ""}
	for i := range 23 {
		j := mustCreate(t, s, queued("usera", ""))
		if i%3 == 1 {
			setState(t, s, j.Name, frustumv1.Job_RUNNING, time.Time{})
			running = append(running, j.Name)
		}
		usera = append(usera, j.Name)
		// Owners whose names share bytes with "usera", interleaved.
		mustCreate(t, s, queued(owners[1+i%4], ""))
	}
	newestFirst := func(n []string) []string { r := slices.Clone(n); slices.Reverse(r); return r }

	for _, size := range []int{1, 5, 23, 24, 1000} {
		got, pages := listAll(t, s, "usera", 0, size)
		if !slices.Equal(got, newestFirst(usera)) {
			t.Errorf("page size %d: listed\n %v\nwant\n %v", size, got, newestFirst(usera))
		}
		if want := (23 + size - 1) / size; pages != want {
			t.Errorf("page size %d: %d pages, want %d", size, pages, want)
		}
	}
	for _, size := range []int{1, 3, 7, 8} {
		got, _ := listAll(t, s, "usera", frustumv1.Job_RUNNING, size)
		if !slices.Equal(got, newestFirst(running)) {
			t.Errorf("RUNNING, page size %d: listed %v, want %v", size, got, newestFirst(running))
		}
	}
	if got, _ := listAll(t, s, "usera", frustumv1.Job_SUCCEEDED, 5); len(got) != 0 {
		t.Errorf("SUCCEEDED: listed %v", got)
	}
	// Page size 0 or less means 50; above 1000 means 1000.
	for _, size := range []int{0, -3, 5000} {
		jobs, next, err := s.List("usera", 0, size, "")
		if err != nil || len(jobs) != 23 || next != "" {
			t.Errorf("page size %d: %d jobs, next %q, %v", size, len(jobs), next, err)
		}
	}
	if got, _ := listAll(t, s, "nobody", 0, 10); len(got) != 0 {
		t.Errorf("nobody lists %v", got)
	}
	if got, _ := listAll(t, s, "", 0, 100); len(got) != 5 {
		t.Errorf("owner \"\" lists %d jobs, want 5", len(got))
	}

	// A deleted job, even the one a token points after, does not disturb
	// paging.
	page1, next, err := s.List("usera", 0, 5, "")
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Delete(page1[4].Name); err != nil {
		t.Fatal(err)
	}
	page2, _, err := s.List("usera", 0, 5, next)
	if err != nil {
		t.Fatal(err)
	}
	if want := newestFirst(usera)[5:10]; !slices.Equal(names(page2), want) {
		t.Errorf("after deleting the token's job: page 2 = %v, want %v", names(page2), want)
	}
}

// A token List did not issue, or issued for another filter, is refused with
// ErrBadPageToken (AIP-158: other request fields must match the token's).
func TestListBadPageToken(t *testing.T) {
	s, _ := openTemp(t)
	for range 3 {
		mustCreate(t, s, queued("usera", ""))
	}
	_, next, err := s.List("usera", 0, 1, "")
	if err != nil || next == "" {
		t.Fatalf("first page: next %q, %v", next, err)
	}
	raw, _ := base64.RawURLEncoding.DecodeString(next)
	for name, token := range map[string]string{
		"not base64":     "!!!",
		"padded":         next + "==",
		"too short":      base64.RawURLEncoding.EncodeToString(raw[:10]),
		"trailing bytes": base64.RawURLEncoding.EncodeToString(append(raw, 0)),
		"wrong version":  base64.RawURLEncoding.EncodeToString(append([]byte{9}, raw[1:]...)),
		"a job name":     "jobs/000000000000000000000000",
	} {
		if _, _, err := s.List("usera", 0, 1, token); !errors.Is(err, ErrBadPageToken) {
			t.Errorf("%s token %q: %v, want ErrBadPageToken", name, token, err)
		}
	}
	if _, _, err := s.List("usera", frustumv1.Job_QUEUED, 1, next); !errors.Is(err, ErrBadPageToken) {
		t.Errorf("token of the unfiltered list used with a state filter: %v, want ErrBadPageToken", err)
	}
	// A good token of usera's gives userb nothing of usera's.
	if jobs, _, err := s.List("userb", 0, 10, next); err != nil || len(jobs) != 0 {
		t.Errorf("userb with usera's token: %v, %v", names(jobs), err)
	}
}

// Retention (the brief: remove every finished job that ended before t).
func TestDeleteFinishedBefore(t *testing.T) {
	s, _ := openTemp(t)
	now := time.Now()
	type tc struct {
		state frustumv1.Job_State
		end   time.Time
		gone  bool
	}
	cases := []tc{
		{frustumv1.Job_SUCCEEDED, now.Add(-2 * time.Hour), true},
		{frustumv1.Job_FAILED, now.Add(-3 * time.Hour), true},
		{frustumv1.Job_CANCELLED, now.Add(-61 * time.Minute), true},
		{frustumv1.Job_SUCCEEDED, now.Add(-59 * time.Minute), false},
		{frustumv1.Job_CANCELLED, now, false},
		{frustumv1.Job_SUCCEEDED, time.Time{}, false}, // no end time: kept
		{frustumv1.Job_QUEUED, time.Time{}, false},
		{frustumv1.Job_RUNNING, now.Add(-5 * time.Hour), false}, // unfinished: kept whatever it says
	}
	var jobs []*frustumv1.Job
	for i, c := range cases {
		j := mustCreate(t, s, queued("usera", string(rune('a'+i))))
		j, err := s.SetResult(j.Name, "frustum.v1.SpectrumResult", []byte{byte(i)}, func(j *frustumv1.Job) error {
			j.SpecHash = "h"
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		jobs = append(jobs, setState(t, s, j.Name, c.state, c.end))
	}
	n, err := s.DeleteFinishedBefore(now.Add(-time.Hour))
	if err != nil {
		t.Fatal(err)
	}
	if n != 3 {
		t.Errorf("removed %d jobs, want 3", n)
	}
	for i, c := range cases {
		_, err := s.Get(jobs[i].Name)
		_, _, rerr := s.Result(jobs[i].Name)
		if c.gone && (err != ErrNotFound || rerr != ErrNotFound) {
			t.Errorf("case %d (%v): Get %v, Result %v, want both ErrNotFound", i, c.state, err, rerr)
		}
		if !c.gone && (err != nil || rerr != nil) {
			t.Errorf("case %d (%v): Get %v, Result %v, want it kept", i, c.state, err, rerr)
		}
	}
	if got, _ := listAll(t, s, "usera", 0, 100); len(got) != 5 {
		t.Errorf("List after retention: %d jobs, want 5", len(got))
	}
	// The newest surviving SUCCEEDED job with an end time is case 5 (no end
	// time, newer than case 3).
	if j, ok, _ := s.FindSucceeded("usera", "h"); !ok || j.Name != jobs[5].Name {
		t.Errorf("FindSucceeded after retention: %v %v, want %s", j, ok, jobs[5].Name)
	}
	// Request ids of removed jobs are free again.
	if _, created, err := s.Create(queued("usera", "a")); err != nil || !created {
		t.Errorf("request id of a removed job: created %v, %v", created, err)
	}
	if n, err := s.DeleteFinishedBefore(now.Add(-time.Hour)); err != nil || n != 0 {
		t.Errorf("second retention pass: %d, %v; want 0", n, err)
	}
}
