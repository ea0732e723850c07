package figure

import (
	"fmt"
	"image/color"
	"math"
	"slices"
	"sort"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	frustumv1 "frustum/proto/frustum/v1"
)

// checkData checks the parallel arrays of the data in a fit result and
// returns the number of points.
func checkData(res *frustumv1.FitResult) (int, error) {
	if res == nil {
		return 0, dataErrorf("fit result", "missing")
	}
	n := len(res.GetValue())
	if n == 0 {
		return 0, dataErrorf("value", "empty: the result has no data points")
	}
	for _, f := range []struct {
		name string
		v    []float64
	}{{"temperature", res.GetTemperature()}, {"field", res.GetField()}, {"value", res.GetValue()}} {
		if err := checkLength(f.name, f.v, n, "data points"); err != nil {
			return 0, err
		}
		if err := checkFinite(f.name, f.v); err != nil {
			return 0, err
		}
	}
	if s := res.GetSigma(); len(s) > 0 {
		if err := checkLength("sigma", s, n, "data points"); err != nil {
			return 0, err
		}
		for i, x := range s {
			if !(x > 0) || math.IsInf(x, 0) {
				return 0, dataErrorf(fmt.Sprintf("sigma[%d]", i), "is %v; a standard error must be a finite number > 0", x)
			}
		}
	}
	return n, nil
}

// temperatureGroups splits the points into groups of one temperature each
// (temperatures within 0.5% of the group's lowest count as one), the groups
// ordered by temperature, and returns each group's mean temperature.
func temperatureGroups(temps []float64) (groups [][]int, means []float64) {
	idx := make([]int, len(temps))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return temps[idx[a]] < temps[idx[b]] })
	for _, i := range idx {
		k := len(groups) - 1
		if k < 0 || temps[i] > temps[groups[k][0]]*(1+0.005)+1e-12 {
			groups = append(groups, nil)
			k++
		}
		groups[k] = append(groups[k], i)
	}
	for _, g := range groups {
		s := 0.0
		for _, i := range g {
			s += temps[i]
		}
		means = append(means, s/float64(len(g)))
	}
	return groups, means
}

// sortedBy returns the indices of g ordered by key.
func sortedBy(g []int, key []float64) []int {
	out := slices.Clone(g)
	sort.SliceStable(out, func(a, b int) bool { return key[out[a]] < key[out[b]] })
	return out
}

// pick returns the points (x[i], y[i]) for i in idx.
func pick(idx []int, x, y []float64) plotter.XYs {
	pts := make(plotter.XYs, len(idx))
	for j, i := range idx {
		pts[j] = plotter.XY{X: x[i], Y: y[i]}
	}
	return pts
}

// errorPoints are data points with symmetric error bars.
type errorPoints struct {
	plotter.XYs
	plotter.YErrors
}

// dataPoints returns the markers of the points idx in colour c, with
// error bars where sigma is given.
func dataPoints(idx []int, x, y, sigma []float64, c color.Color) ([]plot.Plotter, draw.GlyphStyle, error) {
	pts := pick(idx, x, y)
	glyph := draw.GlyphStyle{Color: c, Radius: vg.Points(2.2), Shape: draw.CircleGlyph{}}
	var out []plot.Plotter
	if len(sigma) > 0 {
		e := errorPoints{XYs: pts, YErrors: make(plotter.YErrors, len(idx))}
		for j, i := range idx {
			e.YErrors[j].Low, e.YErrors[j].High = sigma[i], sigma[i]
		}
		bars, err := plotter.NewYErrorBars(e)
		if err != nil {
			return nil, glyph, err
		}
		bars.LineStyle = draw.LineStyle{Color: c, Width: vg.Points(0.7)}
		bars.CapWidth = vg.Points(3)
		out = append(out, bars)
	}
	sc, err := plotter.NewScatter(pts)
	if err != nil {
		return nil, glyph, err
	}
	sc.GlyphStyle = glyph
	return append(out, sc), glyph, nil
}

// valueLabel is the label of the data axis.
func valueLabel(res *frustumv1.FitResult) string {
	if u := res.GetValueUnit(); u != "" && u != "1" {
		return "y (" + u + ")"
	}
	return "y"
}

// residualShapes tell the models apart in the residual panel.
var residualShapes = []draw.GlyphDrawer{draw.CircleGlyph{}, draw.RingGlyph{}, draw.SquareGlyph{}, draw.TriangleGlyph{}, draw.CrossGlyph{}, draw.PlusGlyph{}, draw.BoxGlyph{}, draw.PyramidGlyph{}}

