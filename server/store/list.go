package store

import (
	"bytes"
	"encoding/base64"
	"encoding/binary"
	"encoding/hex"
	"errors"
	"fmt"
	"strings"
	"time"

	bolt "go.etcd.io/bbolt"

	frustumv1 "frustum/proto/frustum/v1"
)

// ErrBadPageToken is wrapped by the error List returns for a page token it
// did not issue, or issued for another state filter.
var ErrBadPageToken = errors.New("bad page token")

const (
	defaultPageSize = 50
	maxPageSize     = 1000
	// tokenVersion is the first byte of every page token.
	tokenVersion = 1
)

// List returns owner's jobs newest first, without their specs, optionally
// only those in state (STATE_UNSPECIFIED: all). It returns at most pageSize
// jobs (at most 1000; 0 or less means 50), starting after the job named by
// pageToken ("" for the first page). next is the token of the following
// page, "" on the last page. A page token is opaque; one that List did not
// issue, or issued with another state, gives an error wrapping
// ErrBadPageToken. Paging stays correct while jobs are created (they appear
// on the first page, not later ones) and deleted (even the job that the
// token points after).
//
// List reads only owner's part of the owner index and the jobs it returns.
func (s *Store) List(owner string, state frustumv1.Job_State, pageSize int, pageToken string) (jobs []*frustumv1.Job, next string, err error) {
	switch {
	case pageSize <= 0:
		pageSize = defaultPageSize
	case pageSize > maxPageSize:
		pageSize = maxPageSize
	}
	var after []byte
	if pageToken != "" {
		after, err = decodePageToken(pageToken, state)
		if err != nil {
			return nil, "", err
		}
	}
	if strings.IndexByte(owner, 0) >= 0 {
		return nil, "", nil // no such owner can exist
	}
	var want []byte
	if state != frustumv1.Job_STATE_UNSPECIFIED {
		want = stateValue(state)
	}
	err = s.db.View(func(t *bolt.Tx) error {
		b := buckets(t)
		prefix := ownerPrefix(owner)
		c := b.owners.Cursor()
		var k, v []byte
		if after == nil {
			k, v = lastWithPrefix(c, prefix)
		} else {
			// The greatest key before prefix+after, whether or not that job
			// still exists.
			if k, _ = c.Seek(ownerKey(owner, after)); k == nil {
				k, v = c.Last()
			} else {
				k, v = c.Prev()
			}
		}
		for ; k != nil && bytes.HasPrefix(k, prefix); k, v = c.Prev() {
			id := idAfterPrefix(k, prefix)
			if id == nil || (want != nil && !bytes.Equal(v, want)) {
				continue
			}
			if len(jobs) == pageSize {
				// There is at least one more: the last page is not this one.
				next = encodePageToken(jobs[len(jobs)-1].Name, state)
				return nil
			}
			job, err := b.job(id)
			if err != nil {
				return err
			}
			if job == nil || job.Owner != owner || (want != nil && job.State != state) {
				continue // not reachable while the index is consistent
			}
			job.Spec = nil
			jobs = append(jobs, job)
		}
		return nil
	})
	if err != nil {
		return nil, "", fmt.Errorf("store: list jobs of %q: %w", owner, err)
	}
	return jobs, next, nil
}

// A page token is base64url (unpadded) of: the version byte, the 12 bytes
// of the id of the last job listed, and the state filter as a varint.

func encodePageToken(name string, state frustumv1.Job_State) string {
	id, _ := parseName(name)
	raw := make([]byte, 1+12, 1+12+binary.MaxVarintLen64)
	raw[0] = tokenVersion
	if _, err := hex.Decode(raw[1:13], id); err != nil {
		panic("store: encodePageToken: bad id " + name) // ids are made by newID
	}
	raw = binary.AppendVarint(raw, int64(state))
	return base64.RawURLEncoding.EncodeToString(raw)
}

func decodePageToken(token string, state frustumv1.Job_State) (id []byte, err error) {
	raw, err := base64.RawURLEncoding.DecodeString(token)
	if err != nil || len(raw) < 1+12+1 || raw[0] != tokenVersion {
		return nil, fmt.Errorf("store: list: %w", ErrBadPageToken)
	}
	st, n := binary.Varint(raw[13:])
	if n <= 0 || 13+n != len(raw) {
		return nil, fmt.Errorf("store: list: %w", ErrBadPageToken)
	}
	if frustumv1.Job_State(st) != state {
		return nil, fmt.Errorf("store: list: %w: it was issued for state %v, not %v", ErrBadPageToken, frustumv1.Job_State(st), state)
	}
	id = make([]byte, idLen)
	hex.Encode(id, raw[1:13])
	return id, nil
}

// Unfinished returns every QUEUED or RUNNING job of every owner, oldest
// first, with their specs: the work to recover and schedule after a
// restart. It reads every job.
func (s *Store) Unfinished() ([]*frustumv1.Job, error) {
	var jobs []*frustumv1.Job
	err := s.eachJob(func(_ []byte, job *frustumv1.Job) error {
		if job.State == frustumv1.Job_QUEUED || job.State == frustumv1.Job_RUNNING {
			jobs = append(jobs, job)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("store: unfinished jobs: %w", err)
	}
	return jobs, nil
}

// Stats returns the number of jobs in each state (states without jobs are
// absent). It reads every job.
func (s *Store) Stats() (map[frustumv1.Job_State]int, error) {
	n := make(map[frustumv1.Job_State]int)
	err := s.eachJob(func(_ []byte, job *frustumv1.Job) error {
		n[job.State]++
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("store: stats: %w", err)
	}
	return n, nil
}

// eachJob calls fn for every stored job, oldest first, in one read-only
// transaction.
func (s *Store) eachJob(fn func(id []byte, job *frustumv1.Job) error) error {
	return s.db.View(func(t *bolt.Tx) error {
		b := buckets(t)
		return b.jobs.ForEach(func(id, _ []byte) error {
			job, err := b.job(id)
			if err != nil {
				return err
			}
			return fn(id, job)
		})
	})
}

// DeleteFinishedBefore removes every SUCCEEDED, FAILED or CANCELLED job
// whose end_time is before t, with its result and index entries, in one
// transaction, and returns how many it removed. A finished job without an
// end_time is kept.
func (s *Store) DeleteFinishedBefore(t time.Time) (int, error) {
	n := 0
	err := s.db.Update(func(btx *bolt.Tx) error {
		n = 0
		b := buckets(btx)
		type victim struct {
			id  []byte
			job *frustumv1.Job
		}
		var victims []victim
		err := b.jobs.ForEach(func(id, _ []byte) error {
			job, err := b.job(id)
			if err != nil {
				return err
			}
			switch job.State {
			case frustumv1.Job_SUCCEEDED, frustumv1.Job_FAILED, frustumv1.Job_CANCELLED:
				if job.EndTime != nil && job.EndTime.AsTime().Before(t) {
					victims = append(victims, victim{bytes.Clone(id), job})
				}
			}
			return nil
		})
		if err != nil {
			return err
		}
		// Deleting only after the scan: bbolt cursors must not see their
		// bucket change under them.
		for _, v := range victims {
			if err := b.deleteJob(v.id, v.job); err != nil {
				return err
			}
		}
		n = len(victims)
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("store: delete finished jobs: %w", err)
	}
	return n, nil
}
