package figure

import (
	"fmt"
	"maps"
	"slices"
	"sort"

	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	frustumv1 "frustum/proto/frustum/v1"
)

// MagnetizationOptions choose what Magnetization draws besides the total
// moment. The zero value draws the total moment alone.
type MagnetizationOptions struct {
	// Groups adds the moment of each site group, dashed, in the colour of
	// its temperature.
	Groups bool
	// Polarization draws M/M_sat (and each group over its own saturation)
	// instead of M in mu_B.
	Polarization bool
}

// Magnetization draws the curves M(B) of res, one line per temperature.
func Magnetization(res *frustumv1.MagnetizationResult, opt MagnetizationOptions) (*Figure, error) {
	if res == nil {
		return nil, dataErrorf("magnetization result", "missing")
	}
	field := res.GetField()
	if len(field) == 0 {
		return nil, dataErrorf("field", "empty: the result has no field points")
	}
	if err := checkFinite("field", field); err != nil {
		return nil, err
	}
	curves := res.GetCurves()
	if len(curves) == 0 {
		return nil, dataErrorf("curves", "empty: the result has no temperatures")
	}
	sat := res.GetSaturation()
	if opt.Polarization && !(sat > 0) {
		return nil, dataErrorf("saturation", "is %v: M/M_sat needs a saturation moment > 0", sat)
	}
	var groups []string
	for i, c := range curves {
		path := fmt.Sprintf("curves[%d]", i)
		if err := checkLength(path+".magnetization", c.GetMagnetization(), len(field), "fields"); err != nil {
			return nil, err
		}
		if err := checkFinite(path+".magnetization", c.GetMagnetization()); err != nil {
			return nil, err
		}
		if !opt.Groups {
			continue
		}
		for _, g := range slices.Sorted(maps.Keys(c.GetGroups())) {
			gp := fmt.Sprintf("%s.groups[%q].values", path, g)
			v := c.GetGroups()[g].GetValues()
			if err := checkLength(gp, v, len(field), "fields"); err != nil {
				return nil, err
			}
			if err := checkFinite(gp, v); err != nil {
				return nil, err
			}
			if opt.Polarization && !(res.GetGroupSaturation()[g] > 0) {
				return nil, dataErrorf(fmt.Sprintf("groupSaturation[%q]", g), "is %v: the polarization of a group needs its saturation moment > 0", res.GetGroupSaturation()[g])
			}
			if !slices.Contains(groups, g) {
				groups = append(groups, g)
			}
		}
	}
	if opt.Groups && len(groups) == 0 {
		return nil, dataErrorf("curves[0].groups", "empty: the cluster has no site groups (the \"group\" tags of its sites)")
	}
	slices.Sort(groups)

	p := newPlot()
	p.X.Label.Text = "B (T)"
	p.Y.Label.Text = "M (" + muB + " per cluster)"
	if opt.Polarization {
		p.Y.Label.Text = "M/M_sat"
	}
	leg := newLegend()

	// Colours by temperature rank, low to high.
	order := make([]int, len(curves))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return curves[order[a]].GetTemperature() < curves[order[b]].GetTemperature() })
	for rank, i := range order {
		c := curves[i]
		col := gradient(rank, len(curves))
		m := c.GetMagnetization()
		if opt.Polarization {
			m = scaled(m, 1/sat)
		}
		ps, thumb, err := curve(xys(field, m), col, solid, lineWidth)
		if err != nil {
			return nil, err
		}
		p.Add(ps...)
		addEntry(&leg, "T = "+num(c.GetTemperature())+" K", thumb)
		for k, g := range groups {
			v := c.GetGroups()[g].GetValues()
			if v == nil {
				continue
			}
			if opt.Polarization {
				v = scaled(v, 1/res.GetGroupSaturation()[g])
			}
			ps, _, err := curve(xys(field, v), col, dashFor(k), 1)
			if err != nil {
				return nil, err
			}
			p.Add(ps...)
		}
	}
	for k, g := range groups {
		addEntry(&leg, "group "+g, lineThumb(grey, dashFor(k), 1))
	}
	// The saturation line, where the curves come near it (above half of
	// it); far above them it would only squash them.
	if level := sat; level > 0 {
		label := "saturation " + num(sat) + " " + muB
		if opt.Polarization {
			level, label = 1, "saturation"
		}
		if p.Y.Max >= 0.5*level {
			h := hline{y: level, style: draw.LineStyle{Color: grey, Width: vg.Points(0.8), Dashes: dotted}}
			p.Add(h)
			addEntry(&leg, label, h)
		}
	}

	padY(p)
	title := fmt.Sprintf("Magnetization of %q", res.GetClusterName())
	if pw := res.GetPowder(); pw != nil {
		rule := pw.GetRule()
		if rule == "" {
			rule = fmt.Sprintf("%d directions", pw.GetDirections())
		}
		title += "\npowder average (" + rule + ")"
	} else if d := res.GetDirection(); len(d) == 3 {
		title += "\nfield along " + vector(d)
	}
	if sat > 0 {
		title += ", saturation " + num(sat) + " " + muB
	}
	return &Figure{Title: title, Panels: []Panel{{Plot: p, Legend: &leg}}, Width: 16, Height: 10}, nil
}

func scaled(v []float64, f float64) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = x * f
	}
	return out
}
