package figure

import (
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// lineWidth is the width of data curves.
const lineWidth = 1.4

// xys pairs xs with ys; the caller has checked the lengths.
func xys(xs, ys []float64) plotter.XYs {
	pts := make(plotter.XYs, len(xs))
	for i := range xs {
		pts[i].X, pts[i].Y = xs[i], ys[i]
	}
	return pts
}

// curve returns a line through the points in the given colour and dashes.
// Curves of fewer than two points get a marker at each point, so that they
// do not vanish.
func curve(pts plotter.XYs, c color.Color, dashes []vg.Length, width float64) ([]plot.Plotter, plot.Thumbnailer, error) {
	l, err := plotter.NewLine(pts)
	if err != nil {
		return nil, nil, err
	}
	l.LineStyle = draw.LineStyle{Color: c, Width: vg.Points(width), Dashes: dashes}
	out := []plot.Plotter{l}
	if len(pts) < 2 {
		s, err := plotter.NewScatter(pts)
		if err != nil {
			return nil, nil, err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: c, Radius: vg.Points(2.5), Shape: draw.CircleGlyph{}}
		out = append(out, s)
	}
	return out, l, nil
}

// lineThumb is a legend sample of a line style that draws nothing on the plot.
func lineThumb(c color.Color, dashes []vg.Length, width float64) plot.Thumbnailer {
	return &plotter.Line{LineStyle: draw.LineStyle{Color: c, Width: vg.Points(width), Dashes: dashes}}
}

// glyphThumb is a legend sample of a marker.
type glyphThumb draw.GlyphStyle

func (g glyphThumb) Thumbnail(c *draw.Canvas) {
	c.DrawGlyph(draw.GlyphStyle(g), c.Center())
}

// vline is a vertical line at x across the whole height of the data area.
type vline struct {
	x     float64
	style draw.LineStyle
}

func (v vline) Plot(c draw.Canvas, p *plot.Plot) {
	tx, _ := p.Transforms(&c)
	x := tx(v.x)
	c.StrokeLine2(v.style, x, c.Min.Y, x, c.Max.Y)
}

// hline is a horizontal line at y across the whole width of the data area.
type hline struct {
	y     float64
	style draw.LineStyle
}

func (h hline) Plot(c draw.Canvas, p *plot.Plot) {
	_, ty := p.Transforms(&c)
	y := ty(h.y)
	c.StrokeLine2(h.style, c.Min.X, y, c.Max.X, y)
}

// DataRange makes the line's level part of the vertical range.
func (h hline) DataRange() (xmin, xmax, ymin, ymax float64) {
	return posInf, negInf, h.y, h.y
}

func (h hline) Thumbnail(c *draw.Canvas) {
	y := c.Center().Y
	c.StrokeLine2(h.style, c.Min.X, y, c.Max.X, y)
}

var (
	posInf = math.Inf(1)
	negInf = math.Inf(-1)
)
