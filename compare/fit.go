package compare

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"

	"frustum/cluster"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// DefaultMaxEvaluations bounds the model evaluations of one fit when
// Request.MaxEvaluations is 0.
const DefaultMaxEvaluations = 400

// Request is a fit of measured data by cluster models and the free-spin
// baselines.
type Request struct {
	Data       *Data
	Models     []*frustumv1.Cluster
	Observable Observable
	// Vary: the parameters, applied to every model that has their paths.
	Vary []Parameter
	Link LinkKind
	// Powder > 0: the clusters' observables are powder averages over at
	// least Powder field directions; else the field is along Direction
	// (zero means z).
	Powder    int
	Direction [3]float64
	// ScalingG is the g of the scaling variable reported for every point;
	// 0 means 2.
	ScalingG       float64
	MaxEvaluations int
}

// ParameterValue is a fitted parameter at the optimum.
type ParameterValue struct {
	Name         string
	Value, Error float64
	Unit         string
	Paths        []string
	AtBound      bool
}

// Correlation is the correlation coefficient of two fitted quantities.
type Correlation struct {
	A, B  string
	Value float64
}

// ModelResult is one model, or one baseline, at its optimum.
type ModelResult struct {
	Name     string
	Baseline bool
	// ChiSquare = sum ((y - a O - c)/sigma)^2; DegreesOfFreedom = points -
	// fitted quantities (parameters and link coefficients).
	ChiSquare        float64
	DegreesOfFreedom int
	ReducedChiSquare float64
	// AIC = chi^2 + 2k, BIC = chi^2 + k ln n; without sigma, n ln(chi^2/n)
	// replaces chi^2 (the Gaussian likelihood with its variance fitted).
	AIC, BIC   float64
	Parameters []ParameterValue
	Links      []Link
	// Curve is a O + c at every point (the data's unit), Observable is O,
	// Residual is (y - curve)/sigma.
	Curve, Observable, Residual []float64
	Correlations                []Correlation
	Converged                   bool
	Evaluations                 int
	Warnings                    []string
	// Cluster is the model with the fitted values put in (nil for baselines).
	Cluster *frustumv1.Cluster
	Report  ed.Report
	Powder  *ed.PowderReport
}

// Result is the whole comparison.
type Result struct {
	Observable Observable
	Link       LinkKind
	Data       *Data
	// Scaling is x = g mu_B B / (2 k_B T) at every point with g = ScalingG.
	Scaling  []float64
	ScalingG float64
	// Models: the request's models in order, then the baselines.
	Models []ModelResult
	// Best is the name of the model with the lowest AIC.
	Best     string
	Warnings []string
}

// Baselines are the free spins fitted beside every set of models.
var Baselines = []FreeSpin{{S: 0.5, G: 2}, {S: 1, G: 2}}

// Fit fits every model of req, and the free-spin baselines, to the data:
// nonlinear least squares over the named parameters (gonum's Nelder-Mead in
// variables that map onto the bounds, then Gauss-Newton steps from the
// finite-difference Jacobian), with the link coefficients a, c of
// y = a O + c solved in closed form at every step. Uncertainties come from
// the covariance (J^T W J)^-1 of every fitted quantity at the optimum,
// scaled by the reduced chi-square when the data carry no sigma.
//
// Errors: *ed.RequestError naming the field of the request (data.*,
// models[k].*, vary[i].*, observable, link), *ed.LimitError, ctx.Err().
func Fit(ctx context.Context, req Request, opt ed.Options) (*Result, error) {
	f, err := newFitter(req, opt)
	if err != nil {
		return nil, err
	}
	res := &Result{Observable: req.Observable, Link: req.Link, Data: req.Data, ScalingG: f.scalingG}
	for i := range req.Data.Temperature {
		res.Scaling = append(res.Scaling, ScalingVariable(f.scalingG, req.Data.Field[i], req.Data.Temperature[i]))
	}
	total := len(f.models) + len(Baselines)
	for k, m := range f.models {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		mr, err := f.fitCluster(ctx, k, m, fmt.Sprintf("fit %d/%d: %s", k+1, total, m.name))
		if err != nil {
			return nil, err
		}
		res.Models = append(res.Models, *mr)
	}
	for i, b := range Baselines {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		res.Models = append(res.Models, *f.fitFreeSpin(b, fmt.Sprintf("fit %d/%d: %s", len(f.models)+i+1, total, b.Name())))
	}
	best := math.Inf(1)
	for _, m := range res.Models {
		if m.AIC < best {
			best, res.Best = m.AIC, m.Name
		}
	}
	if req.Data.Sigma == nil {
		res.Warnings = append(res.Warnings, "the data carry no sigma: every point weighs 1, chi-square is in the data's unit squared, and the errors are scaled by the square root of the reduced chi-square")
	}
	return res, nil
}

// Plan checks req as Fit does before it starts (data, observable,
// parameters, every model at its start values, memory) and returns the
// engine's plan of the model that needs the most memory; with no models, a
// report of the closed-form baselines.
func Plan(req Request, opt ed.Options) (ed.Report, error) {
	f, err := newFitter(req, opt)
	if err != nil {
		return ed.Report{}, err
	}
	if f.plan == nil {
		return ed.Report{Method: "closed form", Route: "free-spin baselines only (Brillouin functions)"}, nil
	}
	return *f.plan, nil
}

