package store

import (
	"bytes"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	bolt "go.etcd.io/bbolt"
	bolterrors "go.etcd.io/bbolt/errors"
	"google.golang.org/protobuf/proto"
)

// ErrNotFound is returned for a job (or result) that does not exist,
// including every name that is not "jobs/" followed by 24 lowercase hex
// characters.
var ErrNotFound = errors.New("job not found")

// Store is the durable job store. It is safe for concurrent use by many
// goroutines; bbolt runs one read-write transaction at a time and any number
// of read-only ones beside it.
type Store struct {
	db  *bolt.DB
	now func() time.Time // the clock of new ids: time.Now except in tests

	// idMu guards lastNS, the time part of the newest id handed out by this
	// process; ids are strictly increasing even if the clock stalls or steps
	// back.
	idMu   sync.Mutex
	lastNS uint64
}

// Bucket names; see doc.go for the layout.
var (
	bucketJobs     = []byte("jobs")
	bucketResults  = []byte("results")
	bucketOwners   = []byte("owners")
	bucketRequests = []byte("requests")
	bucketSpecs    = []byte("specs")
	bucketMeta     = []byte("meta")

	keyVersion = []byte("version")
)

// formatVersion is the layout version recorded in the meta bucket. A file
// written with another version is refused rather than misread.
const formatVersion = "1"

const (
	namePrefix = "jobs/"
	// idLen is the length of a job id in hex characters: 16 for the creation
	// time in nanoseconds, 8 random.
	idLen = 24
	// lockTimeout bounds the wait for the file lock held by another process.
	lockTimeout = time.Second
)

var marshalOptions = proto.MarshalOptions{Deterministic: true}

// Open opens the job database at path, creating the file (mode 0600) and
// its parent directory (mode 0700) if needed. Every commit is fsynced. If
// another process holds the file, Open fails after about a second with an
// error naming path.
func Open(path string) (*Store, error) {
	if path == "" {
		return nil, errors.New("store: open: empty path")
	}
	if err := os.MkdirAll(filepath.Dir(path), 0o700); err != nil {
		return nil, fmt.Errorf("store: open %s: %w", path, err)
	}
	db, err := bolt.Open(path, 0o600, &bolt.Options{Timeout: lockTimeout})
	if err != nil {
		if errors.Is(err, bolterrors.ErrTimeout) {
			return nil, fmt.Errorf("store: open %s: the file is locked by another process (is another frustumd using this data directory?): %w", path, err)
		}
		return nil, fmt.Errorf("store: open %s: %w", path, err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		for _, name := range [][]byte{bucketJobs, bucketResults, bucketOwners, bucketRequests, bucketSpecs, bucketMeta} {
			if _, err := tx.CreateBucketIfNotExists(name); err != nil {
				return err
			}
		}
		meta := tx.Bucket(bucketMeta)
		switch v := meta.Get(keyVersion); {
		case v == nil:
			return meta.Put(keyVersion, []byte(formatVersion))
		case string(v) != formatVersion:
			return fmt.Errorf("format version %q, this frustumd reads version %q", v, formatVersion)
		}
		return nil
	})
	if err != nil {
		db.Close()
		return nil, fmt.Errorf("store: open %s: %w", path, err)
	}
	return &Store{db: db, now: time.Now}, nil
}

// Close closes the database and releases the file lock. Calls after Close
// return errors.
func (s *Store) Close() error {
	return s.db.Close()
}

// parseName returns the id of a job name "jobs/{id}", or ok false if name is
// not of that form.
func parseName(name string) (id []byte, ok bool) {
	rest, found := strings.CutPrefix(name, namePrefix)
	if !found || !validID([]byte(rest)) {
		return nil, false
	}
	return []byte(rest), true
}

func validID(id []byte) bool {
	if len(id) != idLen {
		return false
	}
	for _, c := range id {
		if !('0' <= c && c <= '9' || 'a' <= c && c <= 'f') {
			return false
		}
	}
	return true
}

func jobName(id []byte) string { return namePrefix + string(id) }

// newID returns a fresh id: the creation time in nanoseconds (16 hex
// characters, big-endian) and 4 random bytes (8 hex characters). It is
// called inside the read-write transaction, so ids also increase in commit
// order; newest is the greatest id already stored, so that ids keep
// increasing across restarts even if the clock stepped back.
func (s *Store) newID(newest []byte) []byte {
	s.idMu.Lock()
	defer s.idMu.Unlock()
	ns := uint64(s.now().UnixNano())
	if ns <= s.lastNS {
		ns = s.lastNS + 1
	}
	if len(newest) == idLen {
		var prev [8]byte
		if _, err := hex.Decode(prev[:], newest[:16]); err == nil {
			if p := beUint64(prev[:]); ns <= p {
				ns = p + 1
			}
		}
	}
	s.lastNS = ns
	var raw [12]byte
	for i := range 8 {
		raw[i] = byte(ns >> (56 - 8*i))
	}
	rand.Read(raw[8:]) // never fails (Go 1.24+ crashes instead)
	id := make([]byte, idLen)
	hex.Encode(id, raw[:])
	return id
}

func beUint64(b []byte) uint64 {
	var v uint64
	for _, c := range b[:8] {
		v = v<<8 | uint64(c)
	}
	return v
}

// Index keys. An owner never contains NUL (Create refuses it), so
// owner+"\x00" is a prefix that no other owner's keys share.

func ownerPrefix(owner string) []byte {
	return append([]byte(owner), 0)
}

func ownerKey(owner string, id []byte) []byte {
	return append(ownerPrefix(owner), id...)
}

func requestKey(owner, requestID string) []byte {
	return append(ownerPrefix(owner), requestID...)
}

func specPrefix(owner, hash string) []byte {
	return append(append(ownerPrefix(owner), hash...), 0)
}

func specKey(owner, hash string, id []byte) []byte {
	return append(specPrefix(owner, hash), id...)
}

// lastWithPrefix positions c on the greatest key that starts with prefix,
// which must end in a NUL byte, and returns it (nil if there is none).
func lastWithPrefix(c *bolt.Cursor, prefix []byte) (k, v []byte) {
	upper := bytes.Clone(prefix)
	upper[len(upper)-1] = 1 // smallest key above every key with prefix
	if k, _ = c.Seek(upper); k == nil {
		k, v = c.Last()
	} else {
		k, v = c.Prev()
	}
	if k == nil || !bytes.HasPrefix(k, prefix) {
		return nil, nil
	}
	return k, v
}

// idAfterPrefix returns the id at the end of an index key prefix+id, or nil
// if the key is not exactly that long (a key of another owner or hash that
// merely shares the prefix bytes).
func idAfterPrefix(k, prefix []byte) []byte {
	if len(k) != len(prefix)+idLen || !bytes.HasPrefix(k, prefix) {
		return nil
	}
	return k[len(prefix):]
}