// Fit draws a fit result: the data with their error bars against B, one
// colour per temperature, every model's curve at the data points (solid for
// the best model, dashed for the others, dotted for the baselines), and
// below them the residuals (y - model)/sigma of every model, one marker
// shape per model.
func Fit(res *frustumv1.FitResult) (*Figure, error) {
	n, err := checkData(res)
	if err != nil {
		return nil, err
	}
	models := res.GetModels()
	if len(models) == 0 {
		return nil, dataErrorf("models", "empty: the result has no model")
	}
	sigma := res.GetSigma()
	residuals := make([][]float64, len(models))
	for k, m := range models {
		path := fmt.Sprintf("models[%d]", k)
		if err := checkLength(path+".curve", m.GetCurve(), n, "data points"); err != nil {
			return nil, err
		}
		if err := checkFinite(path+".curve", m.GetCurve()); err != nil {
			return nil, err
		}
		r := m.GetResidual()
		if len(r) == 0 {
			r = make([]float64, n)
			for i := range r {
				r[i] = res.GetValue()[i] - m.GetCurve()[i]
				if len(sigma) > 0 {
					r[i] /= sigma[i]
				}
			}
		} else if err := checkLength(path+".residual", r, n, "data points"); err != nil {
			return nil, err
		} else if err := checkFinite(path+".residual", r); err != nil {
			return nil, err
		}
		residuals[k] = r
	}
	best := bestModel(res)

	field, value := res.GetField(), res.GetValue()
	groups, temps := temperatureGroups(res.GetTemperature())

	top := newPlot()
	top.Y.Label.Text = valueLabel(res)
	top.X.Label.Text = "B (T)"
	leg := newLegend()
	bottom := newPlot()
	bottom.X.Label.Text = "B (T)"
	bottom.Y.Label.Text = "(y − model)/σ"
	if len(sigma) == 0 {
		bottom.Y.Label.Text = "y − model"
	}
	bottom.Add(hline{y: 0, style: draw.LineStyle{Color: grey, Width: vg.Points(0.8)}})

	styles := modelStyles(models, best)
	for k, m := range models {
		for gi, g := range groups {
			idx := sortedBy(g, field)
			col := gradient(gi, len(groups))
			ps, _, err := curve(pick(idx, field, m.GetCurve()), col, styles[k], modelWidth(k, best))
			if err != nil {
				return nil, err
			}
			top.Add(ps...)
			sc, err := plotter.NewScatter(pick(idx, field, residuals[k]))
			if err != nil {
				return nil, err
			}
			sc.GlyphStyle = draw.GlyphStyle{Color: col, Radius: vg.Points(2), Shape: residualShapes[k%len(residualShapes)]}
			bottom.Add(sc)
		}
	}
	for gi, g := range groups {
		ps, glyph, err := dataPoints(g, field, value, sigma, gradient(gi, len(groups)))
		if err != nil {
			return nil, err
		}
		top.Add(ps...)
		addEntry(&leg, "T = "+num(temps[gi])+" K", glyphThumb(glyph))
	}
	for k, m := range models {
		label := m.GetName()
		if k == best {
			label += " (best)"
		}
		label = joinOrBreak(&leg, label, "χ²/ν = "+num(m.GetReducedChiSquare()))
		marker := glyphThumb(draw.GlyphStyle{Color: black, Radius: vg.Points(2), Shape: residualShapes[k%len(residualShapes)]})
		addEntry(&leg, label, lineThumb(black, styles[k], modelWidth(k, best)), marker)
	}
	padY(top)
	zeroX(top)
	shareX(top, bottom)

	name := res.GetDataName()
	if name == "" {
		name = "the data"
	} else {
		name = fmt.Sprintf("%q", name)
	}
	link := res.GetLink()
	if link == "" {
		link = "global"
	}
	title := fmt.Sprintf("Fit of %s: y = a O + c, O = %s, %s link", name, res.GetObservable(), link)
	return &Figure{
		Title:  title,
		Panels: []Panel{{Plot: top, Weight: 3, Legend: &leg}, {Plot: bottom, Weight: 1.3}},
		Width:  18, Height: 16,
	}, nil
}

// bestModel is the index of the model named res.best, else that of the
// lowest AIC among the models that are not baselines (-1 without one).
func bestModel(res *frustumv1.FitResult) int {
	for k, m := range res.GetModels() {
		if res.GetBest() != "" && m.GetName() == res.GetBest() {
			return k
		}
	}
	best := -1
	for k, m := range res.GetModels() {
		if m.GetBaseline() {
			continue
		}
		if best < 0 || m.GetAic() < res.GetModels()[best].GetAic() {
			best = k
		}
	}
	return best
}

