// Package server is frustumd: Frustum's JobService over gRPC, with a
// durable job store, a fair scheduler with memory admission, token
// authentication, health checking and server reflection.
//
// # Overview
//
// New checks a Config, opens the store (DataDir/jobs.db, package
// server/store) and recovers its jobs; Serve serves a listener; Shutdown
// stops in order. cmd/frustumd is a thin main around these three:
//
//	srv, err := server.New(server.Config{DataDir: dir}, slog.Default())
//	...
//	go srv.Serve(nil) // listens on Config.Listen, 127.0.0.1:7447 by default
//	...
//	srv.Shutdown(ctx) // on SIGTERM
//
// A job is a resource "jobs/{24 hex}" owned by the user who created it. Its
// life is
//
//	QUEUED -> RUNNING -> SUCCEEDED | FAILED | CANCELLED
//	   \________________________________________/ CancelJob
//	RUNNING -> QUEUED     when the server stops while it runs (attempts kept)
//
// Every transition is written to the store and synced before anyone is told
// of it; progress (stage, done, total, fraction, seconds left) is kept in
// memory only, and WatchJob streams pass it on at most ten times a second,
// and every state change at once.
//
// # Invariants
//
//   - A job is synced to disk before CreateJob returns, and a restart finds
//     it again: RUNNING jobs are queued again, QUEUED ones are scheduled
//     (oldest first) when Serve starts.
//   - A job runs at most once per attempt (the QUEUED -> RUNNING transition
//     is checked in the store's transaction), and a job whose result is
//     stored is never run again (result and SUCCEEDED are one transaction).
//   - A user reaches only their own jobs; identical specs (the SHA-256 of
//     the deterministic serialization, Job.spec_hash) are answered from the
//     same user's stored result at once, marked from_cache.
//   - The memory estimates of the running jobs add up to at most
//     Config.MaxMemory; a job that could never fit is refused at create time.
//
// # Scheduling
//
// Config.Workers slots. Each owner has a FIFO queue; the owners with queued
// jobs are served round-robin, one job per turn. A job starts when a slot is
// free and its memory estimate fits beside the running jobs'. When the job
// whose turn it is does not fit, its memory is reserved and later owners'
// jobs start beside it only within what remains, so a large job is not
// starved by small ones. Each job's engine gets max(1, NumCPU/Workers)
// goroutines.
//
// # Status codes
//
//	INVALID_ARGUMENT     a bad spec or request field; a google.rpc.BadRequest
//	                     detail names every field by its dotted path
//	                     (spec.cluster.bonds[3].b, spec.thermo.temperatures[0],
//	                     name, page_token, request_id)
//	RESOURCE_EXHAUSTED   a task that can never fit MaxMemory (ErrorInfo
//	                     metadata need_bytes and limit_bytes, QuotaFailure, and
//	                     the message names both); a cluster over MaxSites or
//	                     beyond 2^31 states (BadRequest on spec.cluster.sites);
//	                     a request over MaxRequestBytes (from gRPC, before
//	                     anything is decoded)
//	NOT_FOUND            no job of that name
//	PERMISSION_DENIED    another user's job
//	FAILED_PRECONDITION  cancelling a finished job, deleting an unfinished one,
//	                     the result of a job that did not succeed
//	UNAUTHENTICATED      no token, a malformed one or an unknown one
//	UNAVAILABLE          CreateJob during shutdown; watches end with it too
//	INTERNAL             the store failed (the cause is logged, not sent)
//
// Every error carries a google.rpc.ErrorInfo with domain "frustum" and a
// reason (INVALID_SPEC, MEMORY_LIMIT, CLUSTER_TOO_LARGE, JOB_NOT_FOUND,
// NOT_OWNER, JOB_FINISHED, ...). A job that fails stores a JobError with the
// canonical code name (INVALID_ARGUMENT, INTERNAL for a numerical failure or
// a panic of the engine, ...), the message and the field violations.
//
// # Security
//
// On a loopback address (127.0.0.0/8, ::1, localhost) the server needs no
// authentication and every caller is LocalUser. On any other address New
// refuses to start unless it has a TLS certificate and key and a token
// file (ParseTokens: lines "NAME SHA256HEX"). Clients send
// "authorization: Bearer TOKEN"; the interceptors refuse other calls with
// UNAUTHENTICATED, except health checks and reflection, which stay open so
// that standard tools work.
//
// # Caveats and limitations
//
//   - Cancellation reaches the engine through its context, which the engine
//     checks between units of work (a sector, a field point). The job is
//     CANCELLED at once, but a single dense diagonalization in progress runs
//     to its end, and its slot and memory are freed only then.
//   - Progress is not stored: after a restart a job's progress starts again.
//   - The memory admission trusts the engine's estimate; it does not measure
//     the process.
//   - One frustumd per data directory: the store holds a file lock.
//   - Results are kept until deleted or until Config.Retention; nothing
//     bounds the store's size otherwise.
package server
