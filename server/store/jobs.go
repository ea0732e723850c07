package store

import (
	"bytes"
	"errors"
	"fmt"
	"strconv"
	"strings"

	bolt "go.etcd.io/bbolt"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	frustumv1 "frustum/proto/frustum/v1"
)

// Create stores a new job durably: the transaction is fsynced before Create
// returns. It assigns the name "jobs/{id}" and sets nothing else; the caller
// sets owner, state, create time and the rest. job itself is not modified;
// the job as stored is returned.
//
// If job.RequestId is not empty and the owner already has a job with that
// request id, Create stores nothing and returns that job with created false.
// A result set in job's result oneof is stored as the job's result (as
// SetResult would) and not kept inline.
func (s *Store) Create(job *frustumv1.Job) (stored *frustumv1.Job, created bool, err error) {
	if job == nil {
		return nil, false, errors.New("store: create: nil job")
	}
	if strings.IndexByte(job.GetOwner(), 0) >= 0 {
		return nil, false, errors.New("store: create: owner contains a NUL byte")
	}
	job = proto.Clone(job).(*frustumv1.Job)
	resultType, result, err := takeResult(job)
	if err != nil {
		return nil, false, fmt.Errorf("store: create: %w", err)
	}
	err = s.db.Update(func(t *bolt.Tx) error {
		b := buckets(t)
		if job.RequestId != "" {
			if id := b.requests.Get(requestKey(job.Owner, job.RequestId)); id != nil {
				prior, err := b.job(id)
				if err != nil {
					return err
				}
				if prior == nil || prior.Owner != job.Owner {
					return fmt.Errorf("index inconsistent: request id of owner %q points to %s", job.Owner, id)
				}
				stored, created = prior, false
				return nil
			}
		}
		newest, _ := b.jobs.Cursor().Last()
		id := s.newID(newest)
		job.Name = jobName(id)
		if err := b.putJob(id, job); err != nil {
			return err
		}
		if job.RequestId != "" {
			if err := b.requests.Put(requestKey(job.Owner, job.RequestId), id); err != nil {
				return err
			}
		}
		if result != nil {
			if err := b.putResult(id, resultType, result); err != nil {
				return err
			}
			if err := b.indexSpec(id, job); err != nil {
				return err
			}
		}
		stored, created = job, true
		return nil
	})
	if err != nil {
		return nil, false, fmt.Errorf("store: create: %w", err)
	}
	return stored, created, nil
}

// takeResult removes the result oneof from job and returns it serialized,
// with its message's full name; data is nil if no result was set.
func takeResult(job *frustumv1.Job) (typeName string, data []byte, err error) {
	m := job.ProtoReflect()
	fd := m.WhichOneof(m.Descriptor().Oneofs().ByName("result"))
	if fd == nil {
		return "", nil, nil
	}
	data, err = marshalOptions.Marshal(m.Get(fd).Message().Interface())
	if err != nil {
		return "", nil, err
	}
	m.Clear(fd)
	if data == nil {
		data = []byte{} // an empty result message is still a result
	}
	return string(fd.Message().FullName()), data, nil
}