// modelStyles: solid for the best, dotted for baselines, dashes otherwise.
func modelStyles(models []*frustumv1.ModelFit, best int) [][]vg.Length {
	out := make([][]vg.Length, len(models))
	other, baselines := 0, 0
	for k, m := range models {
		switch {
		case k == best:
			out[k] = solid
		case m.GetBaseline():
			out[k] = baselineDash(baselines)
			baselines++
		default:
			out[k] = dashFor(other)
			other++
		}
	}
	return out
}

func modelWidth(k, best int) float64 {
	if k == best {
		return lineWidth
	}
	return 1.1
}

// Collapse draws the data of a fit result against the scaling variable
// x = g mu_B B / (2 k_B T) (res.scaling; computed from the fields and
// temperatures with res.scalingG, else g = 2, when absent), one colour per
// temperature. Free spins have y depending on x alone, so all temperatures
// fall on one curve; the baselines of the result are drawn dotted for
// comparison.
func Collapse(res *frustumv1.FitResult) (*Figure, error) {
	n, err := checkData(res)
	if err != nil {
		return nil, err
	}
	g := res.GetScalingG()
	if g == 0 {
		g = 2
	}
	x := res.GetScaling()
	if len(x) == 0 {
		x = make([]float64, n)
		for i := range x {
			T := res.GetTemperature()[i]
			if !(T > 0) {
				return nil, dataErrorf(fmt.Sprintf("temperature[%d]", i), "is %v K; the scaling variable needs T > 0", T)
			}
			x[i] = g * muBOverKB * res.GetField()[i] / (2 * T)
		}
	} else if err := checkLength("scaling", x, n, "data points"); err != nil {
		return nil, err
	} else if err := checkFinite("scaling", x); err != nil {
		return nil, err
	}
	value, sigma := res.GetValue(), res.GetSigma()
	groups, temps := temperatureGroups(res.GetTemperature())

	p := newPlot()
	p.X.Label.Text = "x = g " + muB + " B / (2 k_B T), g = " + num(g)
	p.Y.Label.Text = valueLabel(res)
	leg := newLegend()
	for gi, grp := range groups {
		col := gradient(gi, len(groups))
		idx := sortedBy(grp, x)
		l, err := plotter.NewLine(pick(idx, x, value))
		if err != nil {
			return nil, err
		}
		l.LineStyle = draw.LineStyle{Color: col, Width: vg.Points(0.6)}
		p.Add(l)
		ps, glyph, err := dataPoints(grp, x, value, sigma, col)
		if err != nil {
			return nil, err
		}
		p.Add(ps...)
		addEntry(&leg, "T = "+num(temps[gi])+" K", glyphThumb(glyph))
	}
	perTemperature := res.GetLink() == "per-temperature"
	baselines := 0
	for k, m := range res.GetModels() {
		if !m.GetBaseline() {
			continue
		}
		path := fmt.Sprintf("models[%d].curve", k)
		if err := checkLength(path, m.GetCurve(), n, "data points"); err != nil {
			return nil, err
		}
		if err := checkFinite(path, m.GetCurve()); err != nil {
			return nil, err
		}
		sets := [][]int{sortedBy(allPoints(n), x)}
		if perTemperature {
			sets = nil
			for _, grp := range groups {
				sets = append(sets, sortedBy(grp, x))
			}
		}
		dash := baselineDash(baselines)
		baselines++
		for _, idx := range sets {
			l, err := plotter.NewLine(pick(idx, x, m.GetCurve()))
			if err != nil {
				return nil, err
			}
			l.LineStyle = draw.LineStyle{Color: black, Width: vg.Points(1), Dashes: dash}
			p.Add(l)
		}
		addEntry(&leg, joinOrBreak(&leg, m.GetName(), "χ²/ν = "+num(m.GetReducedChiSquare())), lineThumb(black, dash, 1))
	}

	padY(p)
	zeroX(p)
	name := res.GetDataName()
	title := "Scaling collapse"
	if name != "" {
		title += fmt.Sprintf(" of %q", name)
	}
	title += "\nfree spins put every temperature on one curve"
	return &Figure{Title: title, Panels: []Panel{{Plot: p, Legend: &leg}}, Width: 16, Height: 10}, nil
}

func allPoints(n int) []int {
	out := make([]int, n)
	for i := range out {
		out[i] = i
	}
	return out
}

// baselineDash is the dotted pattern of baseline i: dots, then dots and
// dashes.
func baselineDash(i int) []vg.Length {
	patterns := [][]vg.Length{dotted, {vg.Points(1.2), vg.Points(2.4), vg.Points(5), vg.Points(2.4)}}
	return patterns[i%len(patterns)]
}
