// Package client is the Go client of Frustum's job service, frustumd: a
// small layer over the generated JobService stubs of package frustumv1 that
// dials with TLS and a token, submits a task and waits for its result, and
// follows a job's progress.
//
// # Overview
//
// Dial returns a *Client for one server address. A task is a JobSpec, the
// cluster and one task's parameters; Run submits it, watches the job until it
// ends and returns the task's result message, the same *SpectrumResult,
// *ThermoResult or *MagnetizationResult that package tasks computes
// in-process:
//
//	c, err := client.Dial(ctx, "127.0.0.1:7447")
//	...
//	res, err := c.Run(ctx, spec, "", func(j *frustumv1.Job) { ... progress ... })
//
// The other methods follow the service one to one: Create, Get, List and
// ListAll, Watch, Cancel, Delete, and Result, which fetches a result too
// large to travel inside the job. Methods that take a job name accept
// "jobs/{id}" or the bare id.
//
// # Security
//
// Without TLS options Dial connects in plain text, which the server allows
// on loopback addresses only. WithTLSCA (a PEM bundle of the server's CA) or
// WithTLS turn TLS on. WithToken or WithTokenFile attach the user's token to
// every call as the metadata "authorization: Bearer TOKEN"; Dial refuses to
// send a token in plain text to an address that is not loopback.
//
// # Errors
//
// Calls that fail return the gRPC status error of the server (or of the
// connection): use status.Code(err) to tell them apart, and FieldViolations
// to read the fields that an INVALID_ARGUMENT names. A job that ends FAILED
// or CANCELLED makes Run return a *JobError carrying the job's own code,
// message and field violations; it too answers status.Code. A result stream
// that is inconsistent (a gap or overlap in the chunks, a wrong total size,
// an unknown type) is reported as codes.DataLoss.
//
// # Reconnection
//
// Watch, and therefore Run, survive a server restart: when an established
// watch stream breaks (UNAVAILABLE, or an end of stream before the job
// ended), Watch opens it again with a growing back-off for up to the time
// set by WithReconnectTimeout (default one minute). The server keeps every
// accepted job across restarts, so the watch picks the job up where it is.
// A first connection that fails is reported at once.
//
// # Cancellation
//
// Cancelling the context of Run while the job is queued or running cancels
// the job on the server (with CancelJob, under a short timeout of its own)
// and returns an error that wraps ctx.Err().
package client