// Get returns the job, with its spec and without its result (see Result),
// or ErrNotFound.
func (s *Store) Get(name string) (*frustumv1.Job, error) {
	id, ok := parseName(name)
	if !ok {
		return nil, ErrNotFound
	}
	var job *frustumv1.Job
	err := s.db.View(func(t *bolt.Tx) error {
		var err error
		job, err = buckets(t).job(id)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("store: get %s: %w", name, err)
	}
	if job == nil {
		return nil, ErrNotFound
	}
	return job, nil
}

// Update applies fn to the stored job inside one read-write transaction,
// fsynced on commit, and returns the job as stored. An error from fn aborts
// the transaction and is returned unchanged. fn must not change the job's
// name, owner or request id, nor set its result (use SetResult); Update
// refuses with an error if it does. fn runs while the store's single writer
// lock is held: it should be quick and must not call the Store.
func (s *Store) Update(name string, fn func(*frustumv1.Job) error) (*frustumv1.Job, error) {
	id, ok := parseName(name)
	if !ok {
		return nil, ErrNotFound
	}
	var job *frustumv1.Job
	var fnErr error
	err := s.db.Update(func(t *bolt.Tx) error {
		var err error
		job, err = buckets(t).modify(id, func(j *frustumv1.Job) error {
			fnErr = fn(j)
			return fnErr
		})
		return err
	})
	if err != nil {
		return nil, wrapUpdateError("update", name, err, fnErr)
	}
	return job, nil
}

// wrapUpdateError returns fn's own error and ErrNotFound unchanged and adds
// the operation and job name to the store's errors.
func wrapUpdateError(op, name string, err, fnErr error) error {
	if (fnErr != nil && err == fnErr) || err == ErrNotFound {
		return err
	}
	return fmt.Errorf("store: %s %s: %w", op, name, err)
}

// Delete removes the job, its result and its index entries, or returns
// ErrNotFound if there is no such job.
func (s *Store) Delete(name string) error {
	id, ok := parseName(name)
	if !ok {
		return ErrNotFound
	}
	return s.db.Update(func(t *bolt.Tx) error {
		b := buckets(t)
		job, err := b.job(id)
		if err != nil {
			return fmt.Errorf("store: delete %s: %w", name, err)
		}
		if job == nil {
			return ErrNotFound
		}
		if err := b.deleteJob(id, job); err != nil {
			return fmt.Errorf("store: delete %s: %w", name, err)
		}
		return nil
	})
}

// jobBuckets holds the buckets of one transaction and the operations that keep the
// indexes consistent with the jobs.
type jobBuckets struct {
	jobs, results, owners, requests, specs *bolt.Bucket
}

func buckets(t *bolt.Tx) jobBuckets {
	return jobBuckets{
		jobs:     t.Bucket(bucketJobs),
		results:  t.Bucket(bucketResults),
		owners:   t.Bucket(bucketOwners),
		requests: t.Bucket(bucketRequests),
		specs:    t.Bucket(bucketSpecs),
	}
}

// job decodes the stored job id; nil (and no error) if there is none.
func (b jobBuckets) job(id []byte) (*frustumv1.Job, error) {
	v := b.jobs.Get(id)
	if v == nil {
		return nil, nil
	}
	job := new(frustumv1.Job)
	if err := proto.Unmarshal(v, job); err != nil {
		return nil, fmt.Errorf("decode job %s: %w", id, err)
	}
	return job, nil
}

// putJob writes the job and its owner index entry, whose value is the
// job's state, so that List can filter by state without decoding jobs.
func (b jobBuckets) putJob(id []byte, job *frustumv1.Job) error {
	v, err := marshalOptions.Marshal(job)
	if err != nil {
		return fmt.Errorf("encode job %s: %w", id, err)
	}
	if err := b.jobs.Put(id, v); err != nil {
		return err
	}
	return b.owners.Put(ownerKey(job.Owner, id), stateValue(job.State))
}

// modify applies fn to a clone of the stored job and stores the result,
// keeping the spec index consistent.
func (b jobBuckets) modify(id []byte, fn func(*frustumv1.Job) error) (*frustumv1.Job, error) {
	old, err := b.job(id)
	if err != nil {
		return nil, err
	}
	if old == nil {
		return nil, ErrNotFound
	}
	job := proto.Clone(old).(*frustumv1.Job)
	if err := fn(job); err != nil {
		return nil, err
	}
	switch {
	case job.Name != old.Name:
		return nil, fmt.Errorf("the name may not change (to %q)", job.Name)
	case job.Owner != old.Owner:
		return nil, fmt.Errorf("the owner may not change (from %q to %q)", old.Owner, job.Owner)
	case job.RequestId != old.RequestId:
		return nil, errors.New("the request id may not change")
	case job.Result != nil:
		return nil, errors.New("the result is not kept inline in the job; use SetResult")
	}
	if err := b.putJob(id, job); err != nil {
		return nil, err
	}
	if job.SpecHash != old.SpecHash {
		if old.SpecHash != "" {
			if err := b.specs.Delete(specKey(old.Owner, old.SpecHash, id)); err != nil {
				return nil, err
			}
		}
		if b.results.Get(id) != nil {
			if err := b.indexSpec(id, job); err != nil {
				return nil, err
			}
		}
	}
	return job, nil
}

// putResult stores a result of job id: its message's full name, a NUL byte
// and its serialization.
func (b jobBuckets) putResult(id []byte, typeName string, data []byte) error {
	v := make([]byte, 0, len(typeName)+1+len(data))
	v = append(append(append(v, typeName...), 0), data...)
	return b.results.Put(id, v)
}

// indexSpec records job id, which has a result, in the spec index if it
// has a spec hash.
func (b jobBuckets) indexSpec(id []byte, job *frustumv1.Job) error {
	if job.SpecHash == "" {
		return nil
	}
	return b.specs.Put(specKey(job.Owner, job.SpecHash, id), id)
}

// result splits a stored result into its type name and data (aliasing the
// transaction's memory).
func (b jobBuckets) result(id []byte) (typeName string, data []byte, ok bool) {
	v := b.results.Get(id)
	if v == nil {
		return "", nil, false
	}
	i := bytes.IndexByte(v, 0)
	if i < 0 {
		return "", nil, false
	}
	return string(v[:i]), v[i+1:], true
}

// deleteJob removes job id, its result and every index entry of it.
func (b jobBuckets) deleteJob(id []byte, job *frustumv1.Job) error {
	if err := b.jobs.Delete(id); err != nil {
		return err
	}
	if err := b.results.Delete(id); err != nil {
		return err
	}
	if err := b.owners.Delete(ownerKey(job.Owner, id)); err != nil {
		return err
	}
	if job.RequestId != "" {
		k := requestKey(job.Owner, job.RequestId)
		if bytes.Equal(b.requests.Get(k), id) {
			if err := b.requests.Delete(k); err != nil {
				return err
			}
		}
	}
	if job.SpecHash != "" {
		if err := b.specs.Delete(specKey(job.Owner, job.SpecHash, id)); err != nil {
			return err
		}
	}
	return nil
}

// stateValue is the owner index value of a job in state: the enum number
// in decimal.
func stateValue(state frustumv1.Job_State) []byte {
	return strconv.AppendInt(nil, int64(state), 10)
}

func validTypeName(name string) bool {
	return name != "" && protoreflect.FullName(name).IsValid()
}