// fitter holds what every model's fit shares.
type fitter struct {
	req      Request
	opt      ed.Options // for the engine: no progress of its own
	progress ed.Progress
	grid     grid
	groups   [][]int
	gtemps   []float64
	w        []float64
	sigma    []float64
	maxEval  int
	scalingG float64
	parsed   [][]path
	models   []namedModel
	plan     *ed.Report // the plan of the model needing the most memory
}

type namedModel struct {
	name string
	c    *frustumv1.Cluster
	bind *binding
}

func newFitter(req Request, opt ed.Options) (*fitter, error) {
	d := req.Data
	if d == nil {
		return nil, &ed.RequestError{Field: "data", Reason: "missing"}
	}
	if err := d.Validate(); err != nil {
		return nil, dataRequestError(err)
	}
	if req.Observable.Kind == 0 {
		return nil, &ed.RequestError{Field: "observable", Reason: "missing: polarization[:GROUP], polarization-squared[:GROUP], fluctuation or moment[:GROUP]"}
	}
	if req.Powder < 0 {
		return nil, &ed.RequestError{Field: "powder", Reason: fmt.Sprintf("%d directions: must be 0 (one direction) or more", req.Powder)}
	}
	if req.Powder > 0 && req.Direction != [3]float64{} {
		return nil, &ed.RequestError{Field: "direction", Reason: "a powder average takes every direction; give no direction"}
	}
	f := &fitter{req: req, opt: opt, progress: opt.Progress, grid: newGrid(d), maxEval: req.MaxEvaluations, scalingG: req.ScalingG}
	f.opt.Progress = nil
	if f.maxEval == 0 {
		f.maxEval = DefaultMaxEvaluations
	}
	if f.maxEval < 0 {
		return nil, &ed.RequestError{Field: "max_evaluations", Reason: "must be >= 0"}
	}
	if f.scalingG == 0 {
		f.scalingG = 2
	}
	if f.scalingG < 0 || math.IsNaN(f.scalingG) || math.IsInf(f.scalingG, 0) {
		return nil, &ed.RequestError{Field: "scaling_g", Reason: fmt.Sprintf("%v: must be a positive number", req.ScalingG)}
	}
	f.groups, f.gtemps = linkGroups(req.Link, d)
	f.w, f.sigma = make([]float64, d.Len()), make([]float64, d.Len())
	for i := range f.w {
		f.sigma[i] = 1
		if d.Sigma != nil {
			f.sigma[i] = d.Sigma[i]
		}
		f.w[i] = 1 / (f.sigma[i] * f.sigma[i])
	}
	names := map[string]bool{}
	for i, p := range req.Vary {
		field := fmt.Sprintf("vary[%d]", i)
		switch {
		case strings.TrimSpace(p.Name) == "":
			return nil, &ed.RequestError{Field: field + ".name", Reason: "empty: every parameter needs a name"}
		case names[p.Name]:
			return nil, &ed.RequestError{Field: field + ".name", Reason: fmt.Sprintf("%q is used by another parameter", p.Name)}
		case len(p.Paths) == 0:
			return nil, &ed.RequestError{Field: field + ".paths", Reason: fmt.Sprintf("parameter %s is bound to no path", p.Name)}
		case p.HasMin && p.HasMax && !(p.Min < p.Max):
			return nil, &ed.RequestError{Field: field + ".max", Reason: fmt.Sprintf("parameter %s: max %g must exceed min %g", p.Name, p.Max, p.Min)}
		}
		for _, v := range []struct {
			name string
			has  bool
			x    float64
		}{{"min", p.HasMin, p.Min}, {"max", p.HasMax, p.Max}, {"start", p.HasStart, p.Start}} {
			if v.has && (math.IsNaN(v.x) || math.IsInf(v.x, 0)) {
				return nil, &ed.RequestError{Field: field + "." + v.name, Reason: fmt.Sprintf("%v is not a finite number", v.x)}
			}
		}
		names[p.Name] = true
		var ps []path
		seen := map[string]bool{}
		for j, s := range p.Paths {
			pp, err := parsePath(s)
			if err != nil {
				return nil, &ed.RequestError{Field: fmt.Sprintf("%s.paths[%d]", field, j), Reason: err.Error()}
			}
			if seen[s] {
				return nil, &ed.RequestError{Field: fmt.Sprintf("%s.paths[%d]", field, j), Reason: fmt.Sprintf("%s is given twice", s)}
			}
			seen[s] = true
			ps = append(ps, pp)
		}
		f.parsed = append(f.parsed, ps)
	}
	// Every path may belong to one parameter only.
	owner := map[string]string{}
	for i, ps := range f.parsed {
		for _, p := range ps {
			if o, ok := owner[p.text]; ok {
				return nil, &ed.RequestError{Field: fmt.Sprintf("vary[%d].paths", i), Reason: fmt.Sprintf("%s is bound to %s already", p.text, o)}
			}
			owner[p.text] = req.Vary[i].Name
		}
	}
	used := make([]bool, len(req.Vary))
	taken := map[string]int{}
	for k, c := range req.Models {
		field := fmt.Sprintf("models[%d]", k)
		if c == nil {
			return nil, &ed.RequestError{Field: field, Reason: "missing"}
		}
		m, err := cluster.FromProto(c)
		if err != nil {
			return nil, modelError(k, err)
		}
		if err := f.checkGroup(k, m); err != nil {
			return nil, err
		}
		b, err := bind(c, req.Vary, f.parsed)
		if err != nil {
			var re *ed.RequestError
			if errors.As(err, &re) {
				return nil, &ed.RequestError{Field: re.Field, Reason: fmt.Sprintf("%s (model %s)", re.Reason, field)}
			}
			return nil, err
		}
		for _, p := range b.params {
			for i := range req.Vary {
				if req.Vary[i].Name == p.Name {
					used[i] = true
				}
			}
		}
		// The cluster at its start values must be valid, and fit in memory.
		start := b.apply(c, b.start)
		sm, err := cluster.FromProto(start)
		if err != nil {
			return nil, modelError(k, fmt.Errorf("at the start values of the parameters: %w", err))
		}
		rep, err := ed.PlanMagnetization(sm, f.magnetizationRequest(), f.opt)
		if err != nil {
			var le *ed.LimitError
			if errors.As(err, &le) {
				return nil, err
			}
			return nil, modelError(k, err)
		}
		if f.plan == nil || rep.MemoryBytes > f.plan.MemoryBytes {
			f.plan = &rep
		}
		name := m.Name
		if name == "" {
			name = fmt.Sprintf("model %d", k+1)
		}
		if n := taken[name]; n > 0 {
			name = fmt.Sprintf("%s (%d)", name, n+1)
		}
		taken[m.Name]++
		f.models = append(f.models, namedModel{name: name, c: c, bind: b})
		if k := len(b.params) + f.linkCount(); k >= d.Len() {
			return nil, &ed.RequestError{Field: "data", Reason: fmt.Sprintf("%d points cannot determine the %d fitted quantities of %s", d.Len(), k, field)}
		}
	}
	for i, u := range used {
		if !u && len(req.Models) > 0 {
			return nil, &ed.RequestError{Field: fmt.Sprintf("vary[%d].paths", i), Reason: fmt.Sprintf("parameter %s applies to none of the models", req.Vary[i].Name)}
		}
	}
	if k := 1 + f.linkCount(); k >= d.Len() {
		return nil, &ed.RequestError{Field: "data", Reason: fmt.Sprintf("%d points cannot determine the %d fitted quantities of a free-spin baseline", d.Len(), k)}
	}
	return f, nil
}

