package tasks

import (
	"context"
	"errors"
	"strings"

	"google.golang.org/protobuf/proto"

	"frustum/cluster"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// The task names of TaskName, as they appear in Job.task.
const (
	TaskSpectrum      = "spectrum"
	TaskThermo        = "thermo"
	TaskMagnetization = "magnetization"
)

// TaskName returns the name of the task that spec asks for ("spectrum",
// "thermo", "magnetization" or "fit"), or "" when it names none.
func TaskName(spec *frustumv1.JobSpec) string {
	switch spec.GetTask().(type) {
	case *frustumv1.JobSpec_Spectrum:
		return TaskSpectrum
	case *frustumv1.JobSpec_Thermo:
		return TaskThermo
	case *frustumv1.JobSpec_Magnetization:
		return TaskMagnetization
	case *frustumv1.JobSpec_Fit:
		return TaskFit
	}
	return ""
}

// Plan validates a job spec and returns what the engine would do (method,
// route, sectors, dimensions, memory estimate) without diagonalizing
// anything. It checks the cluster (cluster.FromProto), the task's parameters
// and the engine's own request checks, and returns the *ed.LimitError of a
// task that can never fit opt.Limits.MaxMemory.
//
// The paths in Plan's errors are dotted paths relative to a request that
// holds the spec in its field "spec", so that a service can report them as
// they are:
//
//	cluster.FieldErrors    every Path prefixed "spec.cluster." (spec.cluster.bonds[3].b)
//	*ed.RequestError       Field prefixed "spec.<task>." (spec.thermo.temperatures[0]),
//	                       or "spec." when it blames the cluster (spec.cluster)
//	*ParameterError        Field prefixed the same way (spec.magnetization.direction);
//	                       "spec", "spec.cluster" or "spec.task" when one is missing
//
// An *ed.LimitError passes through unchanged.
func Plan(spec *frustumv1.JobSpec, opt ed.Options) (*frustumv1.EngineReport, error) {
	if t, ok := spec.GetTask().(*frustumv1.JobSpec_Fit); ok {
		if err := fitSpecError(spec); err != nil {
			return nil, err
		}
		rep, err := PlanFit(t.Fit, opt)
		if err != nil {
			return nil, prefixFitError(err)
		}
		return rep, nil
	}
	task, m, err := specModel(spec)
	if err != nil {
		return nil, err
	}
	var rep ed.Report
	switch t := spec.GetTask().(type) {
	case *frustumv1.JobSpec_Spectrum:
		req, perr := SpectrumRequestFromProto(t.Spectrum)
		if perr != nil {
			return nil, prefixError(task, perr)
		}
		rep, err = ed.PlanSpectrum(m, req, opt)
	case *frustumv1.JobSpec_Thermo:
		req, perr := ThermoRequestFromProto(t.Thermo)
		if perr != nil {
			return nil, prefixError(task, perr)
		}
		rep, err = ed.PlanThermo(m, req, opt)
	case *frustumv1.JobSpec_Magnetization:
		req, perr := MagnetizationRequestFromProto(t.Magnetization)
		if perr != nil {
			return nil, prefixError(task, perr)
		}
		rep, err = ed.PlanMagnetization(m, req, opt)
	}
	if err != nil {
		return nil, prefixError(task, err)
	}
	return ReportToProto(rep), nil
}

// Run runs the task of spec and returns its result message: a
// *frustumv1.SpectrumResult, *frustumv1.ThermoResult or
// *frustumv1.MagnetizationResult, the same message that Spectrum, Thermo
// or Magnetization return for the same cluster and parameters. Its errors
// are those of Plan, with the same paths, or ctx.Err() when ctx ends first.
func Run(ctx context.Context, spec *frustumv1.JobSpec, opt ed.Options) (proto.Message, error) {
	if t, ok := spec.GetTask().(*frustumv1.JobSpec_Fit); ok {
		if err := fitSpecError(spec); err != nil {
			return nil, err
		}
		res, err := Fit(ctx, t.Fit, opt)
		if err != nil {
			return nil, prefixFitError(err)
		}
		return res, nil
	}
	task, _, err := specModel(spec)
	if err != nil {
		return nil, err
	}
	c := spec.GetCluster()
	var res proto.Message
	switch t := spec.GetTask().(type) {
	case *frustumv1.JobSpec_Spectrum:
		res, err = nilIfError(Spectrum(ctx, c, t.Spectrum, opt))
	case *frustumv1.JobSpec_Thermo:
		res, err = nilIfError(Thermo(ctx, c, t.Thermo, opt))
	case *frustumv1.JobSpec_Magnetization:
		res, err = nilIfError(Magnetization(ctx, c, t.Magnetization, opt))
	}
	if err != nil {
		return nil, prefixError(task, err)
	}
	return res, nil
}

// nilIfError turns a typed nil result into an untyped nil proto.Message.
func nilIfError[M proto.Message](m M, err error) (proto.Message, error) {
	if err != nil {
		return nil, err
	}
	return m, nil
}

// specModel checks that spec names a task and holds a valid cluster.
func specModel(spec *frustumv1.JobSpec) (string, *cluster.Model, error) {
	if spec == nil {
		return "", nil, &ParameterError{Field: "spec", Reason: "missing"}
	}
	task := TaskName(spec)
	if task == "" {
		return "", nil, &ParameterError{Field: "spec.task", Reason: "no task: set one of spectrum, thermo, magnetization or fit"}
	}
	if spec.GetCluster() == nil {
		return task, nil, &ParameterError{Field: "spec.cluster", Reason: "missing"}
	}
	m, err := cluster.FromProto(spec.GetCluster())
	if err != nil {
		return task, nil, prefixError(task, err)
	}
	return task, m, nil
}

// prefixError returns err with its field paths made relative to the request
// that holds the spec: cluster paths under "spec.cluster", the task's
// parameter fields under "spec.<task>". Errors without paths are returned
// unchanged.
func prefixError(task string, err error) error {
	var fes cluster.FieldErrors
	if errors.As(err, &fes) {
		out := make(cluster.FieldErrors, len(fes))
		for i, fe := range fes {
			out[i] = &cluster.FieldError{Path: joinPath("spec.cluster", fe.Path), Reason: fe.Reason}
		}
		return out
	}
	var fe *cluster.FieldError
	if errors.As(err, &fe) {
		return &cluster.FieldError{Path: joinPath("spec.cluster", fe.Path), Reason: fe.Reason}
	}
	var re *ed.RequestError
	if errors.As(err, &re) {
		return &ed.RequestError{Field: taskPath(task, re.Field), Reason: re.Reason}
	}
	var pe *ParameterError
	if errors.As(err, &pe) {
		if strings.HasPrefix(pe.Field, "spec") {
			return err
		}
		return &ParameterError{Field: taskPath(task, pe.Field), Reason: pe.Reason}
	}
	return err
}

// taskPath places an engine or parameter field under the spec: the cluster
// is a field of the spec itself, everything else belongs to the task's
// parameters.
func taskPath(task, field string) string {
	if field == "cluster" || strings.HasPrefix(field, "cluster.") || strings.HasPrefix(field, "cluster[") {
		return "spec." + field
	}
	return joinPath("spec."+task, field)
}

func joinPath(prefix, path string) string {
	switch {
	case path == "":
		return prefix
	case strings.HasPrefix(path, "["):
		return prefix + path
	}
	return prefix + "." + path
}
