// Package e2e holds Frustum's end-to-end tests and benchmarks of frustumd:
// they build the real binary (go build ./cmd/frustumd, once per test run,
// into a temporary directory), start it on 127.0.0.1 on a free port with a
// fresh --data directory, wait until its grpc.health.v1 service reports
// SERVING, and talk to it over TCP through the generated JobService stubs
// (frustum/proto/frustum/v1), not through the client library. Every result
// is compared byte for byte, in the protojson of tasks.MarshalJSON, with
// tasks.Run of the same spec in the test process, run with the engine
// options that the server uses (its memory limit and engine workers).
//
// The package has no code of its own: only this file and the tests.
//
// # Tests
//
//   - TestDurabilitySIGKILL: nine jobs on one worker slot, SIGKILL while a
//     several-second job (a 9-site chain with DM along z, field along x, 40
//     fields) runs, restart on the same data directory. Every job is still
//     there and listed once, a retried request id returns its first job,
//     each job's watch sees SUCCEEDED exactly once with the in-process
//     result, the killed job has attempts 2, the jobs that had succeeded
//     before the kill kept their result and did not run again (attempts 1,
//     same start and end times), and a repeated spec after the restart is
//     answered from the cache.
//   - TestSIGTERMRequeues: SIGTERM with --grace 300ms while a job runs; the
//     process exits with status 0, the job is queued again and runs again
//     after the restart (attempts 2); CancelJob then frees the worker slot
//     for the queued job within about a second.
//   - TestSIGKILLDuringCreates: SIGKILL while 8 clients create jobs as fast
//     as they can; every acknowledged job survives, a retry of every
//     request id (acknowledged or in flight) returns one job, never a
//     second, and every job succeeds with the in-process result.
//   - TestSecondDaemonSameDataDir: a second frustumd on a data directory in
//     use exits with status 1, saying the store is locked.
//   - TestLoad20Clients500Jobs: 20 clients, each on its own connection,
//     submit 25 tiny jobs each (dimers, triangles, 4-site chains with
//     varied J, and one spec shared by every 20th job to exercise the
//     cache), with request ids, retrying some creates on purpose, and
//     watch them to the end; 500 distinct jobs, all SUCCEEDED with the
//     in-process result, each listed once by a paged ListJobs, and the
//     server's peak RSS (VmHWM of /proc/PID/status) under 300 MiB. The run
//     time and memory are logged (go test -v).
//
// Each test kills the processes it started when it ends, and bounds every
// wait with a deadline. With -short the tests are skipped.
//
// # Benchmarks
//
//   - BenchmarkSubmitToResultMultimer: CreateJob to result in hand
//     (CreateJob, WatchJob until SUCCEEDED, GetJob) of a 7-site defect
//     multimer magnetization, 5 temperatures x 301 fields, on loopback. It
//     reports ms/op, engine-ms (tasks.Run of the same spec in-process,
//     outside the timer) and overhead-ms (the difference); JDefect changes
//     at every iteration so that the cache never answers.
//   - BenchmarkSmallJobsPerSecond: small distinct jobs through one
//     frustumd (one worker slot per core) from 4 x GOMAXPROCS concurrent
//     submitters, each on its own connection; reports jobs/s.
//
// The benchmarks measure; they assert nothing about time.
//
// # Running
//
//	go test ./e2e/                                   # the tests, about a minute
//	go test -v -run Load ./e2e/                      # one test, with its figures
//	go test -run NONE -bench . ./e2e/                # the benchmarks
//	go test -run NONE -bench . -benchtime=20x ./e2e/ # a fixed number of jobs
package e2e