func (f *fitter) checkGroup(k int, m *cluster.Model) error {
	if f.req.Observable.Group == "" {
		return nil
	}
	for _, s := range m.Sites {
		if s.Group == f.req.Observable.Group {
			return nil
		}
	}
	return &ed.RequestError{Field: fmt.Sprintf("models[%d]", k), Reason: fmt.Sprintf("no site is in group %q of the observable %s", f.req.Observable.Group, f.req.Observable)}
}

func (f *fitter) linkCount() int { return 2 * len(f.groups) }

func (f *fitter) magnetizationRequest() ed.MagnetizationRequest {
	return ed.MagnetizationRequest{Temperatures: f.grid.temps, Fields: f.grid.fields, Direction: f.req.Direction,
		Powder: f.req.Powder, Susceptibility: f.req.Observable.Kind == Fluctuation}
}

// modelError places an error about model k under models[k].
func modelError(k int, err error) error {
	prefix := fmt.Sprintf("models[%d]", k)
	var fes cluster.FieldErrors
	var fe *cluster.FieldError
	var re *ed.RequestError
	switch {
	case errors.As(err, &fes):
		var parts []string
		for _, e := range fes {
			parts = append(parts, e.Path+": "+e.Reason)
		}
		field := prefix
		if len(fes) > 0 {
			field = joinField(prefix, fes[0].Path)
		}
		return &ed.RequestError{Field: field, Reason: strings.Join(parts, "; ")}
	case errors.As(err, &fe):
		return &ed.RequestError{Field: joinField(prefix, fe.Path), Reason: fe.Reason}
	case errors.As(err, &re):
		return &ed.RequestError{Field: prefix, Reason: re.Field + ": " + re.Reason}
	}
	return err
}

func joinField(prefix, p string) string {
	if p == "" {
		return prefix
	}
	if strings.HasPrefix(p, "[") {
		return prefix + p
	}
	return prefix + "." + p
}

// dataRequestError turns a data validation error into a request error on
// the data field.
func dataRequestError(err error) error {
	var de *DataError
	if errors.As(err, &de) {
		field := "data"
		if de.Column != "" {
			field = "data." + de.Column
		}
		return &ed.RequestError{Field: field, Reason: de.Reason}
	}
	return &ed.RequestError{Field: "data", Reason: err.Error()}
}

