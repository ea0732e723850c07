package server

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"regexp"
	"strconv"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/emptypb"
	"google.golang.org/protobuf/types/known/timestamppb"

	"frustum/cluster"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/server/store"
	"frustum/tasks"
)

// Limits of the JobService requests.
const (
	MaxRequestIDLength = 128
	DefaultPageSize    = 50
	MaxPageSize        = 1000
	// watchInterval is the least time between two progress messages of
	// one watch (state changes are sent at once).
	watchInterval = 100 * time.Millisecond
)

var namePattern = regexp.MustCompile(`^jobs/[0-9a-f]{24}$`)

// SpecHash returns the hex SHA-256 of the spec's deterministic
// serialization, the Job.spec_hash under which identical specs share a
// result.
func SpecHash(spec *frustumv1.JobSpec) (string, error) {
	b, err := proto.MarshalOptions{Deterministic: true}.Marshal(spec)
	if err != nil {
		return "", err
	}
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:]), nil
}

func terminal(s frustumv1.Job_State) bool {
	return s == frustumv1.Job_SUCCEEDED || s == frustumv1.Job_FAILED || s == frustumv1.Job_CANCELLED
}

// caller returns the authenticated user of an RPC.
func caller(ctx context.Context) (string, error) {
	if u, ok := UserFrom(ctx); ok {
		return u, nil
	}
	return "", statusError(codes.Unauthenticated, "NO_USER", "the caller is not authenticated", nil)
}

// storeError turns an unexpected store error into INTERNAL, logging it.
func (s *Server) storeError(op string, err error) error {
	s.log.Error("store", "op", op, "err", err)
	return statusError(codes.Internal, "STORE", "the job store failed", nil)
}

// ownedJob returns the caller's job of that name (spec included, result
// not): INVALID_ARGUMENT for a malformed name, NOT_FOUND, or
// PERMISSION_DENIED when it is another user's.
func (s *Server) ownedJob(ctx context.Context, name string) (*frustumv1.Job, error) {
	user, err := caller(ctx)
	if err != nil {
		return nil, err
	}
	if !namePattern.MatchString(name) {
		return nil, badRequest("name", fmt.Sprintf("%q is not a job name: want jobs/ and 24 lowercase hex digits", name))
	}
	job, err := s.store.Get(name)
	switch {
	case errors.Is(err, store.ErrNotFound):
		return nil, statusError(codes.NotFound, "JOB_NOT_FOUND", name+" does not exist", map[string]string{"name": name})
	case err != nil:
		return nil, s.storeError("get", err)
	case job.GetOwner() != user:
		return nil, statusError(codes.PermissionDenied, "NOT_OWNER", name+" belongs to another user", map[string]string{"name": name})
	}
	return job, nil
}

// present completes a stored job for a response: the in-memory progress of
// a running job and, with withResult, the result of a succeeded job when it
// fits inline.
func (s *Server) present(job *frustumv1.Job, withResult bool) (*frustumv1.Job, error) {
	if job.GetState() == frustumv1.Job_RUNNING {
		if p := s.sched.progressOf(job.GetName()); p != nil {
			job.Progress = p
		}
	}
	if !withResult || job.GetState() != frustumv1.Job_SUCCEEDED {
		return job, nil
	}
	typeName, data, err := s.store.Result(job.GetName())
	if err != nil {
		return nil, s.storeError("result", err)
	}
	job.ResultSizeBytes = int64(len(data))
	if len(data) > s.inlineResultBytes {
		return job, nil
	}
	if err := setResult(job, typeName, data); err != nil {
		return nil, s.storeError("decode result", err)
	}
	return job, nil
}

