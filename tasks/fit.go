package tasks

import (
	"context"
	"errors"
	"math"
	"slices"

	"google.golang.org/protobuf/proto"

	"frustum/compare"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// TaskFit is the name of the fit task in Job.task.
const TaskFit = "fit"

// DataFromProto converts measured data; it is validated by the fit.
func DataFromProto(p *frustumv1.MeasuredData) *compare.Data {
	if p == nil {
		return nil
	}
	d := &compare.Data{
		Name:        p.GetName(),
		Temperature: slices.Clone(p.GetTemperature()),
		Field:       slices.Clone(p.GetField()),
		Value:       slices.Clone(p.GetValue()),
		ValueUnit:   p.GetValueUnit(),
	}
	if len(p.GetSigma()) > 0 {
		d.Sigma = slices.Clone(p.GetSigma())
	}
	if d.ValueUnit == "" {
		d.ValueUnit = "1"
	}
	return d
}

// DataToProto converts measured data to its message.
func DataToProto(d *compare.Data) *frustumv1.MeasuredData {
	return &frustumv1.MeasuredData{
		Name:        d.Name,
		Temperature: slices.Clone(d.Temperature),
		Field:       slices.Clone(d.Field),
		Value:       slices.Clone(d.Value),
		Sigma:       slices.Clone(d.Sigma),
		ValueUnit:   d.ValueUnit,
	}
}

// FitRequestFromProto converts fit parameters to a fit request.
func FitRequestFromProto(p *frustumv1.FitParameters) (compare.Request, error) {
	var req compare.Request
	if p == nil {
		return req, &ParameterError{Field: "data", Reason: "missing"}
	}
	o, err := compare.ParseObservable(p.GetObservable())
	if err != nil {
		return req, &ParameterError{Field: "observable", Reason: err.Error()}
	}
	link, err := compare.ParseLink(p.GetLink())
	if err != nil {
		return req, &ParameterError{Field: "link", Reason: err.Error()}
	}
	dir, err := vector3("direction", p.GetDirection())
	if err != nil {
		return req, err
	}
	req = compare.Request{
		Data:           DataFromProto(p.GetData()),
		Models:         p.GetModels(),
		Observable:     o,
		Link:           link,
		Powder:         int(p.GetPowder()),
		Direction:      dir,
		ScalingG:       p.GetScalingG(),
		MaxEvaluations: int(p.GetMaxEvaluations()),
	}
	if p.ScalingG != nil && p.GetScalingG() == 0 {
		return req, &ParameterError{Field: "scaling_g", Reason: "0: must be a positive number"}
	}
	for _, v := range p.GetVary() {
		req.Vary = append(req.Vary, compare.Parameter{
			Name: v.GetName(), Paths: slices.Clone(v.GetPaths()),
			Min: v.GetMin(), HasMin: v.Min != nil,
			Max: v.GetMax(), HasMax: v.Max != nil,
			Start: v.GetStart(), HasStart: v.Start != nil,
		})
	}
	return req, nil
}

// FitParametersToProto converts a fit request to its parameters message.
func FitParametersToProto(r compare.Request) *frustumv1.FitParameters {
	p := &frustumv1.FitParameters{
		Observable:     r.Observable.String(),
		Link:           r.Link.String(),
		Powder:         int32(r.Powder),
		MaxEvaluations: int32(r.MaxEvaluations),
		Models:         r.Models,
	}
	if r.Data != nil {
		p.Data = DataToProto(r.Data)
	}
	if r.Direction != [3]float64{} {
		p.Direction = vectorToProto(r.Direction)
	}
	if r.ScalingG != 0 {
		p.ScalingG = proto.Float64(r.ScalingG)
	}
	for _, v := range r.Vary {
		fp := &frustumv1.FitParameter{Name: v.Name, Paths: slices.Clone(v.Paths)}
		if v.HasMin {
			fp.Min = proto.Float64(v.Min)
		}
		if v.HasMax {
			fp.Max = proto.Float64(v.Max)
		}
		if v.HasStart {
			fp.Start = proto.Float64(v.Start)
		}
		p.Vary = append(p.Vary, fp)
	}
	return p
}

// PowderToProto converts a powder report (nil stays nil).
func PowderToProto(r *ed.PowderReport) *frustumv1.PowderReport {
	if r == nil {
		return nil
	}
	return &frustumv1.PowderReport{
		Rule: r.Rule, Directions: int32(r.Directions), Degree: int32(r.Degree), Evaluated: int32(r.Evaluated),
		Symmetry: r.Symmetry, CoarseRule: r.CoarseRule, CoarseDirections: int32(r.CoarseDirections),
		Deviation: r.Deviation, RelativeDeviation: r.RelativeDeviation,
	}
}

// PowderFromProto converts a powder report message (nil stays nil).
func PowderFromProto(p *frustumv1.PowderReport) *ed.PowderReport {
	if p == nil {
		return nil
	}
	return &ed.PowderReport{
		Rule: p.GetRule(), Directions: int(p.GetDirections()), Degree: int(p.GetDegree()), Evaluated: int(p.GetEvaluated()),
		Symmetry: p.GetSymmetry(), CoarseRule: p.GetCoarseRule(), CoarseDirections: int(p.GetCoarseDirections()),
		Deviation: p.GetDeviation(), RelativeDeviation: p.GetRelativeDeviation(),
	}
}

// FitResultToProto converts a fit result.
func FitResultToProto(r *compare.Result) *frustumv1.FitResult {
	d := r.Data
	out := &frustumv1.FitResult{
		Observable:  r.Observable.String(),
		Link:        r.Link.String(),
		DataName:    d.Name,
		Temperature: slices.Clone(d.Temperature),
		Field:       slices.Clone(d.Field),
		Value:       slices.Clone(d.Value),
		Sigma:       slices.Clone(d.Sigma),
		ValueUnit:   d.ValueUnit,
		Scaling:     slices.Clone(r.Scaling),
		ScalingG:    r.ScalingG,
		Best:        r.Best,
		Warnings:    slices.Clone(r.Warnings),
	}
	for _, m := range r.Models {
		mf := &frustumv1.ModelFit{
			Name: m.Name, Baseline: m.Baseline,
			ChiSquare: m.ChiSquare, DegreesOfFreedom: int32(m.DegreesOfFreedom), ReducedChiSquare: m.ReducedChiSquare,
			Aic: m.AIC, Bic: m.BIC,
			Curve: slices.Clone(m.Curve), Observable: slices.Clone(m.Observable), Residual: slices.Clone(m.Residual),
			Converged: m.Converged, Evaluations: int32(m.Evaluations), Warnings: slices.Clone(m.Warnings),
			Cluster: m.Cluster, Powder: PowderToProto(m.Powder),
		}
		if !m.Baseline {
			mf.Engine = ReportToProto(m.Report)
		}
		for _, p := range m.Parameters {
			mf.Parameters = append(mf.Parameters, &frustumv1.FittedParameter{Name: p.Name, Value: p.Value, Error: p.Error,
				Unit: p.Unit, Paths: slices.Clone(p.Paths), AtBound: p.AtBound})
		}
		for _, l := range m.Links {
			lc := &frustumv1.LinkCoefficients{Scale: l.Scale, ScaleError: l.ScaleError, Offset: l.Offset, OffsetError: l.OffsetError}
			if !math.IsNaN(l.Temperature) {
				lc.Temperature = proto.Float64(l.Temperature)
			}
			mf.Links = append(mf.Links, lc)
		}
		for _, c := range m.Correlations {
			mf.Correlations = append(mf.Correlations, &frustumv1.Correlation{A: c.A, B: c.B, Value: c.Value})
		}
		out.Models = append(out.Models, mf)
	}
	return out
}

// Fit sets the models of p against its data (see compare.Fit). Its errors
// name the fields of p by their proto names (data.temperature[3],
// models[1].bonds[0].b, vary[0].paths[1], observable).
func Fit(ctx context.Context, p *frustumv1.FitParameters, opt ed.Options) (*frustumv1.FitResult, error) {
	req, err := FitRequestFromProto(p)
	if err != nil {
		return nil, err
	}
	res, err := compare.Fit(ctx, req, opt)
	if err != nil {
		return nil, err
	}
	return FitResultToProto(res), nil
}

// PlanFit checks p as Fit would before it starts (data, observable,
// parameters, every model at its start values, memory) and returns the
// engine's plan of the largest model at the data's points.
func PlanFit(p *frustumv1.FitParameters, opt ed.Options) (*frustumv1.EngineReport, error) {
	req, err := FitRequestFromProto(p)
	if err != nil {
		return nil, err
	}
	rep, err := compare.Plan(req, opt)
	if err != nil {
		return nil, err
	}
	return ReportToProto(rep), nil
}

// fitSpecError checks the spec of a fit: its clusters travel in fit.models.
func fitSpecError(spec *frustumv1.JobSpec) error {
	if spec.GetCluster() != nil {
		return &ParameterError{Field: "spec.cluster", Reason: "a fit takes its clusters in spec.fit.models; leave spec.cluster empty"}
	}
	return nil
}

// prefixFitError places a fit's field paths under spec.fit.
func prefixFitError(err error) error {
	var re *ed.RequestError
	if errors.As(err, &re) {
		return &ed.RequestError{Field: joinPath("spec.fit", re.Field), Reason: re.Reason}
	}
	var pe *ParameterError
	if errors.As(err, &pe) {
		return &ParameterError{Field: joinPath("spec.fit", pe.Field), Reason: pe.Reason}
	}
	return err
}