// problem is one model's least-squares problem in its physical parameters.
type problem struct {
	f        *fitter
	names    []string
	units    []string
	lo, hi   []float64
	hasLo    []bool
	hasHi    []bool
	scale    []float64 // typical size of each parameter, for steps
	eval     func(theta []float64) ([]float64, error)
	evals    int
	err      error
	stage    string
	lastEval evaluation
}

// chi2 returns the chi-square at theta with the links solved, and the
// observable; a failed evaluation gives +Inf and is remembered.
func (p *problem) chi2(theta []float64) (float64, []float64, []Link) {
	if p.err != nil {
		return math.Inf(1), nil, nil
	}
	o, err := p.eval(theta)
	p.evals++
	if p.f.progress != nil {
		p.f.progress(p.stage, min(p.evals, p.f.maxEval), p.f.maxEval)
	}
	if err != nil {
		p.err = err
		return math.Inf(1), nil, nil
	}
	total := 0.0
	links := make([]Link, len(p.f.groups))
	for g, idx := range p.f.groups {
		l, c := solveLink(o, p.f.req.Data.Value, p.f.w, idx)
		l.Temperature = p.f.gtemps[g]
		links[g] = l
		total += c
	}
	return total, o, links
}

// toPhysical maps the optimizer's unbounded variables u onto the bounds:
// sin for two bounds, sqrt(u^2+1) for one, a plain scale for none.
func (p *problem) toPhysical(u []float64) []float64 {
	t := make([]float64, len(u))
	for i, x := range u {
		switch {
		case p.hasLo[i] && p.hasHi[i]:
			t[i] = p.lo[i] + (p.hi[i]-p.lo[i])*(1+math.Sin(x))/2
		case p.hasLo[i]:
			t[i] = p.lo[i] + p.scale[i]*(math.Sqrt(x*x+1)-1)
		case p.hasHi[i]:
			t[i] = p.hi[i] - p.scale[i]*(math.Sqrt(x*x+1)-1)
		default:
			t[i] = p.scale[i] * x
		}
	}
	return t
}

func (p *problem) toInternal(t []float64) []float64 {
	u := make([]float64, len(t))
	for i, x := range t {
		switch {
		case p.hasLo[i] && p.hasHi[i]:
			s := 2*(x-p.lo[i])/(p.hi[i]-p.lo[i]) - 1
			u[i] = math.Asin(math.Max(-1, math.Min(1, s)))
		case p.hasLo[i]:
			r := (x-p.lo[i])/p.scale[i] + 1
			u[i] = math.Sqrt(math.Max(0, r*r-1))
		case p.hasHi[i]:
			r := (p.hi[i]-x)/p.scale[i] + 1
			u[i] = math.Sqrt(math.Max(0, r*r-1))
		default:
			u[i] = x / p.scale[i]
		}
	}
	return u
}

// clamp keeps theta inside the bounds.
func (p *problem) clamp(t []float64) {
	for i := range t {
		if p.hasLo[i] {
			t[i] = math.Max(t[i], p.lo[i])
		}
		if p.hasHi[i] {
			t[i] = math.Min(t[i], p.hi[i])
		}
	}
}

func (f *fitter) fitCluster(ctx context.Context, k int, m namedModel, stage string) (*ModelResult, error) {
	b := m.bind
	p := &problem{f: f, stage: stage}
	for i, par := range b.params {
		p.names = append(p.names, par.Name)
		p.units = append(p.units, b.paths[i][0].unit())
		p.lo, p.hi = append(p.lo, par.Min), append(p.hi, par.Max)
		p.hasLo, p.hasHi = append(p.hasLo, par.HasMin), append(p.hasHi, par.HasMax)
		s := math.Abs(b.start[i])
		if par.HasMin && par.HasMax {
			s = math.Max(s, (par.Max-par.Min)/4)
		}
		if s == 0 {
			s = 1
		}
		p.scale = append(p.scale, s)
	}
	p.eval = func(theta []float64) ([]float64, error) {
		c := b.apply(m.c, theta)
		mod, err := cluster.FromProto(c)
		if err != nil {
			return nil, modelError(k, fmt.Errorf("at %s: %w", describeValues(p.names, theta), err))
		}
		ev, err := clusterObservable(ctx, mod, f.req.Observable, fieldGeometry{Direction: f.req.Direction, Powder: f.req.Powder}, f.grid, f.opt)
		if err != nil {
			if errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) {
				return nil, err
			}
			return nil, modelError(k, err)
		}
		p.lastEval = ev
		return ev.values, nil
	}
	mr, theta, err := f.solve(p, b.start)
	if err != nil {
		return nil, err
	}
	mr.Name = m.name
	mr.Warnings = append(append([]string(nil), b.warn...), mr.Warnings...)
	for i, par := range b.params {
		var paths []string
		for _, pp := range b.paths[i] {
			paths = append(paths, pp.text)
		}
		mr.Parameters[i].Paths = paths
		_ = par
	}
	mr.Cluster = b.apply(m.c, theta)
	// The report and powder figures of the optimum itself.
	if _, err := p.eval(theta); err != nil {
		return nil, err
	}
	mr.Report, mr.Powder = p.lastEval.report, p.lastEval.powder
	// The engine's own warnings (an unconverged powder average among them)
	// stay in Report.Warnings.
	return mr, nil
}

