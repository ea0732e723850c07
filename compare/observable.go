package compare

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"

	"frustum/cluster"
	"frustum/ed"
)

// Kind is the quantity a model offers to be linked to the data.
type Kind int

// The observables, all evaluated at the data's (B, T) points.
const (
	// Polarization is M/M_sat, of the cluster or of one site group
	// (dimensionless, between -1 and 1).
	Polarization Kind = iota + 1
	// PolarizationSquared is (M/M_sat)^2.
	PolarizationSquared
	// Fluctuation is k_B T chi, chi = dM/dB the isothermal susceptibility
	// along the field with its Van Vleck part, in mu_B^2 per cluster; where M
	// commutes with H it equals <M^2> - <M>^2.
	Fluctuation
	// Moment is M, of the cluster or of one site group, in mu_B.
	Moment
)

var kindNames = map[Kind]string{
	Polarization:        "polarization",
	PolarizationSquared: "polarization-squared",
	Fluctuation:         "fluctuation",
	Moment:              "moment",
}

// Observable is a Kind, optionally restricted to the sites of one group.
type Observable struct {
	Kind  Kind
	Group string // "" for the whole cluster
}

// ParseObservable reads "polarization", "polarization:GROUP",
// "polarization-squared[:GROUP]", "fluctuation", "moment[:GROUP]".
func ParseObservable(s string) (Observable, error) {
	name, group, hasGroup := strings.Cut(strings.TrimSpace(s), ":")
	var o Observable
	for k, n := range kindNames {
		if n == name {
			o.Kind = k
		}
	}
	if o.Kind == 0 {
		return o, fmt.Errorf("unknown observable %q (polarization[:GROUP], polarization-squared[:GROUP], fluctuation, moment[:GROUP])", s)
	}
	if hasGroup {
		if group == "" {
			return o, fmt.Errorf("observable %q: the group after ':' is empty", s)
		}
		if o.Kind == Fluctuation {
			return o, fmt.Errorf("observable %q: the fluctuation is of the whole cluster only", s)
		}
		o.Group = group
	}
	return o, nil
}

// String returns the form ParseObservable reads.
func (o Observable) String() string {
	if o.Group != "" {
		return kindNames[o.Kind] + ":" + o.Group
	}
	return kindNames[o.Kind]
}

// Unit returns the unit of the observable's values.
func (o Observable) Unit() string {
	switch o.Kind {
	case Fluctuation:
		return "mu_B^2"
	case Moment:
		return "mu_B"
	}
	return "1"
}

// fieldGeometry is how the field meets the sample: one direction, or a
// powder average.
type fieldGeometry struct {
	Direction [3]float64
	Powder    int
}

// grid is the set of distinct temperatures and fields of the data, and the
// position of each point in it.
type grid struct {
	temps, fields []float64
	ti, bi        []int
}

func newGrid(d *Data) grid {
	g := grid{temps: distinct(d.Temperature), fields: distinct(d.Field)}
	for i := range d.Temperature {
		t, _ := slices.BinarySearch(g.temps, d.Temperature[i])
		b, _ := slices.BinarySearch(g.fields, d.Field[i])
		g.ti, g.bi = append(g.ti, t), append(g.bi, b)
	}
	return g
}

func distinct(v []float64) []float64 {
	out := slices.Clone(v)
	slices.Sort(out)
	return slices.Compact(out)
}

// evaluation is a model's observable at every data point and what the
// engine reported on the way.
type evaluation struct {
	values []float64
	report ed.Report
	powder *ed.PowderReport
}

// clusterObservable evaluates o for model m at every point of the grid: one
// engine call covers every temperature and field (the engine's cost is per
// field for clusters without a shortcut, and every field then serves every
// temperature).
func clusterObservable(ctx context.Context, m *cluster.Model, o Observable, geo fieldGeometry, g grid, opt ed.Options) (evaluation, error) {
	if o.Group != "" {
		found := false
		for _, s := range m.Sites {
			found = found || s.Group == o.Group
		}
		if !found {
			return evaluation{}, &ed.RequestError{Field: "observable", Reason: fmt.Sprintf("cluster %q has no site in group %q", m.Name, o.Group)}
		}
	}
	req := ed.MagnetizationRequest{Temperatures: g.temps, Fields: g.fields, Direction: geo.Direction, Powder: geo.Powder,
		Susceptibility: o.Kind == Fluctuation}
	res, err := ed.Magnetization(ctx, m, req, opt)
	if err != nil {
		return evaluation{}, err
	}
	sat := res.Saturation
	if o.Group != "" {
		sat = res.GroupSaturation[o.Group]
	}
	if (o.Kind == Polarization || o.Kind == PolarizationSquared) && sat == 0 {
		return evaluation{}, &ed.RequestError{Field: "observable", Reason: fmt.Sprintf("cluster %q: the saturation moment of %s is 0, so its polarization is undefined", m.Name, o)}
	}
	ev := evaluation{values: make([]float64, len(g.ti)), report: res.Report, powder: res.Powder}
	for i := range g.ti {
		c := res.Curves[g.ti[i]]
		b := g.bi[i]
		var v float64
		switch {
		case o.Kind == Fluctuation:
			v = c.Temperature * c.Susceptibility[b] / ed.MuBOverKB
		case o.Group != "":
			v = c.Groups[o.Group][b]
		default:
			v = c.Magnetization[b]
		}
		switch o.Kind {
		case Polarization:
			v /= sat
		case PolarizationSquared:
			v = (v / sat) * (v / sat)
		}
		ev.values[i] = v
	}
	return ev, nil
}

// freeSpinObservable evaluates o for a free spin (the baselines); a group
// observable takes the whole spin.
func freeSpinObservable(f FreeSpin, o Observable, d *Data) []float64 {
	out := make([]float64, d.Len())
	for i := range out {
		B, T := d.Field[i], d.Temperature[i]
		switch o.Kind {
		case Polarization:
			out[i] = f.Polarization(B, T)
		case PolarizationSquared:
			p := f.Polarization(B, T)
			out[i] = p * p
		case Fluctuation:
			out[i] = f.Fluctuation(B, T)
		case Moment:
			out[i] = f.Moment(B, T)
		}
		if math.IsNaN(out[i]) {
			out[i] = 0
		}
	}
	return out
}
