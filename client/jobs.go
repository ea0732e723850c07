package client

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/connectivity"
	"google.golang.org/grpc/status"

	frustumv1 "frustum/proto/frustum/v1"
)

// Create submits a job. A non-empty requestID makes the call idempotent: a
// repeated create with the same id (of the same user) returns the first job.
func (c *Client) Create(ctx context.Context, spec *frustumv1.JobSpec, requestID string) (*frustumv1.Job, error) {
	return c.rpc.CreateJob(ctx, &frustumv1.CreateJobRequest{Spec: spec, RequestId: requestID})
}

// Get returns the job named name ("jobs/{id}" or the id), with its result
// when it has succeeded and the result fits inline.
func (c *Client) Get(ctx context.Context, name string) (*frustumv1.Job, error) {
	return c.rpc.GetJob(ctx, &frustumv1.GetJobRequest{Name: JobName(name)})
}

// List returns one page of the caller's jobs, newest first, and the token of
// the next page ("" on the last). state STATE_UNSPECIFIED lists every state;
// pageSize 0 takes the server's default.
func (c *Client) List(ctx context.Context, state frustumv1.Job_State, pageSize int, pageToken string) ([]*frustumv1.Job, string, error) {
	resp, err := c.rpc.ListJobs(ctx, &frustumv1.ListJobsRequest{PageSize: int32(pageSize), PageToken: pageToken, State: state})
	if err != nil {
		return nil, "", err
	}
	return resp.GetJobs(), resp.GetNextPageToken(), nil
}

// listAllPageSize is the page size of ListAll, the server's maximum.
const listAllPageSize = 1000

// ListAll returns every job of the caller in state (STATE_UNSPECIFIED: all),
// newest first, following the pages.
func (c *Client) ListAll(ctx context.Context, state frustumv1.Job_State) ([]*frustumv1.Job, error) {
	var all []*frustumv1.Job
	seen := map[string]bool{}
	token := ""
	for {
		jobs, next, err := c.List(ctx, state, listAllPageSize, token)
		if err != nil {
			return nil, err
		}
		all = append(all, jobs...)
		if next == "" {
			return all, nil
		}
		if seen[next] {
			return nil, status.Errorf(codes.Internal, "ListJobs returned the page token %q twice", next)
		}
		seen[next] = true
		token = next
	}
}

// Cancel moves a queued or running job to CANCELLED and returns it; a job
// that has ended already gives FAILED_PRECONDITION.
func (c *Client) Cancel(ctx context.Context, name string) (*frustumv1.Job, error) {
	return c.rpc.CancelJob(ctx, &frustumv1.CancelJobRequest{Name: JobName(name)})
}

// Delete removes a job that has ended, and its result.
func (c *Client) Delete(ctx context.Context, name string) error {
	_, err := c.rpc.DeleteJob(ctx, &frustumv1.DeleteJobRequest{Name: JobName(name)})
	return err
}

// Terminal reports whether a job in state s has ended.
func Terminal(s frustumv1.Job_State) bool {
	switch s {
	case frustumv1.Job_SUCCEEDED, frustumv1.Job_FAILED, frustumv1.Job_CANCELLED:
		return true
	}
	return false
}

// Watch follows the job named name: it calls fn (which may be nil) with the
// job at once and at every change of state or progress, and returns the job
// in its terminal state. The jobs that WatchJob streams carry neither spec
// nor result; Get the job for those.
//
// When the stream breaks after it was established, Watch opens it again
// with a growing back-off, for as long as the reconnect timeout allows (see
// WithReconnectTimeout); it returns the last error when that runs out. It
// returns ctx.Err() (wrapped) when ctx ends.
func (c *Client) Watch(ctx context.Context, name string, fn func(*frustumv1.Job)) (*frustumv1.Job, error) {
	name = JobName(name)
	established := false
	pause := c.backoff
	var downSince time.Time
	for {
		job, got, err := c.watchOnce(ctx, name, fn)
		if job != nil {
			return job, nil
		}
		if ctx.Err() != nil {
			return nil, fmt.Errorf("watching %s: %w", name, ctx.Err())
		}
		if got {
			established = true
			pause = c.backoff
			downSince = time.Time{}
		}
		if !established || !retryable(err) || c.reconnect <= 0 || c.conn.GetState() == connectivity.Shutdown {
			return nil, err
		}
		if downSince.IsZero() {
			downSince = time.Now()
		}
		if time.Since(downSince) >= c.reconnect {
			return nil, fmt.Errorf("watching %s: no server for %v: %w", name, c.reconnect.Round(time.Second), err)
		}
		// Full jitter in [pause/2, pause), so that many watchers do not
		// come back at the same instant.
		sleep := pause/2 + rand.N(pause/2+1)
		select {
		case <-ctx.Done():
			return nil, fmt.Errorf("watching %s: %w", name, ctx.Err())
		case <-time.After(sleep):
		}
		pause = min(2*pause, c.maxBackoff)
	}
}

// errStreamEnded is a watch stream that ended before the job did.
var errStreamEnded = status.Error(codes.Unavailable, "the watch stream ended before the job did")

// watchOnce reads one watch stream. It returns the terminal job, or whether
// any message arrived and the error that ended the stream.
func (c *Client) watchOnce(ctx context.Context, name string, fn func(*frustumv1.Job)) (*frustumv1.Job, bool, error) {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stream, err := c.rpc.WatchJob(ctx, &frustumv1.WatchJobRequest{Name: name})
	if err != nil {
		return nil, false, err
	}
	got := false
	for {
		job, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return nil, got, errStreamEnded
		}
		if err != nil {
			return nil, got, err
		}
		got = true
		if fn != nil {
			fn(job)
		}
		if Terminal(job.GetState()) {
			return job, true, nil
		}
	}
}

// retryable reports whether a broken watch stream is worth opening again:
// the server went away or is restarting.
func retryable(err error) bool {
	switch status.Code(err) {
	case codes.Unavailable, codes.Aborted:
		return true
	case codes.Canceled:
		// Not our context (Watch checks that first): the server ended the
		// stream as it stopped.
		return true
	}
	return false
}