func (f *fitter) fitFreeSpin(s FreeSpin, stage string) *ModelResult {
	p := &problem{f: f, stage: stage, names: []string{"g"}, units: []string{"1"},
		lo: []float64{0.1}, hi: []float64{10}, hasLo: []bool{true}, hasHi: []bool{true}, scale: []float64{2}}
	p.eval = func(theta []float64) ([]float64, error) {
		return freeSpinObservable(FreeSpin{S: s.S, G: theta[0]}, f.req.Observable, f.req.Data), nil
	}
	mr, _, _ := f.solve(p, []float64{s.G})
	mr.Name = s.Name()
	mr.Baseline = true
	return mr
}

func describeValues(names []string, v []float64) string {
	var parts []string
	for i := range names {
		parts = append(parts, fmt.Sprintf("%s = %g", names[i], v[i]))
	}
	return strings.Join(parts, ", ")
}

// solve minimizes chi-square from start and fills everything but the names,
// paths and the engine's report.
func (f *fitter) solve(p *problem, start []float64) (*ModelResult, []float64, error) {
	theta := append([]float64(nil), start...)
	mr := &ModelResult{}
	n := len(theta)
	best, _, _ := p.chi2(theta)
	if p.err != nil {
		return nil, nil, p.err
	}
	mr.Converged = true
	if n > 0 {
		fn := func(u []float64) float64 {
			c, _, _ := p.chi2(p.toPhysical(u))
			return c
		}
		// Converged: no decrease of chi-square beyond 1e-10 of it (or 1e-9
		// absolute) for a few major iterations (two of Newton's, which
		// converges quadratically; 10 (n+1) of Nelder-Mead's).
		// Newton's method also stops once its own step would lower
		// chi-square by less than a millionth of its value per point (a
		// millionth of a standard deviation squared for weighted data): the
		// finite-difference noise then dominates, and line searches fail.
		npts := float64(f.req.Data.Len())
		d := &derivatives{f: f, p: p}
		settings := func(evals, iterations int) *optimize.Settings {
			return &optimize.Settings{
				FuncEvaluations: evals,
				Converger: &stepConverge{perPoint: 1e-6, npts: npts, d: d,
					fc: optimize.FunctionConverge{Absolute: 1e-9, Relative: 1e-10, Iterations: iterations}},
			}
		}
		// First Newton's method with the Gauss-Newton Hessian of the
		// profiled chi-square (fast where the model is smooth), then, if it
		// fails, Nelder-Mead from its best point (robust, derivative-free).
		prob := optimize.Problem{Func: fn, Grad: d.grad, Hess: d.hess}
		r, err := optimize.Minimize(prob, p.toInternal(theta), settings(f.maxEval/2, 2), &optimize.Newton{})
		if p.err != nil {
			return nil, nil, p.err
		}
		if r != nil && r.F <= best {
			theta, best = p.toPhysical(r.X), r.F
		}
		converged := err == nil && r != nil && r.Status == optimize.FunctionConvergence
		if !converged && p.evals < f.maxEval {
			r, err = optimize.Minimize(optimize.Problem{Func: fn}, p.toInternal(theta), settings(f.maxEval-p.evals, 10*(n+1)), &optimize.NelderMead{SimplexSize: 0.2})
			if p.err != nil {
				return nil, nil, p.err
			}
			if r != nil && r.F <= best {
				theta, best = p.toPhysical(r.X), r.F
			}
			converged = err == nil && r != nil && r.Status == optimize.FunctionConvergence
		}
		mr.Converged = converged
		// Gauss-Newton steps from the best point: a check of the optimum,
		// and the last digits where the model is smooth.
		for it := 0; it < 4 && p.evals < f.maxEval+4*(2*n+1); it++ {
			step, ok := f.gaussNewtonStep(p, theta)
			if p.err != nil {
				return nil, nil, p.err
			}
			if !ok {
				break
			}
			next := make([]float64, n)
			for i := range next {
				next[i] = theta[i] + step[i]
			}
			p.clamp(next)
			c, _, _ := p.chi2(next)
			if p.err != nil {
				return nil, nil, p.err
			}
			if !(c < best) {
				break
			}
			improved := best - c
			theta, best = next, c
			if improved <= 1e-10*math.Max(best, 1) {
				break
			}
		}
		if !mr.Converged {
			mr.Warnings = append(mr.Warnings, fmt.Sprintf("the optimizer stopped after %d evaluations without meeting its convergence test; the values are the best found", p.evals))
		}
	}
	chi2, o, links := p.chi2(theta)
	if p.err != nil {
		return nil, nil, p.err
	}
	d := f.req.Data
	mr.ChiSquare, mr.Observable, mr.Links = chi2, o, links
	for g, idx := range f.groups {
		for _, i := range idx {
			_ = g
			cv := links[g].Scale*o[i] + links[g].Offset
			if mr.Curve == nil {
				mr.Curve, mr.Residual = make([]float64, d.Len()), make([]float64, d.Len())
			}
			mr.Curve[i] = cv
			mr.Residual[i] = (d.Value[i] - cv) / f.sigma[i]
		}
	}
	f.uncertainties(p, theta, mr)
	mr.Evaluations = p.evals
	return mr, theta, nil
}