// setResult decodes a stored result into the job's result oneof.
func setResult(job *frustumv1.Job, typeName string, data []byte) error {
	switch typeName {
	case "frustum.v1.SpectrumResult":
		r := new(frustumv1.SpectrumResult)
		job.Result = &frustumv1.Job_SpectrumResult{SpectrumResult: r}
		return proto.Unmarshal(data, r)
	case "frustum.v1.ThermoResult":
		r := new(frustumv1.ThermoResult)
		job.Result = &frustumv1.Job_ThermoResult{ThermoResult: r}
		return proto.Unmarshal(data, r)
	case "frustum.v1.MagnetizationResult":
		r := new(frustumv1.MagnetizationResult)
		job.Result = &frustumv1.Job_MagnetizationResult{MagnetizationResult: r}
		return proto.Unmarshal(data, r)
	case "frustum.v1.FitResult":
		r := new(frustumv1.FitResult)
		job.Result = &frustumv1.Job_FitResult{FitResult: r}
		return proto.Unmarshal(data, r)
	}
	return fmt.Errorf("unknown result type %q", typeName)
}

// checkSize refuses, before any other work, a cluster with more sites than
// the server takes or a Hilbert space beyond full diagonalization.
func (s *Server) checkSize(spec *frustumv1.JobSpec) error {
	if fit := spec.GetFit(); fit != nil {
		for k, c := range fit.GetModels() {
			if err := s.checkClusterSize(c, fmt.Sprintf("spec.fit.models[%d].sites", k), denseLog2); err != nil {
				return err
			}
		}
		return nil
	}
	maxLog2 := float64(denseLog2)
	if spec.GetSpectrum() != nil {
		// Spectra beyond full diagonalization take the Lanczos route; the
		// engine's plan then decides on memory.
		maxLog2 = float64(cluster.MaxDimensionLog2)
	}
	return s.checkClusterSize(spec.GetCluster(), "spec.cluster.sites", maxLog2)
}

// denseLog2 bounds log2 of the Hilbert space of the tasks that diagonalize
// fully (thermo, magnetization, fit).
const denseLog2 = 31

// checkClusterSize is checkSize for one cluster at the given field path.
func (s *Server) checkClusterSize(c *frustumv1.Cluster, field string, maxLog2 float64) error {
	n := len(c.GetSites())
	if n > s.cfg.MaxSites {
		msg := fmt.Sprintf("the cluster has %d sites; this server takes at most %d", n, s.cfg.MaxSites)
		return statusError(codes.ResourceExhausted, "CLUSTER_TOO_LARGE", field+": "+msg,
			map[string]string{"sites": strconv.Itoa(n), "max_sites": strconv.Itoa(s.cfg.MaxSites)},
			&errdetails.BadRequest{FieldViolations: []*errdetails.BadRequest_FieldViolation{{Field: field, Description: msg}}},
			&errdetails.QuotaFailure{Violations: []*errdetails.QuotaFailure_Violation{{Subject: "sites", Description: msg}}})
	}
	log2 := 0.0
	for _, site := range c.GetSites() {
		spin := 0.5
		if site.Spin != nil {
			spin = site.GetSpin()
		}
		twoS := 2 * spin
		if !(twoS >= 1) || twoS != math.Trunc(twoS) || twoS > 1e6 {
			return nil // not a spin at all: validation names it
		}
		log2 += math.Log2(twoS + 1)
	}
	if log2 >= maxLog2 {
		msg := fmt.Sprintf("%d sites give a Hilbert space of dimension 2^%.1f, beyond full diagonalization (fewer than 2^31 states)", n, log2)
		if maxLog2 != denseLog2 {
			msg = fmt.Sprintf("%d sites give a Hilbert space of dimension 2^%.1f, beyond what a basis index holds (2^%g)", n, log2, maxLog2)
		}
		return statusError(codes.ResourceExhausted, "CLUSTER_TOO_LARGE", field+": "+msg,
			map[string]string{"sites": strconv.Itoa(n), "log2_dimension": strconv.FormatFloat(log2, 'f', 1, 64)},
			&errdetails.BadRequest{FieldViolations: []*errdetails.BadRequest_FieldViolation{{Field: field, Description: msg}}})
	}
	return nil
}

