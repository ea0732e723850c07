package client

import (
	"errors"
	"fmt"
	rpccode "google.golang.org/genproto/googleapis/rpc/code"
	"strconv"
	"strings"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	frustumv1 "frustum/proto/frustum/v1"
)

// FieldViolation names a wrong field of a request, by its dotted path (such
// as "spec.cluster.bonds[3].b"), and why it is wrong.
type FieldViolation struct {
	Field       string
	Description string
}

// JobError is a job that ended without a result: FAILED, with the code and
// message the server recorded, or CANCELLED.
type JobError struct {
	// Name is the job's name, "jobs/{id}".
	Name string
	// State is FAILED or CANCELLED.
	State frustumv1.Job_State
	// Code is the job's error code (codes.Canceled for a cancelled job
	// without one, codes.Unknown for a code this client does not know).
	Code    codes.Code
	Message string
	Fields  []FieldViolation
}

func (e *JobError) Error() string {
	var b strings.Builder
	what := "failed"
	if e.State == frustumv1.Job_CANCELLED {
		what = "was cancelled"
	}
	fmt.Fprintf(&b, "%s %s: %s", e.Name, what, CodeName(e.Code))
	if e.Message != "" {
		fmt.Fprintf(&b, ": %s", e.Message)
	}
	if len(e.Fields) > 0 {
		paths := make([]string, len(e.Fields))
		for i, f := range e.Fields {
			paths[i] = f.Field
		}
		fmt.Fprintf(&b, " (fields: %s)", strings.Join(paths, ", "))
	}
	return b.String()
}

// GRPCStatus makes status.Code and status.FromError see the job's code, and
// its field violations as a google.rpc.BadRequest detail.
func (e *JobError) GRPCStatus() *status.Status {
	st := status.New(e.Code, e.Message)
	if len(e.Fields) == 0 {
		return st
	}
	br := &errdetails.BadRequest{}
	for _, f := range e.Fields {
		br.FieldViolations = append(br.FieldViolations, &errdetails.BadRequest_FieldViolation{Field: f.Field, Description: f.Description})
	}
	if withDetails, err := st.WithDetails(br); err == nil {
		return withDetails
	}
	return st
}

// NewJobError returns the error of a job that ended FAILED or CANCELLED,
// and nil for a job in any other state.
func NewJobError(job *frustumv1.Job) *JobError {
	if s := job.GetState(); s != frustumv1.Job_FAILED && s != frustumv1.Job_CANCELLED {
		return nil
	}
	e := &JobError{Name: job.GetName(), State: job.GetState(), Message: job.GetError().GetMessage()}
	switch {
	case job.GetError().GetCode() != "":
		e.Code = ParseCode(job.GetError().GetCode())
	case job.GetState() == frustumv1.Job_CANCELLED:
		e.Code = codes.Canceled
	default:
		e.Code = codes.Unknown
	}
	for _, f := range job.GetError().GetFieldViolations() {
		e.Fields = append(e.Fields, FieldViolation{Field: f.GetField(), Description: f.GetDescription()})
	}
	return e
}

// FieldViolations returns the field violations that err carries: those of a
// *JobError, or the google.rpc.BadRequest details of a gRPC status error. It
// returns nil when there are none.
func FieldViolations(err error) []FieldViolation {
	if err == nil {
		return nil
	}
	var je *JobError
	if errors.As(err, &je) {
		return je.Fields
	}
	st, ok := status.FromError(err)
	if !ok {
		return nil
	}
	var out []FieldViolation
	for _, d := range st.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			for _, v := range br.GetFieldViolations() {
				out = append(out, FieldViolation{Field: v.GetField(), Description: v.GetDescription()})
			}
		}
	}
	return out
}

// CodeName returns the canonical name of c, such as "INVALID_ARGUMENT"
// (google/rpc/code.proto), the form of JobError.code.
func CodeName(c codes.Code) string { return rpccode.Code(c).String() }

// ParseCode returns the code of a canonical name such as "NOT_FOUND" (also
// "CANCELED" and the number as text); codes.Unknown for anything else.
func ParseCode(name string) codes.Code {
	name = strings.ToUpper(strings.TrimSpace(name))
	if c, ok := rpccode.Code_value[name]; ok {
		return codes.Code(c)
	}
	if name == "CANCELED" {
		return codes.Canceled
	}
	if n, err := strconv.Atoi(name); err == nil && n >= 0 && n <= int(codes.Unauthenticated) {
		return codes.Code(n)
	}
	return codes.Unknown
}