// quantity describes one column of the Jacobian: a parameter (param >= 0)
// or a link coefficient of group g (scale a or offset c).
type quantity struct {
	name, unit string
	param      int
	group      int
	scale      bool
}

// jacobian returns d(residual_i)/d(quantity) for the physical parameters
// (central differences, one-sided at a bound) and the link coefficients,
// with what each column is.
func (f *fitter) jacobian(p *problem, theta []float64, o []float64, links []Link) (*mat.Dense, []quantity) {
	d := f.req.Data
	n := len(theta)
	var cols [][]float64
	var qs []quantity
	for k := 0; k < n; k++ {
		h := 1e-5 * math.Max(math.Abs(theta[k]), p.scale[k]*0.1)
		up, dn := append([]float64(nil), theta...), append([]float64(nil), theta...)
		up[k] += h
		dn[k] -= h
		if p.hasHi[k] && up[k] > p.hi[k] {
			up[k] = theta[k]
		}
		if p.hasLo[k] && dn[k] < p.lo[k] {
			dn[k] = theta[k]
		}
		ou, err1 := p.eval(up)
		od, err2 := p.eval(dn)
		p.evals += 2
		if err1 != nil || err2 != nil {
			if p.err == nil {
				p.err = errors.Join(err1, err2)
			}
			return nil, nil
		}
		v := make([]float64, d.Len())
		for g, idx := range f.groups {
			for _, i := range idx {
				v[i] = -links[g].Scale * (ou[i] - od[i]) / (up[k] - dn[k]) / f.sigma[i]
			}
		}
		cols = append(cols, v)
		qs = append(qs, quantity{name: p.names[k], unit: p.units[k], param: k, group: -1})
	}
	for g, idx := range f.groups {
		label := ""
		if len(f.groups) > 1 {
			label = fmt.Sprintf(" (T = %g K)", f.gtemps[g])
		}
		if !links[g].Fixed {
			va := make([]float64, d.Len())
			for _, i := range idx {
				va[i] = -o[i] / f.sigma[i]
			}
			cols = append(cols, va)
			qs = append(qs, quantity{name: "a" + label, unit: d.ValueUnit + " per " + f.req.Observable.Unit(), param: -1, group: g, scale: true})
		}
		vc := make([]float64, d.Len())
		for _, i := range idx {
			vc[i] = -1 / f.sigma[i]
		}
		cols = append(cols, vc)
		qs = append(qs, quantity{name: "c" + label, unit: d.ValueUnit, param: -1, group: g})
	}
	J := mat.NewDense(d.Len(), len(cols), nil)
	for j, c := range cols {
		J.SetCol(j, c)
	}
	return J, qs
}

// stepConverge is FunctionConverge, and also success when the Newton step
// from the location, -H^-1 g, would lower F by less than tol = perPoint *
// max(F/npts, ...) (in units of chi-square).
type stepConverge struct {
	perPoint, npts float64
	fc             optimize.FunctionConverge
	// d holds the Hessian of the last gradient (gonum's Location carries
	// the gradient only).
	d *derivatives
}

func (c *stepConverge) Init(dim int) { c.fc.Init(dim) }

func (c *stepConverge) Converged(l *optimize.Location) optimize.Status {
	if l.Gradient != nil && c.d != nil && !c.d.fail && equalVec(c.d.at, l.X) {
		var chol mat.Cholesky
		if chol.Factorize(c.d.h) {
			g := mat.NewVecDense(len(l.Gradient), append([]float64(nil), l.Gradient...))
			var x mat.VecDense
			if err := chol.SolveVecTo(&x, g); err == nil {
				decrease := 0.5 * mat.Dot(g, &x)
				scale := math.Max(l.F/math.Max(c.npts, 1), 1e-300)
				if c.npts == 0 || decrease <= c.perPoint*scale {
					return optimize.FunctionConvergence
				}
			}
		}
	}
	return c.fc.Converged(l)
}

// derivatives gives gonum's Newton method the gradient 2 J_u^T r of the
// profiled chi-square in the optimizer's variables u and its Gauss-Newton
// Hessian 2 J_u^T (1 - P) J_u, where P projects onto the link columns
// (variable projection: the links are solved at every point, so the
// parameters' curvature is what remains after them). Grad and Hess at the
// same u share one Jacobian.
type derivatives struct {
	f    *fitter
	p    *problem
	at   []float64
	g    []float64
	h    *mat.SymDense
	fail bool
}

