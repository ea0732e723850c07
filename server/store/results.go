package store

import (
	"bytes"
	"errors"
	"fmt"
	"strings"

	bolt "go.etcd.io/bbolt"

	frustumv1 "frustum/proto/frustum/v1"
)

// SetResult stores the serialized result of a job, typeName being the full
// name of its message (e.g. "frustum.v1.SpectrumResult"), and in the same
// transaction applies fn to the job as Update does, so that a job is never
// seen SUCCEEDED without its result. A result already stored is replaced.
// When the job (after fn) has a spec_hash, the job is recorded in the spec
// index for FindSucceeded. Errors are as for Update.
func (s *Store) SetResult(name, typeName string, data []byte, fn func(*frustumv1.Job) error) (*frustumv1.Job, error) {
	id, ok := parseName(name)
	if !ok {
		return nil, ErrNotFound
	}
	if !validTypeName(typeName) {
		return nil, fmt.Errorf("store: set result of %s: %q is not a message name", name, typeName)
	}
	var job *frustumv1.Job
	var fnErr error
	err := s.db.Update(func(t *bolt.Tx) error {
		b := buckets(t)
		if b.jobs.Get(id) == nil {
			return ErrNotFound
		}
		// The result goes in first, so that modify keeps the spec index of
		// a job that has a result.
		if err := b.putResult(id, typeName, data); err != nil {
			return err
		}
		var err error
		job, err = b.modify(id, func(j *frustumv1.Job) error {
			fnErr = fn(j)
			return fnErr
		})
		if err != nil {
			return err
		}
		return b.indexSpec(id, job)
	})
	if err != nil {
		return nil, wrapUpdateError("set result of", name, err, fnErr)
	}
	return job, nil
}

// Result returns the stored result of a job: the full name of its message
// and its serialization. It returns ErrNotFound if the job does not exist or
// has no result.
func (s *Store) Result(name string) (typeName string, data []byte, err error) {
	id, ok := parseName(name)
	if !ok {
		return "", nil, ErrNotFound
	}
	err = s.db.View(func(t *bolt.Tx) error {
		var d []byte
		var ok bool
		typeName, d, ok = buckets(t).result(id)
		if !ok {
			return ErrNotFound
		}
		data = bytes.Clone(d) // the transaction's memory is not ours to keep
		if data == nil {
			data = []byte{}
		}
		return nil
	})
	if err != nil {
		if errors.Is(err, ErrNotFound) {
			return "", nil, ErrNotFound
		}
		return "", nil, fmt.Errorf("store: result of %s: %w", name, err)
	}
	return typeName, data, nil
}

// FindSucceeded returns the newest job of owner in state SUCCEEDED with this
// spec hash that still exists and still has its result (spec included,
// result not), and false if there is none.
func (s *Store) FindSucceeded(owner, specHash string) (*frustumv1.Job, bool, error) {
	if specHash == "" || strings.IndexByte(owner, 0) >= 0 {
		return nil, false, nil
	}
	var found *frustumv1.Job
	err := s.db.View(func(t *bolt.Tx) error {
		b := buckets(t)
		prefix := specPrefix(owner, specHash)
		c := b.specs.Cursor()
		for k, _ := lastWithPrefix(c, prefix); k != nil && bytes.HasPrefix(k, prefix); k, _ = c.Prev() {
			id := idAfterPrefix(k, prefix)
			if id == nil {
				continue
			}
			job, err := b.job(id)
			if err != nil {
				return err
			}
			if job == nil || job.Owner != owner || job.SpecHash != specHash ||
				job.State != frustumv1.Job_SUCCEEDED || b.results.Get(id) == nil {
				continue
			}
			found = job
			return nil
		}
		return nil
	})
	if err != nil {
		return nil, false, fmt.Errorf("store: find succeeded job: %w", err)
	}
	return found, found != nil, nil
}
