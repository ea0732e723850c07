package main

import (
	"context"
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"google.golang.org/protobuf/proto"

	"frustum/compare"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

var fitTask = &task{
	name: "fit",
	synopsis: "--data FILE.csv [--model FILE ...] [--observable polarization[:GROUP]] [--vary 'NAME=PATH[,PATH...]:MIN:MAX' ...]\n" +
		"       [--link global|per-temperature] [--powder N | --direction x,y,z] [--scaling-g G] [--max-evaluations N]",
	about: `Sets cluster models against measured data y(B, T) and reports which explains
them best. Every model's observable O(B, T) is linked to the data by
y = a O + c, with a and c solved in closed form at every step (one pair for
all points, or one per temperature with --link per-temperature), and the
parameters named with --vary are fitted by nonlinear least squares. The free
spins S = 1/2 and S = 1 (Brillouin functions, their g fitted) are always
fitted beside the models as baselines.

The data file is CSV with a header naming its columns: T_K (K), B_T (T), y
(optionally with its unit, as y_percent) and optionally sigma, the standard
error of y. Lines starting with # are comments.

Observables: polarization (M/M_sat), polarization-squared, fluctuation
(k_B T chi, mu_B^2 per cluster), moment (mu_B); the first two and moment
take :GROUP for one site group.

--vary 'NAME=PATH[,PATH...][:MIN:MAX[:START]]' names a parameter and binds it
to field paths of the cluster file, such as bonds[6].exchange, sites[0].g,
bonds[2].dm[2], sites[1].gTensor[8], sites[3].singleIon (indices count from
0 in the file's order); several paths share one value; MIN or MAX may be left
empty (J=bonds[0].exchange::50). Every model with the paths is fitted with
the parameter; a model without them is fitted without it. The start value
is the model's own unless START is given.

The table lists chi-square, its reduced value, AIC and BIC (lower is better;
differences of AIC above about 10 are decisive), then each model's
parameters with their standard errors, link coefficients and warnings
(degenerate parameters, values on a bound, no convergence). --csv prints the
data with the scaling variable x = g mu_B B / (2 k_B T) (g = 2 unless
--scaling-g) and every model's curve and residual; --json the FitResult.`,
	example: `frustum fit --data testdata/demo-data.csv --model testdata/demo-multimer.json --observable polarization \
    --vary 'Jd=bonds[6].exchange,bonds[7].exchange,bonds[8].exchange,bonds[9].exchange,bonds[10].exchange,bonds[11].exchange:0:60'`,
	flags: func(fs *flagSet) func() (*frustumv1.JobSpec, error) {
		var (
			dataPath    string
			models      []string
			observable  string
			vary        []*frustumv1.FitParameter
			link        string
			powder      int
			direction   [3]float64
			hasDir      bool
			scalingG    float64
			hasScalingG bool
			maxEval     int
		)
		fs.stringFlag(&dataPath, "data", "the measured data, a CSV `FILE` with columns T_K, B_T, y[, sigma] (required)")
		fs.funcFlag("model", "a cluster `FILE` to fit (repeat for several models)", func(s string) error {
			models = append(models, s)
			return nil
		})
		fs.stringFlag(&observable, "observable", "the model `OBSERVABLE` linked to y: polarization[:GROUP] (the default), polarization-squared[:GROUP], fluctuation, moment[:GROUP]")
		fs.funcFlag("vary", "a fitted parameter `NAME=PATH[,PATH...][:MIN:MAX[:START]]` (repeat for several)", func(s string) error {
			p, err := parseVary(s)
			if err != nil {
				return err
			}
			vary = append(vary, p)
			return nil
		})
		fs.stringFlag(&link, "link", "`LINK` of y = a O + c: global (one a, c) or per-temperature")
		fs.funcFlag("powder", "powder average over at least `N` field directions", powderFlag(&powder))
		fs.funcFlag("direction", "field direction `x,y,z` of single-crystal data (default 0,0,1)", vectorFlag("direction", &direction, &hasDir, true))
		fs.funcFlag("scaling-g", "the `G` of the scaling variable x = g mu_B B/(2 k_B T) (default 2)", func(s string) error {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil || !(v > 0) || math.IsInf(v, 0) {
				return fmt.Errorf("%q: want a positive number", s)
			}
			scalingG, hasScalingG = v, true
			return nil
		})
		fs.funcFlag("max-evaluations", "at most `N` model evaluations per fit (default 400)", func(s string) error {
			n, err := strconv.Atoi(s)
			if err != nil || n < 1 {
				return fmt.Errorf("%q: want a whole number >= 1", s)
			}
			maxEval = n
			return nil
		})
		return func() (*frustumv1.JobSpec, error) {
			if dataPath == "" {
				return nil, usagef("--data FILE.csv is required")
			}
			if powder > 0 && hasDir {
				return nil, usagef("--powder averages over every direction: leave out --direction")
			}
			if observable == "" {
				observable = "polarization"
			}
			if _, err := compare.ParseObservable(observable); err != nil {
				return nil, usagef("--observable: %v", err)
			}
			if _, err := compare.ParseLink(link); err != nil {
				return nil, usagef("--link: %v", err)
			}
			d, err := compare.LoadCSV(dataPath)
			if err != nil {
				return nil, fmt.Errorf("--data: %w", err)
			}
			p := &frustumv1.FitParameters{Data: tasks.DataToProto(d), Observable: observable, Vary: vary, Link: link,
				Powder: int32(powder), MaxEvaluations: int32(maxEval)}
			if hasDir {
				p.Direction = direction[:]
			}
			if hasScalingG {
				p.ScalingG = proto.Float64(scalingG)
			}
			for _, path := range models {
				c, err := loadModel(path)
				if err != nil {
					return nil, err
				}
				p.Models = append(p.Models, c)
			}
			return &frustumv1.JobSpec{Task: &frustumv1.JobSpec_Fit{Fit: p}}, nil
		}
	},
	local: func(ctx context.Context, spec *frustumv1.JobSpec, opt ed.Options) (proto.Message, error) {
		res, err := tasks.Run(ctx, spec, opt)
		if err != nil {
			return nil, stripSpecPrefix(err)
		}
		return res, nil
	},
	table: func(w io.Writer, res proto.Message) error { return fitTable(w, res.(*frustumv1.FitResult)) },
	csv:   func(w io.Writer, res proto.Message) error { return fitCSV(w, res.(*frustumv1.FitResult)) },
}

// powderFlag parses --powder N.
func powderFlag(p *int) func(string) error {
	return func(s string) error {
		n, err := strconv.Atoi(s)
		if err != nil || n < 1 {
			return fmt.Errorf("%q: want a whole number of directions >= 1", s)
		}
		*p = n
		return nil
	}
}

// loadModel reads one --model file.
func loadModel(path string) (*frustumv1.Cluster, error) {
	m, err := loadCluster(path)
	if err != nil {
		return nil, fmt.Errorf("--model %s", strings.TrimPrefix(err.Error(), "--cluster: "))
	}
	return m, nil
}

// stripSpecPrefix makes the fit's field paths relative to the fit
// parameters, as the flags name them.
func stripSpecPrefix(err error) error {
	switch e := err.(type) {
	case *ed.RequestError:
		return &ed.RequestError{Field: strings.TrimPrefix(e.Field, "spec.fit."), Reason: e.Reason}
	case *tasks.ParameterError:
		return &tasks.ParameterError{Field: strings.TrimPrefix(e.Field, "spec.fit."), Reason: e.Reason}
	}
	return err
}

// parseVary reads NAME=PATH[,PATH...][:MIN:MAX[:START]].
func parseVary(s string) (*frustumv1.FitParameter, error) {
	name, rest, ok := strings.Cut(s, "=")
	name = strings.TrimSpace(name)
	if !ok || name == "" {
		return nil, fmt.Errorf("%q: want NAME=PATH[,PATH...][:MIN:MAX[:START]]", s)
	}
	parts := strings.Split(rest, ":")
	if len(parts) > 4 || len(parts) == 2 {
		return nil, fmt.Errorf("%q: after the paths give MIN:MAX, or MIN:MAX:START (either bound may be empty)", s)
	}
	p := &frustumv1.FitParameter{Name: name}
	for _, path := range strings.Split(parts[0], ",") {
		if path = strings.TrimSpace(path); path == "" {
			return nil, fmt.Errorf("%q: an empty path", s)
		}
		p.Paths = append(p.Paths, path)
	}
	num := func(what, t string) (*float64, error) {
		if strings.TrimSpace(t) == "" {
			return nil, nil
		}
		v, err := strconv.ParseFloat(strings.TrimSpace(t), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("%q: %s %q is not a finite number", s, what, t)
		}
		return &v, nil
	}
	var err error
	if len(parts) >= 3 {
		if p.Min, err = num("MIN", parts[1]); err != nil {
			return nil, err
		}
		if p.Max, err = num("MAX", parts[2]); err != nil {
			return nil, err
		}
	}
	if len(parts) == 4 {
		if p.Start, err = num("START", parts[3]); err != nil {
			return nil, err
		}
		if p.Start == nil {
			return nil, fmt.Errorf("%q: START is empty", s)
		}
	}
	return p, nil
}

// fitTable prints the model table, then each model's parameters.
func fitTable(w io.Writer, r *frustumv1.FitResult) error {
	fmt.Fprintf(w, "Data: %s, %d points at %d temperatures; observable %s, %s link.\n\n",
		r.GetDataName(), len(r.GetValue()), len(distinctValues(r.GetTemperature())), r.GetObservable(), r.GetLink())
	bestAIC := math.Inf(1)
	for _, m := range r.GetModels() {
		bestAIC = math.Min(bestAIC, m.GetAic())
	}
	t := &table{header: []string{"model", "chi2", "dof", "chi2/dof", "AIC", "BIC", "dAIC"}, leftFirst: true}
	for _, m := range r.GetModels() {
		t.add(m.GetName(), sig(m.GetChiSquare(), 6), strconv.Itoa(int(m.GetDegreesOfFreedom())), sig(m.GetReducedChiSquare(), 4),
			sig(m.GetAic(), 6), sig(m.GetBic(), 6), fixed(m.GetAic()-bestAIC, 1))
	}
	if err := t.write(w); err != nil {
		return err
	}
	fmt.Fprintf(w, "\nBest (lowest AIC): %s\n", r.GetBest())
	for _, m := range r.GetModels() {
		fmt.Fprintf(w, "\n%s:\n", m.GetName())
		for _, p := range m.GetParameters() {
			bound := ""
			if p.GetAtBound() {
				bound = "  (at its bound)"
			}
			fmt.Fprintf(w, "  %s = %s%s\n", p.GetName(), valueWithError(p.GetValue(), p.GetError(), p.GetUnit()), bound)
		}
		for _, l := range m.GetLinks() {
			at := ""
			if l.Temperature != nil {
				at = fmt.Sprintf(" at T = %s K", num(l.GetTemperature()))
			}
			fmt.Fprintf(w, "  link%s: a = %s, c = %s\n", at, valueWithError(l.GetScale(), l.GetScaleError(), ""), valueWithError(l.GetOffset(), l.GetOffsetError(), r.GetValueUnit()))
		}
		for _, c := range m.GetCorrelations() {
			if math.Abs(c.GetValue()) >= 0.9 {
				fmt.Fprintf(w, "  correlation %s / %s: %.3f\n", c.GetA(), c.GetB(), c.GetValue())
			}
		}
		if pw := m.GetPowder(); pw != nil {
			fmt.Fprintf(w, "  powder: %s (%d directions, %d computed), deviation from %s: %.2g of saturation\n",
				pw.GetRule(), pw.GetDirections(), pw.GetEvaluated(), pw.GetCoarseRule(), pw.GetRelativeDeviation())
		}
		for _, warn := range m.GetWarnings() {
			fmt.Fprintf(w, "  warning: %s\n", oneLine(warn))
		}
	}
	for _, warn := range r.GetWarnings() {
		fmt.Fprintf(w, "\nwarning: %s\n", oneLine(warn))
	}
	return nil
}

// valueWithError prints v +- e with a sensible number of digits.
func valueWithError(v, e float64, unit string) string {
	u := ""
	if unit != "" && unit != "1" {
		u = " " + unit
	}
	switch {
	case math.IsInf(e, 0) || math.IsNaN(e):
		return fmt.Sprintf("%s +- (undetermined)%s", sig(v, 6), u)
	case e == 0:
		return fmt.Sprintf("%s%s", sig(v, 6), u)
	}
	// Two significant digits of the error, the value to the same place.
	d := max(0, 1-int(math.Floor(math.Log10(e))))
	return fmt.Sprintf("%.*f +- %.*f%s", d, v, d, e, u)
}

func distinctValues(v []float64) map[float64]bool {
	out := map[float64]bool{}
	for _, x := range v {
		out[x] = true
	}
	return out
}

// fitCSV prints the data, the scaling variable, and every model's curve and
// residual, one row per point.
func fitCSV(w io.Writer, r *frustumv1.FitResult) error {
	cw := csv.NewWriter(w)
	unit := r.GetValueUnit()
	header := []string{"T_K", "B_T", "y_" + unit, "sigma_" + unit, "x"}
	for _, m := range r.GetModels() {
		header = append(header, m.GetName()+" y_"+unit, m.GetName()+" residual")
	}
	if err := cw.Write(header); err != nil {
		return err
	}
	for i := range r.GetValue() {
		row := []string{num(r.GetTemperature()[i]), num(r.GetField()[i]), num(r.GetValue()[i]), num(at(r.GetSigma(), i)), num(at(r.GetScaling(), i))}
		for _, m := range r.GetModels() {
			row = append(row, num(at(m.GetCurve(), i)), num(at(m.GetResidual(), i)))
		}
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