func (d *derivatives) compute(u []float64) {
	if d.at != nil && equalVec(d.at, u) {
		return
	}
	d.at = append(d.at[:0], u...)
	f, p := d.f, d.p
	n := len(u)
	d.g, d.h, d.fail = make([]float64, n), mat.NewSymDense(n, nil), true
	theta := p.toPhysical(u)
	_, o, links := p.chi2(theta)
	if p.err != nil || o == nil {
		return
	}
	J, qs := f.jacobian(p, theta, o, links)
	if J == nil {
		return
	}
	rows, _ := J.Dims()
	data := f.req.Data
	r := make([]float64, rows)
	for g, idx := range f.groups {
		for _, i := range idx {
			r[i] = (data.Value[i] - links[g].Scale*o[i] - links[g].Offset) / f.sigma[i]
		}
	}
	var pcols, lcols []int
	for j, q := range qs {
		if q.param >= 0 {
			pcols = append(pcols, j)
		} else {
			lcols = append(lcols, j)
		}
	}
	// d theta / d u of each parameter.
	chain := make([]float64, n)
	for i, x := range u {
		switch {
		case p.hasLo[i] && p.hasHi[i]:
			chain[i] = (p.hi[i] - p.lo[i]) * math.Cos(x) / 2
		case p.hasLo[i]:
			chain[i] = p.scale[i] * x / math.Sqrt(x*x+1)
		case p.hasHi[i]:
			chain[i] = -p.scale[i] * x / math.Sqrt(x*x+1)
		default:
			chain[i] = p.scale[i]
		}
	}
	Jp := mat.NewDense(rows, n, nil)
	for k, j := range pcols {
		for i := 0; i < rows; i++ {
			Jp.Set(i, k, J.At(i, j)*chain[qs[j].param])
		}
	}
	L := mat.NewDense(rows, len(lcols), nil)
	for k, j := range lcols {
		for i := 0; i < rows; i++ {
			L.Set(i, k, J.At(i, j))
		}
	}
	var X, proj mat.Dense
	if err := X.Solve(L, Jp); err == nil {
		proj.Mul(L, &X)
		Jp.Sub(Jp, &proj)
	}
	for a := 0; a < n; a++ {
		ga := 0.0
		for i := 0; i < rows; i++ {
			ga += 2 * Jp.At(i, a) * r[i]
		}
		d.g[a] = ga
		for b := a; b < n; b++ {
			h := 0.0
			for i := 0; i < rows; i++ {
				h += 2 * Jp.At(i, a) * Jp.At(i, b)
			}
			d.h.SetSym(a, b, h)
		}
	}
	d.fail = false
}

func (d *derivatives) grad(grad, u []float64) {
	d.compute(u)
	copy(grad, d.g)
}

func (d *derivatives) hess(hess *mat.SymDense, u []float64) {
	d.compute(u)
	hess.CopySym(d.h)
}