// CreateJob validates the spec, answers it from the caller's stored result
// of an identical spec if there is one, and otherwise stores the job QUEUED
// (synced) and hands it to the scheduler.
func (s *Server) CreateJob(ctx context.Context, req *frustumv1.CreateJobRequest) (*frustumv1.Job, error) {
	if s.draining.Load() {
		return nil, statusError(codes.Unavailable, "SHUTTING_DOWN", "the server is shutting down and takes no new jobs", nil)
	}
	user, err := caller(ctx)
	if err != nil {
		return nil, err
	}
	if len(req.GetRequestId()) > MaxRequestIDLength {
		return nil, badRequest("request_id", fmt.Sprintf("%d characters, at most %d", len(req.GetRequestId()), MaxRequestIDLength))
	}
	spec := req.GetSpec()
	if spec == nil {
		return nil, badRequest("spec", "missing")
	}
	if err := s.checkSize(spec); err != nil {
		return nil, err
	}
	plan, err := tasks.Plan(spec, s.planOptions())
	if err != nil {
		return nil, taskStatus(err)
	}
	hash, err := SpecHash(spec)
	if err != nil {
		return nil, badRequest("spec", err.Error())
	}
	now := timestamppb.Now()
	job := &frustumv1.Job{
		Owner:      user,
		RequestId:  req.GetRequestId(),
		Spec:       spec,
		Task:       tasks.TaskName(spec),
		State:      frustumv1.Job_QUEUED,
		CreateTime: now,
		Plan:       plan,
		SpecHash:   hash,
	}
	prior, found, err := s.store.FindSucceeded(user, hash)
	if err != nil {
		return nil, s.storeError("find succeeded", err)
	}
	if found {
		typeName, data, err := s.store.Result(prior.GetName())
		switch {
		case err == nil:
			if err := setResult(job, typeName, data); err != nil {
				return nil, s.storeError("decode result", err)
			}
			job.State = frustumv1.Job_SUCCEEDED
			job.StartTime, job.EndTime = now, now
			job.FromCache, job.CachedFrom = true, prior.GetName()
			job.ResultSizeBytes = int64(len(data))
			job.Progress = &frustumv1.JobProgress{Stage: "from cache", Fraction: 1, SecondsLeft: proto.Float64(0)}
		case errors.Is(err, store.ErrNotFound):
			// Deleted meanwhile: run it.
		default:
			return nil, s.storeError("result", err)
		}
	}
	stored, created, err := s.store.Create(job)
	if err != nil {
		return nil, s.storeError("create", err)
	}
	if !created && stored.GetSpecHash() != "" && stored.GetSpecHash() != hash {
		// A retry carries the same spec; another spec under the same id is
		// a client error, and answering with the first job would hide it.
		msg := fmt.Sprintf("request_id %q already names %s, created with a different spec; use a new request_id for a new job", req.GetRequestId(), stored.GetName())
		return nil, statusError(codes.AlreadyExists, "REQUEST_ID_REUSED", msg, map[string]string{"job": stored.GetName()},
			&errdetails.BadRequest{FieldViolations: []*errdetails.BadRequest_FieldViolation{{Field: "request_id", Description: msg}}})
	}
	if created {
		if stored.GetState() == frustumv1.Job_QUEUED {
			s.sched.enqueue(queued{name: stored.GetName(), owner: user, mem: plan.GetMemoryBytes()})
		}
		s.log.Info("job created", "name", stored.GetName(), "owner", user, "task", stored.GetTask(),
			"state", stored.GetState().String(), "from_cache", stored.GetFromCache(), "memory_bytes", plan.GetMemoryBytes())
	}
	return s.present(stored, true)
}

