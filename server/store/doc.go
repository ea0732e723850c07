// Package store is frustumd's durable job store: every job, its result and
// the indexes that find them, in one bbolt file.
//
// # Overview
//
// A Store holds jobs (frustumv1.Job, without their results) and results
// (serialized result messages with their type names). The service calls
// Create before CreateJob returns, Update at each change of state, SetResult
// when a job succeeds, and Unfinished after a restart to queue again what
// was queued or running. Every write is one bbolt read-write transaction,
// fsynced before the call returns: once Create has returned, the job
// survives a crash of frustumd (and of the machine, if the disk honours
// flushes).
//
//	s, err := store.Open(filepath.Join(dataDir, "jobs.db"))
//	job, created, err := s.Create(&frustumv1.Job{Owner: user, State: frustumv1.Job_QUEUED, ...})
//	job, err = s.Update(job.Name, func(j *frustumv1.Job) error { j.State = frustumv1.Job_RUNNING; return nil })
//	job, err = s.SetResult(job.Name, "frustum.v1.SpectrumResult", data, func(j *frustumv1.Job) error { j.State = frustumv1.Job_SUCCEEDED; return nil })
//
// # Names
//
// A job is named "jobs/{id}", the id being 24 lowercase hex characters: 16
// of the creation time in nanoseconds since 1970 (big-endian, so that ids
// sort by creation) and 8 random (crypto/rand). Ids are made inside the
// write transaction and their time part is lifted above the newest id
// stored, so they rise in commit order even when the clock stalls or steps
// back. Any other name is ErrNotFound.
//
// # Layout
//
// Jobs are binary protobuf (deterministic marshalling). Index keys start
// with the owner and a NUL byte, which is why Create refuses owners that
// contain NUL.
//
//	jobs      id                         -> Job (result oneof never set)
//	results   id                         -> type name, NUL, serialized result
//	owners    owner NUL id               -> job state (decimal enum number)
//	requests  owner NUL request_id       -> id
//	specs     owner NUL spec_hash NUL id -> id (jobs that have a result)
//	meta      "version"                  -> "1"
//
// # Invariants
//
// Every operation keeps the indexes consistent with the jobs, in the same
// transaction: each job has one owner entry holding its state; a job with a
// request id has its request entry; a job with a spec hash and a result has
// its spec entry; Delete and DeleteFinishedBefore remove the job, its result
// and all its entries. A job's name, owner and request id never change
// (Update refuses), and a result is stored only through Create or SetResult,
// so a job that SetResult marks SUCCEEDED is never seen without its result.
//
// # Concurrency
//
// A Store is safe for use by many goroutines. bbolt runs one read-write
// transaction at a time; reads (Get, List, Result, FindSucceeded, Stats) run
// beside it on a consistent snapshot. The function passed to Update or
// SetResult runs while the single writer lock is held: keep it short, and do
// not call the Store from it (that deadlocks).
//
// # Caveats and limitations
//
//   - One writer at a time, one fsync per write. Every Create, Update,
//     SetResult and Delete waits for its own fdatasync. BenchmarkCreate
//     measured 0.35 to 0.49 ms per create on the development machine (a
//     virtual disk, ext4), BenchmarkUpdate 0.32 ms per state transition,
//     and creates from parallel goroutines did no better (0.42 to 0.44 ms
//     each): writes are serialized, not batched. Disks that really flush on fsync
//     can be much slower; measure yours with
//     go test -bench . ./server/store/. So the service should store
//     progress at a modest rate (say once a second per job), not on every
//     callback of the engine.
//   - The file only grows. bbolt reuses the pages freed by deleted jobs and
//     results but never gives them back to the file system; the file stays
//     at its largest size until it is compacted offline, with frustumd
//     stopped (for example with bbolt's own CLI: bbolt compact -o new.db
//     jobs.db, then replace the file).
//   - Results live in the same file as single values (at most 2 GiB each, a
//     bbolt limit). A large result makes a large transaction, and Result
//     copies the whole result into memory; streaming it out in chunks is
//     the service's job.
//   - The whole file is memory-mapped: the virtual size of frustumd
//     includes it, and its pages are read in as they are touched.
//   - Unfinished, Stats and DeleteFinishedBefore read and decode every job;
//     List reads only the owner's index entries (and with a state filter
//     may pass over many of them) and decodes only the jobs it returns.
//     Retention (DeleteFinishedBefore) is what keeps these costs bounded.
//   - A finished job without an end_time is never removed by
//     DeleteFinishedBefore; the service must set end_time when a job ends.
//   - One process per file. Open takes bbolt's exclusive file lock and gives
//     up after one second with an error naming the file. The lock is an
//     flock(2), unreliable on network file systems: keep the data directory
//     on a local disk.
//   - Durability is tested by closing and reopening the file, not by
//     cutting the power; it rests on bbolt's copy-on-write design and on the
//     disk honouring fdatasync.
//   - Ids show when a job was created. Their 32 random bits make them hard
//     to guess but they are not a secret: access control is the service's
//     owner check. If the newest job was deleted and the clock stepped back
//     across a restart, a new id can sort before the deleted one (never
//     before a stored one).
//   - Page tokens are the last listed id and the state filter, base64url
//     encoded, neither signed nor encrypted. A forged token can only move
//     the start of a listing within the caller's own jobs.
//   - Keys are limited to 32 KiB by bbolt, which bounds owner plus request
//     id or spec hash; the service limits request ids to 128 characters.
//   - The format has a version (meta bucket) that Open checks, but no
//     migrations yet: a file of another version is refused.
package store