func equalVec(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// gaussNewtonStep returns the Gauss-Newton step of the physical parameters
// with the links profiled out (variable projection): the step of the full
// linearized problem, restricted to the parameters.
func (f *fitter) gaussNewtonStep(p *problem, theta []float64) ([]float64, bool) {
	_, o, links := p.chi2(theta)
	if p.err != nil {
		return nil, false
	}
	J, qs := f.jacobian(p, theta, o, links)
	if J == nil {
		return nil, false
	}
	d := f.req.Data
	r := make([]float64, d.Len())
	for g, idx := range f.groups {
		for _, i := range idx {
			r[i] = (d.Value[i] - links[g].Scale*o[i] - links[g].Offset) / f.sigma[i]
		}
	}
	// Minimize |r + J delta|: delta = -pinv(J) r.
	var svd mat.SVD
	if !svd.Factorize(J, mat.SVDThin) {
		return nil, false
	}
	var x mat.Dense
	rank := 0
	vals := svd.Values(nil)
	for _, s := range vals {
		if s > 1e-10*vals[0] {
			rank++
		}
	}
	if rank == 0 {
		return nil, false
	}
	svd.SolveTo(&x, mat.NewDense(len(r), 1, r), rank)
	step := make([]float64, len(theta))
	for j, q := range qs {
		if q.param >= 0 {
			step[q.param] = -x.At(j, 0)
		}
	}
	return step, true
}

// uncertainties fills the parameters, link errors, correlations,
// degrees of freedom and information criteria from the covariance at theta.
func (f *fitter) uncertainties(p *problem, theta []float64, mr *ModelResult) {
	d := f.req.Data
	o, links := mr.Observable, mr.Links
	J, qs := f.jacobian(p, theta, o, links)
	names := make([]string, len(qs))
	for j, q := range qs {
		names[j] = q.name
	}
	nq := len(theta)
	for _, l := range links {
		nq += 2
		if l.Fixed {
			nq--
		}
	}
	npts := d.Len()
	mr.DegreesOfFreedom = npts - nq
	mr.ReducedChiSquare = mr.ChiSquare / float64(mr.DegreesOfFreedom)
	fit := mr.ChiSquare
	if d.Sigma == nil {
		fit = float64(npts) * math.Log(math.Max(mr.ChiSquare, 1e-300)/float64(npts))
	}
	mr.AIC = fit + 2*float64(nq)
	mr.BIC = fit + float64(nq)*math.Log(float64(npts))
	for _, l := range links {
		if l.Fixed {
			what := "the points"
			if !math.IsNaN(l.Temperature) {
				what = fmt.Sprintf("the points at T = %g K", l.Temperature)
			}
			mr.Warnings = append(mr.Warnings, fmt.Sprintf("the observable is constant over %s: the scale a cannot be told from the offset c there and is set to 0", what))
		}
	}
	errs := make([]float64, len(names))
	var cov *mat.SymDense
	if J != nil {
		errs, cov = f.covariance(J, names, mr)
	}
	scale := 1.0
	if d.Sigma == nil && mr.DegreesOfFreedom > 0 {
		scale = math.Sqrt(mr.ChiSquare / float64(mr.DegreesOfFreedom))
	}
	for j, q := range qs {
		e := errs[j] * scale
		if q.group >= 0 {
			if q.scale {
				mr.Links[q.group].ScaleError = e
			} else {
				mr.Links[q.group].OffsetError = e
			}
			continue
		}
		k := q.param
		pv := ParameterValue{Name: p.names[k], Value: theta[k], Error: e, Unit: q.unit}
		width := p.scale[k]
		if p.hasLo[k] && p.hasHi[k] {
			width = p.hi[k] - p.lo[k]
		}
		if (p.hasLo[k] && theta[k]-p.lo[k] <= 1e-6*width) || (p.hasHi[k] && p.hi[k]-theta[k] <= 1e-6*width) {
			pv.AtBound = true
			mr.Warnings = append(mr.Warnings, fmt.Sprintf("parameter %s = %g %s is at its bound: the optimum may lie beyond it, and its error is not meaningful", pv.Name, pv.Value, pv.Unit))
		}
		mr.Parameters = append(mr.Parameters, pv)
	}
	if cov != nil {
		for a := 0; a < len(names); a++ {
			for b := a + 1; b < len(names); b++ {
				ea, eb := math.Sqrt(cov.At(a, a)), math.Sqrt(cov.At(b, b))
				if math.IsInf(errs[a], 0) || math.IsInf(errs[b], 0) || ea == 0 || eb == 0 {
					continue
				}
				mr.Correlations = append(mr.Correlations, Correlation{A: names[a], B: names[b], Value: cov.At(a, b) / (ea * eb)})
			}
		}
		var strong []string
		for _, c := range mr.Correlations {
			if math.Abs(c.Value) > 0.99 {
				strong = append(strong, fmt.Sprintf("%s and %s (%.4f)", c.A, c.B, c.Value))
			}
		}
		if len(strong) > 0 {
			mr.Warnings = append(mr.Warnings, "nearly degenerate: the data hardly tell apart "+strings.Join(strong, ", ")+"; their errors are large and correlated")
		}
	}
}

// covariance returns the standard error of every column of J (before any
// rescaling by the reduced chi-square) and the covariance (J^T J)^-1, computed
// by an SVD of the column-scaled Jacobian. Directions the data do not
// determine (relative singular value below 1e-8) give an infinite error to
// every quantity that takes part in them, and a warning.
func (f *fitter) covariance(J *mat.Dense, names []string, mr *ModelResult) ([]float64, *mat.SymDense) {
	r, c := J.Dims()
	norms := make([]float64, c)
	Js := mat.DenseCopyOf(J)
	for j := 0; j < c; j++ {
		col := mat.Col(nil, j, J)
		norms[j] = mat.Norm(mat.NewVecDense(r, col), 2)
		if norms[j] == 0 {
			norms[j] = 1
		}
		for i := range col {
			col[i] /= norms[j]
		}
		Js.SetCol(j, col)
	}
	errs := make([]float64, c)
	var svd mat.SVD
	if !svd.Factorize(Js, mat.SVDThin) {
		for j := range errs {
			errs[j] = math.Inf(1)
		}
		mr.Warnings = append(mr.Warnings, "the covariance could not be computed (SVD failed); errors are infinite")
		return errs, nil
	}
	s := svd.Values(nil)
	var v mat.Dense
	svd.VTo(&v)
	cov := mat.NewSymDense(c, nil)
	undetermined := map[int]bool{}
	var degenerate []string
	for k, sk := range s {
		if sk > 1e-8*s[0] {
			continue
		}
		var who []string
		type part struct {
			j int
			w float64
		}
		var parts []part
		for j := 0; j < c; j++ {
			if w := v.At(j, k); math.Abs(w) > 0.05 {
				undetermined[j] = true
				parts = append(parts, part{j, w})
			}
		}
		sort.Slice(parts, func(a, b int) bool { return math.Abs(parts[a].w) > math.Abs(parts[b].w) })
		for _, p := range parts {
			who = append(who, names[p.j])
		}
		degenerate = append(degenerate, strings.Join(who, ", "))
	}
	for a := 0; a < c; a++ {
		for b := a; b < c; b++ {
			sum := 0.0
			for k, sk := range s {
				if sk > 1e-8*s[0] {
					sum += v.At(a, k) * v.At(b, k) / (sk * sk)
				}
			}
			cov.SetSym(a, b, sum/(norms[a]*norms[b]))
		}
	}
	for j := range errs {
		if undetermined[j] {
			errs[j] = math.Inf(1)
		} else {
			errs[j] = math.Sqrt(cov.At(j, j))
		}
	}
	if len(degenerate) > 0 {
		mr.Warnings = append(mr.Warnings, "degenerate: the data do not determine "+strings.Join(degenerate, "; ")+" (only a combination of them, or nothing); their errors are infinite")
	}
	return errs, cov
}