// GetJob returns the caller's job with its result when that fits inline.
func (s *Server) GetJob(ctx context.Context, req *frustumv1.GetJobRequest) (*frustumv1.Job, error) {
	job, err := s.ownedJob(ctx, req.GetName())
	if err != nil {
		return nil, err
	}
	return s.present(job, true)
}

// ListJobs lists the caller's jobs, newest first, without specs and
// results.
func (s *Server) ListJobs(ctx context.Context, req *frustumv1.ListJobsRequest) (*frustumv1.ListJobsResponse, error) {
	user, err := caller(ctx)
	if err != nil {
		return nil, err
	}
	size := int(req.GetPageSize())
	switch {
	case size < 0:
		return nil, badRequest("page_size", fmt.Sprintf("%d is negative", size))
	case size == 0:
		size = DefaultPageSize
	case size > MaxPageSize:
		size = MaxPageSize
	}
	if _, ok := frustumv1.Job_State_name[int32(req.GetState())]; !ok {
		return nil, badRequest("state", fmt.Sprintf("%d is not a job state", req.GetState()))
	}
	jobs, next, err := s.store.List(user, req.GetState(), size, req.GetPageToken())
	switch {
	case errors.Is(err, store.ErrBadPageToken):
		return nil, badRequest("page_token", "not a page token of this listing: pass next_page_token of the previous page with the same state filter")
	case err != nil:
		return nil, s.storeError("list", err)
	}
	for _, j := range jobs {
		j.Spec = nil
		if _, err := s.present(j, false); err != nil {
			return nil, err
		}
	}
	return &frustumv1.ListJobsResponse{Jobs: jobs, NextPageToken: next}, nil
}

// WatchJob sends the job at once, then at every state change and at most
// every watchInterval on progress, and ends after a terminal state.
func (s *Server) WatchJob(req *frustumv1.WatchJobRequest, stream grpc.ServerStreamingServer[frustumv1.Job]) error {
	ctx := stream.Context()
	if _, err := s.ownedJob(ctx, req.GetName()); err != nil {
		return err
	}
	w := s.hub.subscribe(req.GetName())
	defer s.hub.unsubscribe(req.GetName(), w)
	// Read again after subscribing, so that no change falls in between.
	job, err := s.ownedJob(ctx, req.GetName())
	if err != nil {
		return err
	}
	if job, err = s.present(job, false); err != nil {
		return err
	}
	last := watchView(job)
	if err := stream.Send(last); err != nil {
		return err
	}
	lastSend := time.Now()
	var timer *time.Timer
	var timerC <-chan time.Time
	defer func() {
		if timer != nil {
			timer.Stop()
		}
	}()
	for !terminal(last.GetState()) {
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-s.shutdownCh:
			return statusError(codes.Unavailable, "SHUTTING_DOWN", "the server is shutting down; the job is kept: watch it again when the server is back", nil)
		case <-w.notify:
		case <-timerC:
			timerC = nil
		}
		jobs, progress := w.take()
		for _, j := range jobs {
			if j.GetState() == last.GetState() && j.GetAttempts() == last.GetAttempts() {
				continue // already sent (a change between subscribing and reading)
			}
			last = j
			if err := stream.Send(last); err != nil {
				return err
			}
			lastSend = time.Now()
			if terminal(last.GetState()) {
				return nil
			}
		}
		if progress == nil || last.GetState() != frustumv1.Job_RUNNING {
			continue
		}
		if wait := watchInterval - time.Since(lastSend); wait > 0 {
			w.putBackProgress(progress)
			if timerC == nil {
				if timer == nil {
					timer = time.NewTimer(wait)
				} else {
					timer.Reset(wait)
				}
				timerC = timer.C
			}
			continue
		}
		next := proto.Clone(last).(*frustumv1.Job)
		next.Progress = progress
		last = next
		if err := stream.Send(last); err != nil {
			return err
		}
		lastSend = time.Now()
	}
	return nil
}

