package client

import (
	"context"
	"fmt"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	frustumv1 "frustum/proto/frustum/v1"
)

// cancelTimeout bounds the CancelJob call that Run makes after its context
// ended.
const cancelTimeout = 5 * time.Second

// Run submits spec (see Create for requestID), watches the job, calling fn
// (which may be nil) as Watch does, and returns its result: the
// *frustumv1.SpectrumResult, *ThermoResult, *MagnetizationResult or *FitResult of the
// spec's task, taken from the finished job or fetched with Result when it
// was too large to travel inline.
//
// A job that ends FAILED or CANCELLED gives a *JobError. When ctx ends
// while the job is queued or running, Run cancels the job on the server and
// returns an error wrapping ctx.Err(). (When ctx ends during the create call
// itself, the job may exist without Run knowing its name.)
func (c *Client) Run(ctx context.Context, spec *frustumv1.JobSpec, requestID string, fn func(*frustumv1.Job)) (proto.Message, error) {
	job, err := c.Create(ctx, spec, requestID)
	if err != nil {
		if ctx.Err() != nil {
			return nil, fmt.Errorf("creating the job: %w", ctx.Err())
		}
		return nil, err
	}
	final := job
	if Terminal(job.GetState()) {
		// Answered at once, from the server's cache or refused.
		if fn != nil {
			fn(job)
		}
	} else {
		final, err = c.Watch(ctx, job.GetName(), fn)
		if err != nil {
			if ctx.Err() != nil {
				return nil, c.abandon(ctx, job.GetName())
			}
			return nil, err
		}
	}
	res, err := c.finished(ctx, final)
	if err != nil {
		return nil, err
	}
	if want := resultName(spec); want != "" && res.ProtoReflect().Descriptor().FullName() != want {
		return nil, status.Errorf(codes.Internal, "%s: the server returned a %s for a %s", final.GetName(), res.ProtoReflect().Descriptor().FullName(), want)
	}
	return res, nil
}

// abandon cancels the job after ctx ended and returns the error for Run.
func (c *Client) abandon(ctx context.Context, name string) error {
	cctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), cancelTimeout)
	defer cancel()
	_, err := c.Cancel(cctx, name)
	switch status.Code(err) {
	case codes.OK:
		return fmt.Errorf("%s cancelled on the server: %w", name, ctx.Err())
	case codes.FailedPrecondition:
		return fmt.Errorf("%s had ended already: %w", name, ctx.Err())
	}
	return fmt.Errorf("%s may still run on the server (cancelling it: %v): %w", name, err, ctx.Err())
}

// finished returns the result of a job in a terminal state, or its error.
func (c *Client) finished(ctx context.Context, job *frustumv1.Job) (proto.Message, error) {
	switch job.GetState() {
	case frustumv1.Job_SUCCEEDED:
	case frustumv1.Job_FAILED, frustumv1.Job_CANCELLED:
		return nil, NewJobError(job)
	default:
		return nil, status.Errorf(codes.Internal, "%s is %s, not finished", job.GetName(), job.GetState())
	}
	if res := InlineResult(job); res != nil {
		return res, nil
	}
	// Watched jobs carry no result: get the job, whose result is inline
	// unless it is too large.
	full, err := c.Get(ctx, job.GetName())
	if err != nil {
		return nil, err
	}
	if res := InlineResult(full); res != nil {
		return res, nil
	}
	return c.Result(ctx, job.GetName())
}

// resultName is the full name of the result message of spec's task.
func resultName(spec *frustumv1.JobSpec) protoreflect.FullName {
	switch spec.GetTask().(type) {
	case *frustumv1.JobSpec_Spectrum:
		return (*frustumv1.SpectrumResult)(nil).ProtoReflect().Descriptor().FullName()
	case *frustumv1.JobSpec_Thermo:
		return (*frustumv1.ThermoResult)(nil).ProtoReflect().Descriptor().FullName()
	case *frustumv1.JobSpec_Magnetization:
		return (*frustumv1.MagnetizationResult)(nil).ProtoReflect().Descriptor().FullName()
	case *frustumv1.JobSpec_Fit:
		return (*frustumv1.FitResult)(nil).ProtoReflect().Descriptor().FullName()
	}
	return ""
}
