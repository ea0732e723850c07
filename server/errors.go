package server

import (
	"context"
	"errors"
	"fmt"
	rpccode "google.golang.org/genproto/googleapis/rpc/code"
	"strconv"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/protoadapt"

	"frustum/cluster"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// ErrorDomain is the domain of the google.rpc.ErrorInfo that every error of
// the service carries beside its reason.
const ErrorDomain = "frustum"

// statusError returns a status error with an ErrorInfo{reason, metadata}
// detail and the further details given.
func statusError(c codes.Code, reason, msg string, metadata map[string]string, details ...protoadapt.MessageV1) error {
	st := status.New(c, msg)
	all := append([]protoadapt.MessageV1{&errdetails.ErrorInfo{Reason: reason, Domain: ErrorDomain, Metadata: metadata}}, details...)
	if withDetails, err := st.WithDetails(all...); err == nil {
		st = withDetails
	}
	return st.Err()
}

// badRequest returns INVALID_ARGUMENT naming one field.
func badRequest(field, description string) error {
	return statusError(codes.InvalidArgument, "INVALID_REQUEST", field+": "+description, nil,
		&errdetails.BadRequest{FieldViolations: []*errdetails.BadRequest_FieldViolation{{Field: field, Description: description}}})
}

// violations returns the field violations that a task error names, with the
// dotted paths of tasks.Plan; nil when it names none.
func violations(err error) []*frustumv1.FieldViolation {
	var fes cluster.FieldErrors
	var fe *cluster.FieldError
	var re *ed.RequestError
	var pe *tasks.ParameterError
	switch {
	case errors.As(err, &fes):
		out := make([]*frustumv1.FieldViolation, len(fes))
		for i, e := range fes {
			out[i] = &frustumv1.FieldViolation{Field: e.Path, Description: e.Reason}
		}
		return out
	case errors.As(err, &fe):
		return []*frustumv1.FieldViolation{{Field: fe.Path, Description: fe.Reason}}
	case errors.As(err, &re):
		return []*frustumv1.FieldViolation{{Field: re.Field, Description: re.Reason}}
	case errors.As(err, &pe):
		return []*frustumv1.FieldViolation{{Field: pe.Field, Description: pe.Reason}}
	}
	return nil
}

// taskCode returns the status code and reason of an error of tasks.Plan or
// tasks.Run.
func taskCode(err error) (codes.Code, string) {
	var le *ed.LimitError
	var ne *ed.NumericalError
	var pe *panicError
	var epe *ed.PanicError
	switch {
	case err == nil:
		return codes.OK, ""
	case errors.As(err, &le):
		return codes.ResourceExhausted, "MEMORY_LIMIT"
	case violations(err) != nil:
		return codes.InvalidArgument, "INVALID_SPEC"
	case errors.Is(err, context.Canceled):
		return codes.Canceled, "CANCELLED"
	case errors.Is(err, context.DeadlineExceeded):
		return codes.DeadlineExceeded, "DEADLINE_EXCEEDED"
	case errors.As(err, &ne):
		return codes.Internal, "NUMERICAL_FAILURE"
	case errors.As(err, &pe), errors.As(err, &epe):
		return codes.Internal, "ENGINE_PANIC"
	}
	return codes.Internal, "INTERNAL"
}

// taskStatus turns an error of tasks.Plan into the status error that
// CreateJob returns: INVALID_ARGUMENT with a BadRequest of every field
// violation, RESOURCE_EXHAUSTED naming the memory needed and allowed.
func taskStatus(err error) error {
	c, reason := taskCode(err)
	var meta map[string]string
	var details []protoadapt.MessageV1
	if vs := violations(err); vs != nil {
		br := &errdetails.BadRequest{}
		for _, v := range vs {
			br.FieldViolations = append(br.FieldViolations, &errdetails.BadRequest_FieldViolation{Field: v.Field, Description: v.Description})
		}
		details = append(details, br)
	}
	var le *ed.LimitError
	if errors.As(err, &le) {
		meta = map[string]string{
			"need_bytes":     strconv.FormatInt(le.Need, 10),
			"limit_bytes":    strconv.FormatInt(le.Limit, 10),
			"dimension":      strconv.FormatInt(le.Dimension, 10),
			"largest_sector": strconv.FormatInt(le.LargestSector, 10),
		}
		details = append(details, &errdetails.QuotaFailure{Violations: []*errdetails.QuotaFailure_Violation{{
			Subject:     "memory",
			Description: fmt.Sprintf("the task needs about %s (%d bytes); this server allows %s (%d bytes)", ed.FormatBytes(le.Need), le.Need, ed.FormatBytes(le.Limit), le.Limit),
		}}})
	}
	if c == codes.Internal {
		return statusError(c, reason, "internal error while planning the job", nil)
	}
	return statusError(c, reason, err.Error(), meta, details...)
}

// jobError returns the JobError stored with a job that failed with err.
func jobError(err error) *frustumv1.JobError {
	c, _ := taskCode(err)
	return &frustumv1.JobError{Code: CodeName(c), Message: err.Error(), FieldViolations: violations(err)}
}

// CodeName returns the canonical name of c, such as "INVALID_ARGUMENT"
// (google/rpc/code.proto), the form of JobError.code.
func CodeName(c codes.Code) string { return rpccode.Code(c).String() }

// panicError is a panic of the engine, recovered in the job that caused it.
type panicError struct {
	value any
	stack string
}

func (e *panicError) Error() string { return fmt.Sprintf("the engine panicked: %v", e.value) }