// CancelJob cancels a queued or running job of the caller: it is CANCELLED
// at once, and a running engine stops at its next unit of work.
func (s *Server) CancelJob(ctx context.Context, req *frustumv1.CancelJobRequest) (*frustumv1.Job, error) {
	job, err := s.ownedJob(ctx, req.GetName())
	if err != nil {
		return nil, err
	}
	if terminal(job.GetState()) {
		return nil, finishedError(job)
	}
	name := job.GetName()
	s.sched.dequeue(name, job.GetOwner())
	s.sched.cancelRunning(name)
	progress := s.sched.progressOf(name)
	var finished *frustumv1.Job
	job, err = s.store.Update(name, func(j *frustumv1.Job) error {
		if terminal(j.State) {
			finished = proto.Clone(j).(*frustumv1.Job)
			return errNotRunning
		}
		cancelJob(j, progress)
		return nil
	})
	switch {
	case finished != nil:
		return nil, finishedError(finished)
	case errors.Is(err, store.ErrNotFound):
		return nil, statusError(codes.NotFound, "JOB_NOT_FOUND", name+" does not exist", map[string]string{"name": name})
	case err != nil:
		return nil, s.storeError("cancel", err)
	}
	s.hub.publishJob(job)
	s.log.Info("job cancelled", "name", name, "owner", job.GetOwner(), "task", job.GetTask())
	job.Spec = nil
	return job, nil
}

func finishedError(job *frustumv1.Job) error {
	return statusError(codes.FailedPrecondition, "JOB_FINISHED",
		fmt.Sprintf("%s has already finished (%s)", job.GetName(), job.GetState()),
		map[string]string{"name": job.GetName(), "state": job.GetState().String()})
}

// DeleteJob removes a finished job of the caller and its result.
func (s *Server) DeleteJob(ctx context.Context, req *frustumv1.DeleteJobRequest) (*emptypb.Empty, error) {
	job, err := s.ownedJob(ctx, req.GetName())
	if err != nil {
		return nil, err
	}
	if !terminal(job.GetState()) {
		return nil, statusError(codes.FailedPrecondition, "JOB_NOT_FINISHED",
			fmt.Sprintf("%s is %s: cancel it before deleting it", job.GetName(), job.GetState()),
			map[string]string{"name": job.GetName(), "state": job.GetState().String()})
	}
	switch err := s.store.Delete(job.GetName()); {
	case errors.Is(err, store.ErrNotFound):
		return nil, statusError(codes.NotFound, "JOB_NOT_FOUND", job.GetName()+" does not exist", map[string]string{"name": job.GetName()})
	case err != nil:
		return nil, s.storeError("delete", err)
	}
	s.log.Info("job deleted", "name", job.GetName(), "owner", job.GetOwner())
	return &emptypb.Empty{}, nil
}

// GetJobResult streams the stored result of a succeeded job of the caller
// in chunks.
func (s *Server) GetJobResult(req *frustumv1.GetJobResultRequest, stream grpc.ServerStreamingServer[frustumv1.ResultChunk]) error {
	job, err := s.ownedJob(stream.Context(), req.GetName())
	if err != nil {
		return err
	}
	if job.GetState() != frustumv1.Job_SUCCEEDED {
		return statusError(codes.FailedPrecondition, "JOB_NOT_SUCCEEDED",
			fmt.Sprintf("%s is %s: only a succeeded job has a result", job.GetName(), job.GetState()),
			map[string]string{"name": job.GetName(), "state": job.GetState().String()})
	}
	typeName, data, err := s.store.Result(job.GetName())
	if err != nil {
		return s.storeError("result", err)
	}
	total := int64(len(data))
	for off := 0; ; off += s.chunkBytes {
		end := min(off+s.chunkBytes, len(data))
		if err := stream.Send(&frustumv1.ResultChunk{Type: typeName, Offset: int64(off), TotalSize: total, Data: data[off:end]}); err != nil {
			return err
		}
		if end == len(data) {
			return nil
		}
	}
}
