package store

import (
	"bytes"
	"path/filepath"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	frustumv1 "frustum/proto/frustum/v1"
)

// openTemp opens a store in a fresh directory below the test's temporary
// directory (so that Open has to create the parent) and closes it at the
// end of the test, after checking that its indexes are consistent.
func openTemp(t testing.TB) (*Store, string) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "data", "jobs.db")
	s, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if tt, ok := t.(*testing.T); ok && !tt.Failed() {
			checkIndexes(tt, s)
		}
		s.Close()
	})
	return s, path
}

// dimerSpec is a small valid-looking spec; the store does not interpret it.
func dimerSpec(levels int32) *frustumv1.JobSpec {
	half := 0.5
	j := 1.0
	return &frustumv1.JobSpec{
		Cluster: &frustumv1.Cluster{
			Name: "dimer",
			Sites: []*frustumv1.Site{
				{Label: "a", Spin: &half},
				{Label: "b", Spin: &half},
			},
			Bonds: []*frustumv1.Bond{{A: "a", B: "b", Exchange: &j}},
		},
		Task: &frustumv1.JobSpec_Spectrum{Spectrum: &frustumv1.SpectrumParameters{Levels: levels}},
	}
}

// queued is a job as the service would hand it to Create.
func queued(owner, requestID string) *frustumv1.Job {
	return &frustumv1.Job{
		Owner:      owner,
		RequestId:  requestID,
		Spec:       dimerSpec(4),
		Task:       "spectrum",
		State:      frustumv1.Job_QUEUED,
		CreateTime: timestamppb.Now(),
	}
}

func mustCreate(t testing.TB, s *Store, job *frustumv1.Job) *frustumv1.Job {
	t.Helper()
	stored, created, err := s.Create(job)
	if err != nil {
		t.Fatal(err)
	}
	if !created {
		t.Fatalf("Create(%v): created false", job)
	}
	return stored
}

func setState(t testing.TB, s *Store, name string, state frustumv1.Job_State, end time.Time) *frustumv1.Job {
	t.Helper()
	job, err := s.Update(name, func(j *frustumv1.Job) error {
		j.State = state
		if !end.IsZero() {
			j.EndTime = timestamppb.New(end)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return job
}

func names(jobs []*frustumv1.Job) []string {
	out := make([]string, len(jobs))
	for i, j := range jobs {
		out[i] = j.Name
	}
	return out
}

// checkIndexes reads the buckets directly and checks the invariants that
// every operation must keep (invariant, no source): every job has exactly
// one owner entry, under its owner, whose value is its state; every owner
// entry has its job; every request id entry points to a job of that owner
// with that request id, and every job with a request id has its entry;
// every spec entry points to a job of that owner and hash that has a
// result; every result belongs to a job; every job with a spec hash and a
// result has its spec entry; no job keeps its result inline.
func checkIndexes(t *testing.T, s *Store) {
	t.Helper()
	err := s.db.View(func(btx *bolt.Tx) error {
		b := buckets(btx)
		jobs := map[string]*frustumv1.Job{}
		err := b.jobs.ForEach(func(id, v []byte) error {
			job := new(frustumv1.Job)
			if err := proto.Unmarshal(v, job); err != nil {
				return err
			}
			if job.Name != jobName(id) {
				t.Errorf("job under key %s is named %s", id, job.Name)
			}
			if job.Result != nil {
				t.Errorf("%s keeps its result inline", job.Name)
			}
			jobs[string(id)] = job
			return nil
		})
		if err != nil {
			return err
		}
		ownerEntries := 0
		b.owners.ForEach(func(k, v []byte) error {
			ownerEntries++
			i := bytes.IndexByte(k, 0)
			owner, id := string(k[:i]), k[i+1:]
			job := jobs[string(id)]
			switch {
			case job == nil:
				t.Errorf("owner entry %q for missing job", k)
			case job.Owner != owner:
				t.Errorf("owner entry %q for a job of %q", k, job.Owner)
			case !bytes.Equal(v, stateValue(job.State)):
				t.Errorf("owner entry %q says state %s, job is %v", k, v, job.State)
			}
			return nil
		})
		if ownerEntries != len(jobs) {
			t.Errorf("%d owner entries for %d jobs", ownerEntries, len(jobs))
		}
		b.requests.ForEach(func(k, v []byte) error {
			i := bytes.IndexByte(k, 0)
			job := jobs[string(v)]
			if job == nil || job.Owner != string(k[:i]) || job.RequestId != string(k[i+1:]) {
				t.Errorf("request entry %q -> %s does not match its job %v", k, v, job)
			}
			return nil
		})
		b.specs.ForEach(func(k, v []byte) error {
			job := jobs[string(v)]
			if job == nil || !bytes.Equal(k, specKey(job.Owner, job.SpecHash, v)) || b.results.Get(v) == nil {
				t.Errorf("spec entry %q -> %s does not match a job with a result", k, v)
			}
			return nil
		})
		b.results.ForEach(func(id, _ []byte) error {
			if jobs[string(id)] == nil {
				t.Errorf("result %s of a missing job", id)
			}
			return nil
		})
		for id, job := range jobs {
			if job.RequestId != "" && !bytes.Equal(b.requests.Get(requestKey(job.Owner, job.RequestId)), []byte(id)) {
				t.Errorf("%s: no request entry", job.Name)
			}
			if job.SpecHash != "" && b.results.Get([]byte(id)) != nil && b.specs.Get(specKey(job.Owner, job.SpecHash, []byte(id))) == nil {
				t.Errorf("%s: has a result and a spec hash but no spec entry", job.Name)
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}
