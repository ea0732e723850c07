package server

import (
	"context"
	"errors"
	"runtime/debug"
	"sync"
	"time"

	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// The scheduler runs queued jobs on a bounded number of slots.
//
// Fairness: every owner has a FIFO queue, and the owners with queued jobs
// form a ring served round-robin, one job per turn, so that one user's 500
// queued jobs do not hold back another user's first one.
//
// Memory admission: a job starts only when the memory estimates of the
// running jobs plus its own fit in MaxMemory. When the job whose turn it is
// does not fit, its memory is reserved: later owners' jobs may start beside
// it only in what is left after the reservation, so that a large job is not
// starved by a stream of small ones. Every accepted job fits on its own
// (CreateJob refuses the others), so the reserved job starts at the latest
// when the running jobs have finished.
type scheduler struct {
	srv     *Server
	slots   int
	maxMem  int64
	workers int // engine goroutines per job

	mu      sync.Mutex
	queues  map[string][]queued // owner -> FIFO
	ring    []string            // owners with queued jobs
	next    int                 // ring index of the owner whose turn it is
	inQueue map[string]bool     // job names queued
	running map[string]*runningJob
	used    int64         // sum of the running jobs' memory estimates
	stopped bool          // shutting down: start nothing more
	idle    chan struct{} // closed and replaced when running becomes empty
	// launch runs a job that got a slot: go sc.run(rj), or a stand-in in
	// tests of the dispatch order.
	launch func(*runningJob)
}

// queued is a job waiting for a slot; its spec stays in the store.
type queued struct {
	name, owner string
	mem         int64
}

// runningJob is a job that holds a slot.
type runningJob struct {
	queued
	ctx    context.Context
	cancel context.CancelFunc

	mu         sync.Mutex
	started    time.Time
	progress   *frustumv1.JobProgress
	userCancel bool // CancelJob: the job ends CANCELLED
	shutdown   bool // Shutdown: the job is queued again
}

func newScheduler(srv *Server, slots int, maxMem int64, workers int) *scheduler {
	sc := &scheduler{
		srv: srv, slots: slots, maxMem: maxMem, workers: workers,
		queues:  map[string][]queued{},
		inQueue: map[string]bool{},
		running: map[string]*runningJob{},
		idle:    make(chan struct{}),
	}
	sc.launch = func(rj *runningJob) { go sc.run(rj) }
	return sc
}

// enqueue adds a job to its owner's queue and starts what can start.
func (sc *scheduler) enqueue(q queued) {
	sc.mu.Lock()
	defer sc.mu.Unlock()
	if sc.inQueue[q.name] || sc.running[q.name] != nil {
		return
	}
	sc.inQueue[q.name] = true
	if len(sc.queues[q.owner]) == 0 {
		sc.ring = append(sc.ring, q.owner)
	}
	sc.queues[q.owner] = append(sc.queues[q.owner], q)
	sc.dispatchLocked()
}

// dequeue removes a queued job; false if it is not queued.
func (sc *scheduler) dequeue(name, owner string) bool {
	sc.mu.Lock()
	defer sc.mu.Unlock()
	if !sc.inQueue[name] {
		return false
	}
	q := sc.queues[owner]
	for i := range q {
		if q[i].name == name {
			sc.queues[owner] = append(q[:i:i], q[i+1:]...)
			break
		}
	}
	delete(sc.inQueue, name)
	if len(sc.queues[owner]) == 0 {
		sc.dropOwnerLocked(owner)
	}
	sc.dispatchLocked()
	return true
}

// dropOwnerLocked removes an owner without queued jobs from the ring,
// keeping the turn where it was.
func (sc *scheduler) dropOwnerLocked(owner string) {
	delete(sc.queues, owner)
	for i, o := range sc.ring {
		if o != owner {
			continue
		}
		sc.ring = append(sc.ring[:i], sc.ring[i+1:]...)
		if i < sc.next {
			sc.next--
		}
		break
	}
	if sc.next >= len(sc.ring) {
		sc.next = 0
	}
}

// dispatchLocked starts queued jobs while slots and memory allow.
func (sc *scheduler) dispatchLocked() {
	for !sc.stopped && len(sc.running) < sc.slots && len(sc.ring) > 0 {
		var reserved int64
		blocked := false
		started := false
		n := len(sc.ring)
		for k := 0; k < n; k++ {
			i := (sc.next + k) % n
			owner := sc.ring[i]
			head := sc.queues[owner][0]
			if sc.used+reserved+head.mem > sc.maxMem {
				if !blocked {
					blocked = true
					reserved += head.mem
				}
				continue
			}
			sc.queues[owner] = sc.queues[owner][1:]
			delete(sc.inQueue, head.name)
			if !blocked {
				// The turn passes to the next owner; a backfilled job
				// leaves the turn with the blocked owner.
				sc.next = (i + 1) % n
			}
			if len(sc.queues[owner]) == 0 {
				sc.dropOwnerLocked(owner)
			}
			sc.startLocked(head)
			started = true
			break
		}
		if !started {
			return
		}
	}
}

// startLocked gives a job a slot and runs it in its own goroutine.
func (sc *scheduler) startLocked(q queued) {
	ctx, cancel := context.WithCancel(context.Background())
	rj := &runningJob{queued: q, ctx: ctx, cancel: cancel}
	sc.running[q.name] = rj
	sc.used += q.mem
	sc.launch(rj)
}

// finish frees the slot and memory of a job whose engine has returned.
func (sc *scheduler) finish(rj *runningJob) {
	rj.cancel()
	sc.mu.Lock()
	defer sc.mu.Unlock()
	if sc.running[rj.name] == rj {
		delete(sc.running, rj.name)
		sc.used -= rj.mem
	}
	if len(sc.running) == 0 {
		close(sc.idle)
		sc.idle = make(chan struct{})
	}
	sc.dispatchLocked()
}

// lookup returns the running job of that name, or nil.
func (sc *scheduler) lookup(name string) *runningJob {
	sc.mu.Lock()
	defer sc.mu.Unlock()
	return sc.running[name]
}

// progressOf returns the in-memory progress of a running job, or nil.
func (sc *scheduler) progressOf(name string) *frustumv1.JobProgress {
	rj := sc.lookup(name)
	if rj == nil {
		return nil
	}
	rj.mu.Lock()
	defer rj.mu.Unlock()
	return rj.progress
}

// cancelRunning cancels a running job at the user's request; false if it
// is not running.
func (sc *scheduler) cancelRunning(name string) bool {
	rj := sc.lookup(name)
	if rj == nil {
		return false
	}
	rj.mu.Lock()
	rj.userCancel = true
	rj.mu.Unlock()
	rj.cancel()
	return true
}

// stop starts nothing more.
func (sc *scheduler) stop() {
	sc.mu.Lock()
	defer sc.mu.Unlock()
	sc.stopped = true
}

// waitIdle waits until no job is running or ctx ends; it reports whether
// the scheduler is idle.
func (sc *scheduler) waitIdle(ctx context.Context) bool {
	for {
		sc.mu.Lock()
		n, idle := len(sc.running), sc.idle
		sc.mu.Unlock()
		if n == 0 {
			return true
		}
		select {
		case <-idle:
		case <-ctx.Done():
			return false
		}
	}
}

// interrupt cancels every running job for a shutdown, so that each is
// stored QUEUED again, and returns them.
func (sc *scheduler) interrupt() []*runningJob {
	sc.mu.Lock()
	defer sc.mu.Unlock()
	var out []*runningJob
	for _, rj := range sc.running {
		rj.mu.Lock()
		rj.shutdown = true
		rj.mu.Unlock()
		rj.cancel()
		out = append(out, rj)
	}
	return out
}

// errNotQueued and errNotRunning abort a store transition whose premise no
// longer holds (the job was cancelled meanwhile).
var (
	errNotQueued  = errors.New("the job is no longer queued")
	errNotRunning = errors.New("the job is no longer running")
)

// run runs one attempt of a job: QUEUED -> RUNNING -> SUCCEEDED, FAILED,
// CANCELLED, or QUEUED again when the server shuts down.
func (sc *scheduler) run(rj *runningJob) {
	defer sc.finish(rj)
	s := sc.srv
	var job *frustumv1.Job
	err := s.storeDo(func() (err error) {
		job, err = s.store.Update(rj.name, func(j *frustumv1.Job) error {
			if j.State != frustumv1.Job_QUEUED {
				return errNotQueued
			}
			j.State = frustumv1.Job_RUNNING
			j.StartTime = timestamppb.Now()
			j.EndTime = nil
			j.Attempts++
			j.Error = nil
			j.Progress = nil
			return nil
		})
		return err
	})
	if err != nil {
		if !errors.Is(err, errNotQueued) && !errors.Is(err, errStoreClosed) {
			s.log.Error("job could not start", "name", rj.name, "owner", rj.owner, "err", err)
		}
		return
	}
	rj.mu.Lock()
	rj.started = time.Now()
	rj.mu.Unlock()
	s.hub.publishJob(job)
	task := job.GetTask()
	s.log.Info("job started", "name", rj.name, "owner", rj.owner, "task", task, "attempt", job.GetAttempts(),
		"queued_seconds", rj.started.Sub(job.GetCreateTime().AsTime()).Seconds(), "memory_bytes", rj.mem)
	if s.testHookRun != nil {
		s.testHookRun(rj.name)
	}

	opt := ed.Options{
		Limits:   ed.Limits{MaxMemory: sc.maxMem},
		Workers:  sc.workers,
		Progress: func(stage string, done, total int) { sc.progress(rj, stage, done, total) },
	}
	res, runErr := safeRun(rj.ctx, s.runTask, job.GetSpec(), opt)

	rj.mu.Lock()
	userCancel, shutdown, progress := rj.userCancel, rj.shutdown, rj.progress
	rj.mu.Unlock()
	seconds := time.Since(rj.started).Seconds()

	switch {
	case runErr == nil:
		data, err := proto.MarshalOptions{Deterministic: true}.Marshal(res)
		if err != nil {
			runErr = err
			break
		}
		typeName := string(res.ProtoReflect().Descriptor().FullName())
		err = s.storeDo(func() (err error) {
			job, err = s.store.SetResult(rj.name, typeName, data, func(j *frustumv1.Job) error {
				if j.State != frustumv1.Job_RUNNING {
					return errNotRunning
				}
				j.State = frustumv1.Job_SUCCEEDED
				j.EndTime = timestamppb.Now()
				j.ResultSizeBytes = int64(len(data))
				j.Progress = finalProgress(progress)
				return nil
			})
			return err
		})
		switch {
		case err == nil:
			s.hub.publishJob(job)
			s.log.Info("job finished", "name", rj.name, "owner", rj.owner, "task", task, "state", "SUCCEEDED",
				"seconds", seconds, "result_bytes", len(data))
		case errors.Is(err, errNotRunning):
			// Cancelled while the engine was finishing: the result is dropped.
		default:
			s.log.Error("job result could not be stored", "name", rj.name, "owner", rj.owner, "err", err)
		}
		return
	case shutdown && errors.Is(runErr, context.Canceled):
		sc.requeueInStore(rj.name)
		s.log.Info("job interrupted by shutdown, queued again", "name", rj.name, "owner", rj.owner, "task", task, "seconds", seconds)
		return
	case userCancel && errors.Is(runErr, context.Canceled):
		// CancelJob stored CANCELLED already; make sure of it.
		err := s.storeDo(func() (err error) {
			job, err = s.store.Update(rj.name, func(j *frustumv1.Job) error {
				if j.State != frustumv1.Job_RUNNING {
					return errNotRunning
				}
				cancelJob(j, progress)
				return nil
			})
			return err
		})
		if err == nil {
			s.hub.publishJob(job)
		}
		s.log.Info("job finished", "name", rj.name, "owner", rj.owner, "task", task, "state", "CANCELLED", "seconds", seconds)
		return
	}

	// Failed.
	je := jobError(runErr)
	if pe := (*panicError)(nil); errors.As(runErr, &pe) {
		s.log.Error("engine panic", "name", rj.name, "owner", rj.owner, "panic", pe.value, "stack", pe.stack)
	}
	err = s.storeDo(func() (err error) {
		job, err = s.store.Update(rj.name, func(j *frustumv1.Job) error {
			if j.State != frustumv1.Job_RUNNING {
				return errNotRunning
			}
			j.State = frustumv1.Job_FAILED
			j.EndTime = timestamppb.Now()
			j.Error = je
			j.Progress = progress
			return nil
		})
		return err
	})
	if err == nil {
		s.hub.publishJob(job)
	} else if !errors.Is(err, errNotRunning) {
		s.log.Error("job failure could not be stored", "name", rj.name, "owner", rj.owner, "err", err)
	}
	s.log.Info("job finished", "name", rj.name, "owner", rj.owner, "task", task, "state", "FAILED",
		"seconds", seconds, "code", je.GetCode(), "error", je.GetMessage())
}

// requeueInStore stores a running job as QUEUED again, attempts kept.
func (sc *scheduler) requeueInStore(name string) {
	s := sc.srv
	var job *frustumv1.Job
	err := s.storeDo(func() (err error) {
		job, err = s.store.Update(name, func(j *frustumv1.Job) error {
			if j.State != frustumv1.Job_RUNNING {
				return errNotRunning
			}
			requeueJob(j)
			return nil
		})
		return err
	})
	switch {
	case err == nil:
		s.hub.publishJob(job)
	case !errors.Is(err, errNotRunning) && !errors.Is(err, errStoreClosed):
		s.log.Error("job could not be queued again", "name", name, "err", err)
	}
}

// requeueJob moves a RUNNING job back to QUEUED, keeping its attempts.
func requeueJob(j *frustumv1.Job) {
	j.State = frustumv1.Job_QUEUED
	j.StartTime = nil
	j.Progress = nil
}

// cancelJob moves a job to CANCELLED.
func cancelJob(j *frustumv1.Job, progress *frustumv1.JobProgress) {
	j.State = frustumv1.Job_CANCELLED
	j.EndTime = timestamppb.Now()
	j.Error = &frustumv1.JobError{Code: "CANCELLED", Message: "cancelled by its owner"}
	if progress != nil {
		j.Progress = progress
	}
}

// progress records the engine's progress of a running job in memory and
// passes it to the job's watchers.
func (sc *scheduler) progress(rj *runningJob, stage string, done, total int) {
	p := &frustumv1.JobProgress{Stage: stage, Done: int64(done), Total: int64(total)}
	if total > 0 {
		p.Fraction = min(1, max(0, float64(done)/float64(total)))
	}
	rj.mu.Lock()
	if p.Fraction > 0 {
		elapsed := time.Since(rj.started).Seconds()
		left := elapsed * (1 - p.Fraction) / p.Fraction
		p.SecondsLeft = &left
	}
	rj.progress = p
	rj.mu.Unlock()
	sc.srv.hub.publishProgress(rj.name, p)
}

// finalProgress is the progress of a job that succeeded: everything done.
func finalProgress(last *frustumv1.JobProgress) *frustumv1.JobProgress {
	p := &frustumv1.JobProgress{Stage: "done", Fraction: 1, SecondsLeft: proto.Float64(0)}
	if last != nil {
		p.Stage, p.Done, p.Total = last.GetStage(), last.GetTotal(), last.GetTotal()
	}
	return p
}

// safeRun runs the task, turning a panic of the engine into an error so
// that it fails this job and not the server.
func safeRun(ctx context.Context, run taskFunc, spec *frustumv1.JobSpec, opt ed.Options) (res proto.Message, err error) {
	defer func() {
		if v := recover(); v != nil {
			res, err = nil, &panicError{value: v, stack: string(debug.Stack())}
		}
	}()
	return run(ctx, spec, opt)
}

// taskFunc runs a job's task: tasks.Run, or a stand-in in tests.
type taskFunc func(ctx context.Context, spec *frustumv1.JobSpec, opt ed.Options) (proto.Message, error)
