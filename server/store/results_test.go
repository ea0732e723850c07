package store

import (
	"bytes"
	"errors"
	"testing"

	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	frustumv1 "frustum/proto/frustum/v1"
)

func succeed(hash string) func(*frustumv1.Job) error {
	return func(j *frustumv1.Job) error {
		j.State = frustumv1.Job_SUCCEEDED
		j.EndTime = timestamppb.Now()
		j.SpecHash = hash
		return nil
	}
}

// SetResult stores the result with the job's transition, Result returns it,
// Get never includes it, and FindSucceeded finds the newest succeeded job of
// the owner with the spec hash that still exists (the brief; invariant).
func TestSetResultAndFindSucceeded(t *testing.T) {
	s, _ := openTemp(t)
	result, err := proto.Marshal(&frustumv1.SpectrumResult{ClusterName: "dimer", Energies: []float64{-0.75, 0.25}})
	if err != nil {
		t.Fatal(err)
	}
	older := mustCreate(t, s, queued("usera", ""))
	newer := mustCreate(t, s, queued("usera", ""))
	failed := mustCreate(t, s, queued("usera", ""))
	userbs := mustCreate(t, s, queued("userb", ""))

	if _, ok, err := s.FindSucceeded("usera", "h1"); ok || err != nil {
		t.Errorf("FindSucceeded before any result: %v, %v", ok, err)
	}
	j, err := s.SetResult(older.Name, "frustum.v1.SpectrumResult", result, succeed("h1"))
	if err != nil {
		t.Fatal(err)
	}
	if j.State != frustumv1.Job_SUCCEEDED || j.SpecHash != "h1" || j.Result != nil {
		t.Errorf("SetResult returned %v", j)
	}
	typ, data, err := s.Result(older.Name)
	if err != nil || typ != "frustum.v1.SpectrumResult" || !bytes.Equal(data, result) {
		t.Errorf("Result = %q, %x, %v", typ, data, err)
	}
	if got, _ := s.Get(older.Name); got.Result != nil || got.Spec == nil {
		t.Errorf("Get after SetResult: result %v, spec %v", got.Result, got.Spec)
	}
	if _, _, err := s.Result(newer.Name); err != ErrNotFound {
		t.Errorf("Result of a job without one: %v, want ErrNotFound", err)
	}

	if _, err := s.SetResult(newer.Name, "frustum.v1.SpectrumResult", result, succeed("h1")); err != nil {
		t.Fatal(err)
	}
	// A failed job with the hash and a result does not count.
	if _, err := s.SetResult(failed.Name, "frustum.v1.SpectrumResult", result, func(j *frustumv1.Job) error {
		j.State, j.SpecHash = frustumv1.Job_FAILED, "h1"
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	if _, err := s.SetResult(userbs.Name, "frustum.v1.SpectrumResult", result, succeed("h1")); err != nil {
		t.Fatal(err)
	}

	find := func(owner, hash string) string {
		t.Helper()
		j, ok, err := s.FindSucceeded(owner, hash)
		if err != nil {
			t.Fatal(err)
		}
		if !ok {
			return ""
		}
		if j.Spec == nil || j.Result != nil {
			t.Errorf("FindSucceeded: spec %v, result %v", j.Spec, j.Result)
		}
		return j.Name
	}
	if got := find("usera", "h1"); got != newer.Name {
		t.Errorf("FindSucceeded = %q, want the newer job %s", got, newer.Name)
	}
	if got := find("userb", "h1"); got != userbs.Name {
		t.Errorf("userb: FindSucceeded = %q, want %s", got, userbs.Name)
	}
	for _, c := range [][2]string{{"usera", "h2"}, {"usera", ""}, {"userc", "h1"}, {"usera\x00", "h1"}} {
		if got := find(c[0], c[1]); got != "" {
			t.Errorf("FindSucceeded(%q, %q) = %s, want none", c[0], c[1], got)
		}
	}
	if err := s.Delete(newer.Name); err != nil {
		t.Fatal(err)
	}
	if got := find("usera", "h1"); got != older.Name {
		t.Errorf("after deleting the newer: FindSucceeded = %q, want %s", got, older.Name)
	}
	if err := s.Delete(older.Name); err != nil {
		t.Fatal(err)
	}
	if got := find("usera", "h1"); got != "" {
		t.Errorf("after deleting both: FindSucceeded = %q, want none", got)
	}
	if _, _, err := s.Result(older.Name); err != ErrNotFound {
		t.Errorf("Result after Delete: %v, want ErrNotFound", err)
	}
	// Changing a job's spec hash moves its spec index entry.
	if _, err := s.Update(userbs.Name, func(j *frustumv1.Job) error { j.SpecHash = "h3"; return nil }); err != nil {
		t.Fatal(err)
	}
	if find("userb", "h1") != "" || find("userb", "h3") != userbs.Name {
		t.Errorf("spec hash change not indexed")
	}
}

// SetResult is one transaction: if fn fails, or the type name is not a
// message name, neither result nor job changes (the brief: a job is never
// SUCCEEDED without its result, nor has a result it did not accept).
func TestSetResultAtomic(t *testing.T) {
	s, _ := openTemp(t)
	job := mustCreate(t, s, queued("usera", ""))
	errLate := errors.New("cancelled meanwhile")
	if _, err := s.SetResult(job.Name, "frustum.v1.SpectrumResult", []byte("x"), func(j *frustumv1.Job) error {
		j.State = frustumv1.Job_SUCCEEDED
		return errLate
	}); err != errLate {
		t.Errorf("SetResult returned %v, want fn's error itself", err)
	}
	if _, err := s.SetResult(job.Name, "frustum.v1.SpectrumResult", []byte("x"), func(j *frustumv1.Job) error {
		j.Owner = "userm"
		return nil
	}); err == nil {
		t.Error("SetResult changing the owner: no error")
	}
	if _, err := s.SetResult(job.Name, "not a name!", []byte("x"), succeed("h")); err == nil {
		t.Error("SetResult with a bad type name: no error")
	}
	if _, _, err := s.Result(job.Name); err != ErrNotFound {
		t.Errorf("Result after failed SetResults: %v, want ErrNotFound", err)
	}
	if got, _ := s.Get(job.Name); !proto.Equal(got, job) {
		t.Errorf("job changed by failed SetResults: %v", got)
	}
	if _, ok, _ := s.FindSucceeded("usera", "h"); ok {
		t.Error("FindSucceeded found a job whose SetResult failed")
	}
	// An empty result is a result.
	if _, err := s.SetResult(job.Name, "frustum.v1.ThermoResult", nil, succeed("h")); err != nil {
		t.Fatal(err)
	}
	if typ, data, err := s.Result(job.Name); err != nil || typ != "frustum.v1.ThermoResult" || data == nil || len(data) != 0 {
		t.Errorf("empty result: %q %v %v", typ, data, err)
	}
}

// A result set inline on Create is stored as the job's result (the brief),
// e.g. a job copied from the cache.
func TestCreateWithInlineResult(t *testing.T) {
	s, _ := openTemp(t)
	res := &frustumv1.ThermoResult{ClusterName: "dimer", Temperature: []float64{1, 2}}
	in := queued("usera", "")
	in.State, in.SpecHash, in.FromCache = frustumv1.Job_SUCCEEDED, "h", true
	in.Result = &frustumv1.Job_ThermoResult{ThermoResult: res}
	job := mustCreate(t, s, in)
	if job.Result != nil {
		t.Errorf("Create kept the result inline")
	}
	if in.Result == nil {
		t.Errorf("Create took the result out of its argument")
	}
	typ, data, err := s.Result(job.Name)
	if err != nil || typ != "frustum.v1.ThermoResult" {
		t.Fatalf("Result = %q, %v", typ, err)
	}
	got := new(frustumv1.ThermoResult)
	if err := proto.Unmarshal(data, got); err != nil || !proto.Equal(got, res) {
		t.Errorf("stored result %v (%v), want %v", got, err, res)
	}
	if j, ok, _ := s.FindSucceeded("usera", "h"); !ok || j.Name != job.Name {
		t.Errorf("FindSucceeded: %v, %v", j, ok)
	}
}
