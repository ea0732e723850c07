package compare

import (
	"fmt"
	"math"
)

// LinkKind says how many (a, c) pairs link the observable to the data.
type LinkKind int

const (
	// GlobalLink: y = a O(B, T) + c with one a and one c for every point.
	GlobalLink LinkKind = iota
	// PerTemperatureLink: one a and one c for the points of each temperature.
	PerTemperatureLink
)

// ParseLink reads "global" (or "") and "per-temperature".
func ParseLink(s string) (LinkKind, error) {
	switch s {
	case "", "global":
		return GlobalLink, nil
	case "per-temperature":
		return PerTemperatureLink, nil
	}
	return 0, fmt.Errorf("unknown link %q (global or per-temperature)", s)
}

func (k LinkKind) String() string {
	if k == PerTemperatureLink {
		return "per-temperature"
	}
	return "global"
}

// linkGroups returns, for each group of points sharing one (a, c), the
// indices of its points, and the group's temperature (NaN for a global link).
func linkGroups(k LinkKind, d *Data) (groups [][]int, temps []float64) {
	if k == GlobalLink {
		all := make([]int, d.Len())
		for i := range all {
			all[i] = i
		}
		return [][]int{all}, []float64{math.NaN()}
	}
	ts := d.Temperatures()
	groups = make([][]int, len(ts))
	for i, T := range d.Temperature {
		for g, t := range ts {
			if t == T {
				groups[g] = append(groups[g], i)
			}
		}
	}
	return groups, ts
}

// Link is a and c of y = a O + c for one group of points.
type Link struct {
	Temperature float64 // K; NaN for a global link
	Scale       float64 // a, in the data's unit per unit of the observable
	Offset      float64 // c, in the data's unit
	// ScaleError and OffsetError are standard errors from the whole fit's
	// covariance (Fit fills them).
	ScaleError, OffsetError float64
	// Fixed: the observable is constant over the group's points, so a cannot
	// be told from c; a is set to 0 and c alone is fitted.
	Fixed bool
}

// solveLink returns the weighted least-squares a, c of y = a o + c over the
// points idx, with weights w = 1/sigma^2, and the chi-square contribution.
// The normal equations are solved about the weighted means, which keeps them
// well conditioned:
//
//	a = sum w (o - <o>)(y - <y>) / sum w (o - <o>)^2,   c = <y> - a <o>.
func solveLink(o, y, w []float64, idx []int) (l Link, chi2 float64) {
	var sw, so, sy float64
	for _, i := range idx {
		sw += w[i]
		so += w[i] * o[i]
		sy += w[i] * y[i]
	}
	mo, my := so/sw, sy/sw
	var soo, soy, syy float64
	for _, i := range idx {
		do, dy := o[i]-mo, y[i]-my
		soo += w[i] * do * do
		soy += w[i] * do * dy
		syy += w[i] * dy * dy
	}
	// The observable is constant to rounding (relative to its size) when its
	// spread is far below its magnitude: then a is not determined.
	scale := 0.0
	for _, i := range idx {
		scale = math.Max(scale, math.Abs(o[i]))
	}
	if len(idx) < 2 || soo <= sw*math.Pow(1e-12*math.Max(scale, 1e-300), 2) {
		l = Link{Scale: 0, Offset: my, Fixed: true}
		return l, syy
	}
	a := soy / soo
	l = Link{Scale: a, Offset: my - a*mo}
	chi2 = syy - a*soy
	if chi2 < 0 {
		chi2 = 0
	}
	// Recompute directly, so that rounding in the difference above never
	// hides a misfit.
	direct := 0.0
	for _, i := range idx {
		r := y[i] - l.Scale*o[i] - l.Offset
		direct += w[i] * r * r
	}
	return l, direct
}
