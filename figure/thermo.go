package figure

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	frustumv1 "frustum/proto/frustum/v1"
)

// Thermo draws the thermodynamics of res in four stacked panels that share
// the temperature axis: E (K), C (k_B), S (k_B) and chi (mu_B/T), all per
// cluster. The temperature axis is logarithmic when the temperatures span
// more than a decade. The entropy panel carries its high-temperature limit
// ln(dim) when the engine report gives the dimension of the Hilbert space.
func Thermo(res *frustumv1.ThermoResult) (*Figure, error) {
	if res == nil {
		return nil, dataErrorf("thermo result", "missing")
	}
	temps := res.GetTemperature()
	if len(temps) == 0 {
		return nil, dataErrorf("temperature", "empty: the result has no temperatures")
	}
	if err := checkFinite("temperature", temps); err != nil {
		return nil, err
	}
	for i, T := range temps {
		if T <= 0 {
			return nil, dataErrorf(fmt.Sprintf("temperature[%d]", i), "is %v K; temperatures must be > 0", T)
		}
	}
	type quantity struct {
		field, label string
		values       []float64
	}
	chiLabel := "χ (" + muB + "/T)"
	qs := []quantity{
		{"energy", "E (K)", res.GetEnergy()},
		{"specificHeat", "C (k_B)", res.GetSpecificHeat()},
		{"entropy", "S (k_B)", res.GetEntropy()},
		{"susceptibility", chiLabel, res.GetSusceptibility()},
	}
	for _, q := range qs {
		if err := checkLength(q.field, q.values, len(temps), "temperatures"); err != nil {
			return nil, err
		}
		if err := checkFinite(q.field, q.values); err != nil {
			return nil, err
		}
	}
	lo, hi := slices.Min(temps), slices.Max(temps)
	logT := hi > 10*lo

	var panels []Panel
	var plots []*plot.Plot
	for _, q := range qs {
		p := newPlot()
		p.Y.Label.Text = q.label
		p.X.Label.Text = "T (K)"
		if logT {
			useLogX(p)
		}
		ps, _, err := curve(xys(temps, q.values), gradientStops[0], solid, lineWidth)
		if err != nil {
			return nil, err
		}
		p.Add(ps...)
		if q.field == "entropy" {
			if dim := res.GetEngine().GetDimension(); dim > 0 {
				limit := math.Log(float64(dim))
				h := hline{y: limit, style: draw.LineStyle{Color: grey, Width: vg.Points(0.8), Dashes: dotted}}
				p.Add(h)
				p.Legend.Add(fmt.Sprintf("ln %d = %s (T → ∞)", dim, num(limit)), h)
				p.Legend.Top, p.Legend.Left = false, false
				p.Legend.YOffs = vg.Millimeter
				p.Legend.XOffs = -vg.Millimeter
			}
		}
		padY(p)
		plots = append(plots, p)
		panels = append(panels, Panel{Plot: p})
	}
	shareX(plots...)

	title := fmt.Sprintf("Thermodynamics of %q per cluster", res.GetClusterName())
	field := res.GetField()
	if len(field) == 3 && (field[0] != 0 || field[1] != 0 || field[2] != 0) {
		title += "\nB = " + vector(field) + " T"
		if d := res.GetSusceptibilityDirection(); len(d) == 3 {
			title += ", χ = dM/dB along " + vector(d)
		}
	} else if d := res.GetSusceptibilityDirection(); len(d) == 3 {
		title += "\nzero field, χ along " + vector(d)
	}
	return &Figure{Title: title, Panels: panels, Width: 16, Height: 22}, nil
}
