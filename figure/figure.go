package figure

import (
	"bufio"
	"fmt"
	"image/color"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Figure is one or more plots stacked top to bottom, with a title above
// them. Panels that share their horizontal axis have their data areas
// aligned, so that a vertical line at one field or temperature runs
// straight through all of them.
type Figure struct {
	// Title is drawn centred above the first panel; "\n" breaks it.
	Title string
	// Panels, top to bottom.
	Panels []Panel
	// Width and Height are the size in centimetres that Save uses when it
	// is given none.
	Width, Height float64
}

// Panel is one plot of a figure.
type Panel struct {
	Plot *plot.Plot
	// Weight is the panel's share of the figure's height, relative to the
	// others; 0 counts as 1.
	Weight float64
	// Legend, when not nil, is drawn to the right of the data area, top
	// aligned, where it cannot hide data; the plot's own legend is drawn
	// inside the data area as usual.
	Legend *plot.Legend
}

// DataError reports a result message that cannot be drawn. Field is the
// protojson path of the offending field, such as "curves[1].magnetization".
type DataError struct {
	Field  string
	Reason string
}

func (e *DataError) Error() string { return e.Field + ": " + e.Reason }

func dataErrorf(field, format string, args ...any) error {
	return &DataError{Field: field, Reason: fmt.Sprintf(format, args...)}
}

// Format is an image format that Save writes.
type Format string

// The formats, named by their file extensions.
const (
	PNG Format = "png"
	SVG Format = "svg"
)

// FormatOf returns the format of path's extension (case does not matter),
// or an error naming the extension when it is neither .png nor .svg.
func FormatOf(path string) (Format, error) {
	ext := filepath.Ext(path)
	switch strings.ToLower(ext) {
	case ".png":
		return PNG, nil
	case ".svg":
		return SVG, nil
	case "":
		return "", fmt.Errorf("%q has no file extension: end it in .png or .svg", path)
	}
	return "", fmt.Errorf("unsupported file extension %q: end the file name in .png or .svg", ext)
}

// DPI is the resolution of PNG images.
const DPI = 150

// Default size in centimetres, for figures that give none.
const (
	defaultWidth  = 16
	defaultHeight = 11
)

// Save writes fig to path as a PNG or SVG image, by the file extension,
// widthCm by heightCm centimetres; a size <= 0 takes the figure's own
// (Figure.Width, Figure.Height). An unsupported extension is refused before
// the file is created.
func Save(fig *Figure, path string, widthCm, heightCm float64) (err error) {
	format, err := FormatOf(path)
	if err != nil {
		return err
	}
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	defer func() {
		if cerr := f.Close(); err == nil {
			err = cerr
		}
		if err != nil {
			os.Remove(path)
		}
	}()
	w := bufio.NewWriter(f)
	if err := fig.Encode(w, format, widthCm, heightCm); err != nil {
		return err
	}
	return w.Flush()
}

// Encode writes fig to w in the given format, widthCm by heightCm
// centimetres (a size <= 0 takes the figure's own).
func (fig *Figure) Encode(w io.Writer, format Format, widthCm, heightCm float64) error {
	width, height := fig.size(widthCm, heightCm)
	var c interface {
		vg.CanvasSizer
		io.WriterTo
	}
	switch format {
	case PNG:
		img := vgimg.NewWith(vgimg.UseWH(width, height), vgimg.UseDPI(DPI), vgimg.UseBackgroundColor(color.White))
		c = vgimg.PngCanvas{Canvas: img}
	case SVG:
		c = vgsvg.New(width, height)
	default:
		return fmt.Errorf("figure: unknown format %q (png or svg)", format)
	}
	fig.Draw(draw.New(c))
	_, err := c.WriteTo(w)
	return err
}

func (fig *Figure) size(widthCm, heightCm float64) (vg.Length, vg.Length) {
	if widthCm <= 0 {
		widthCm = fig.Width
	}
	if heightCm <= 0 {
		heightCm = fig.Height
	}
	if widthCm <= 0 {
		widthCm = defaultWidth
	}
	if heightCm <= 0 {
		heightCm = defaultHeight
	}
	return vg.Length(widthCm) * vg.Centimeter, vg.Length(heightCm) * vg.Centimeter
}

// titleStyle is the style of a figure's title.
func titleStyle() text.Style {
	return text.Style{
		Color:   color.Black,
		Font:    fontOf(12),
		XAlign:  draw.XCenter,
		YAlign:  draw.YTop,
		Handler: plot.DefaultTextHandler,
	}
}

// panelGap is the space between two stacked panels.
const panelGap = 4 * vg.Millimeter

// Draw draws the figure onto dc: the title, then the panels with their data
// areas aligned left and right.
func (fig *Figure) Draw(dc draw.Canvas) {
	dc.SetColor(color.White)
	dc.Fill(dc.Rectangle.Path())
	dc = draw.Crop(dc, 2*vg.Millimeter, -3*vg.Millimeter, 2*vg.Millimeter, -2*vg.Millimeter)
	if fig.Title != "" {
		sty := titleStyle()
		title := wrap(sty, fig.Title, dc.Max.X-dc.Min.X)
		dc.FillText(sty, vg.Point{X: dc.Center().X, Y: dc.Max.Y}, title)
		dc.Max.Y -= sty.Rectangle(title).Size().Y + 3*vg.Millimeter
	}
	if len(fig.Panels) == 0 {
		return
	}
	total := 0.0
	for _, p := range fig.Panels {
		total += weight(p)
	}
	free := dc.Max.Y - dc.Min.Y - panelGap*vg.Length(len(fig.Panels)-1)
	canvases := make([]draw.Canvas, len(fig.Panels))
	top := dc.Max.Y
	for i, p := range fig.Panels {
		h := free * vg.Length(weight(p)/total)
		c := dc
		c.Max.Y, c.Min.Y = top, top-h
		canvases[i] = c
		top -= h + panelGap
	}
	// Align the data areas: every panel gets the widest left and right
	// margins of them all, the right one including a legend beside it.
	beside := make([]vg.Length, len(fig.Panels))
	var left, right vg.Length
	for i, p := range fig.Panels {
		c := canvases[i]
		if p.Legend != nil {
			r := p.Legend.Rectangle(c)
			beside[i] = r.Max.X - r.Min.X + legendGap
		}
		d := p.Plot.DataCanvas(c)
		left = max(left, d.Min.X-c.Min.X)
		right = max(right, c.Max.X-d.Max.X+beside[i])
	}
	for i, p := range fig.Panels {
		c := canvases[i]
		d := p.Plot.DataCanvas(c)
		c = draw.Crop(c, left-(d.Min.X-c.Min.X), -(right - (c.Max.X - d.Max.X)), 0, 0)
		p.Plot.Draw(c)
		if p.Legend != nil {
			d = p.Plot.DataCanvas(c)
			lc := canvases[i]
			lc.Min.X, lc.Min.Y, lc.Max.Y = d.Max.X+legendGap, d.Min.Y, d.Max.Y
			leg := *p.Legend
			leg.Top, leg.Left = true, true
			leg.Draw(lc)
		}
	}
}

// legendGap separates a legend from the data area beside it.
const legendGap = 3 * vg.Millimeter

func weight(p Panel) float64 {
	if p.Weight > 0 {
		return p.Weight
	}
	return 1
}

// sans is the typeface of every text: Liberation Sans.
var sans = font.Font{Typeface: "Liberation", Variant: "Sans"}

// fontOf returns the figures' typeface at size points.
func fontOf(size float64) font.Font {
	f := sans
	f.Size = vg.Points(size)
	return f
}

// newPlot returns a plot in the style of the figures: sans-serif text, a
// light grid, ticks at round numbers.
func newPlot() *plot.Plot {
	p := plot.New()
	p.Add(grid())
	p.Title.TextStyle.Font = fontOf(11)
	p.X.Label.TextStyle.Font = fontOf(10.5)
	p.Y.Label.TextStyle.Font = fontOf(10.5)
	p.X.Tick.Label.Font = fontOf(9)
	p.Y.Tick.Label.Font = fontOf(9)
	p.X.Tick.Marker = roundTicks{}
	p.Y.Tick.Marker = roundTicks{}
	p.Legend = newLegend()
	return p
}

// newLegend returns a legend in the style of the figures.
func newLegend() plot.Legend {
	l := plot.NewLegend()
	l.TextStyle.Font = fontOf(9)
	l.ThumbnailWidth = vg.Points(24)
	l.Padding = vg.Points(1.5)
	return l
}

// shareX gives the panels one horizontal range, scale and ticks, and
// leaves the tick labels and the axis label to the bottom panel alone.
func shareX(panels ...*plot.Plot) {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, p := range panels {
		lo, hi = math.Min(lo, p.X.Min), math.Max(hi, p.X.Max)
	}
	last := panels[len(panels)-1]
	for i, p := range panels {
		p.X.Min, p.X.Max = lo, hi
		p.X.Scale = last.X.Scale
		p.X.Tick.Marker = last.X.Tick.Marker
		if i < len(panels)-1 {
			// Blank labels in a tiny font keep the ticks major (full
			// length, with grid lines) at almost no height.
			p.X.Tick.Marker = unlabelled{last.X.Tick.Marker}
			p.X.Tick.Label.Font.Size = vg.Points(1)
			p.X.Label.Text = ""
		}
	}
}

// unlabelled is a ticker whose ticks carry blank labels (for the upper
// panels of a shared axis).
type unlabelled struct{ plot.Ticker }

func (u unlabelled) Ticks(lo, hi float64) []plot.Tick {
	ticks := u.Ticker.Ticks(lo, hi)
	for i := range ticks {
		if ticks[i].Label != "" {
			ticks[i].Label = " "
		}
	}
	return ticks
}

// roundTicks puts 4 to 7 labelled ticks on round numbers (steps of 1, 2,
// 2.5 or 5 times a power of ten) with unlabelled ticks between them.
type roundTicks struct{}

func (roundTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || math.IsInf(hi-lo, 0) {
		return plot.DefaultTicks{}.Ticks(lo, hi)
	}
	raw := (hi - lo) / 5
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	var step, minor float64
	for _, m := range []struct{ step, minor float64 }{{1, 0.2}, {2, 0.5}, {2.5, 0.5}, {5, 1}, {10, 2}} {
		step, minor = m.step*mag, m.minor*mag
		if step >= raw*0.999 {
			break
		}
	}
	// As many decimals as the step needs: 0.25 two, 2.5 one, 25 none.
	decimals := 0
	for decimals < 15 {
		x := step * math.Pow(10, float64(decimals))
		if math.Abs(x-math.Round(x)) < 1e-6*x {
			break
		}
		decimals++
	}
	eps := 1e-9 * step
	var ticks []plot.Tick
	for k := math.Ceil((lo - eps) / minor); k*minor <= hi+eps; k++ {
		v := k * minor
		t := plot.Tick{Value: v}
		if r := math.Round(v / step); math.Abs(v/step-r) < 1e-6 {
			t.Value = r * step
			// Rounded to the step's decimals, printed without trailing
			// zeros: 0, 2.5, 5, 7.5.
			rounded, _ := strconv.ParseFloat(strconv.FormatFloat(t.Value, 'f', decimals, 64), 64)
			t.Label = strconv.FormatFloat(rounded, 'f', -1, 64)
			if strings.Trim(t.Label, "-0.") == "" {
				t.Label = "0"
			}
		}
		ticks = append(ticks, t)
	}
	return ticks
}

// logTicks marks every decade with a label and the integer multiples in
// between without; over less than two decades 2 and 5 are labelled too.
type logTicks struct{}

func (logTicks) Ticks(lo, hi float64) []plot.Tick {
	if lo <= 0 || hi <= lo {
		return plot.DefaultTicks{}.Ticks(lo, hi)
	}
	few := math.Log10(hi/lo) < 2
	var ticks []plot.Tick
	for e := math.Floor(math.Log10(lo)); e <= math.Ceil(math.Log10(hi)); e++ {
		decade := math.Pow(10, e)
		for m := 1; m < 10; m++ {
			v := float64(m) * decade
			if v < lo*(1-1e-9) || v > hi*(1+1e-9) {
				continue
			}
			t := plot.Tick{Value: v}
			if m == 1 || (few && (m == 2 || m == 5)) {
				t.Label = strconv.FormatFloat(v, 'g', -1, 64)
			}
			ticks = append(ticks, t)
		}
	}
	return ticks
}

// useLogX puts the horizontal axis on a log scale.
func useLogX(p *plot.Plot) {
	p.X.Scale = plot.LogScale{}
	p.X.Tick.Marker = logTicks{}
}

// grid returns the light grid lines behind the data.
func grid() plot.Plotter {
	g := plotter.NewGrid()
	light := color.RGBA{0xe2, 0xe2, 0xe2, 0xff}
	g.Vertical.Color, g.Horizontal.Color = light, light
	g.Vertical.Width, g.Horizontal.Width = vg.Points(0.5), vg.Points(0.5)
	return g
}

// Colours.

// gradientStops run from cold (dark blue) to hot (dark red), all dark
// enough to read on white.
var gradientStops = []color.RGBA{
	{0x1f, 0x3a, 0x93, 0xff},
	{0x15, 0x8f, 0x8f, 0xff},
	{0x6a, 0xa8, 0x2a, 0xff},
	{0xe0, 0x8a, 0x00, 0xff},
	{0xb2, 0x18, 0x2b, 0xff},
}

// gradient returns the colour of item i of n ordered items (temperatures
// from low to high, or S^z from low to high).
func gradient(i, n int) color.Color {
	if n <= 1 {
		return gradientStops[0]
	}
	t := float64(i) / float64(n-1) * float64(len(gradientStops)-1)
	k := min(int(t), len(gradientStops)-2)
	f := t - float64(k)
	a, b := gradientStops[k], gradientStops[k+1]
	mix := func(x, y uint8) uint8 { return uint8(math.Round(float64(x) + f*(float64(y)-float64(x)))) }
	return color.RGBA{mix(a.R, b.R), mix(a.G, b.G), mix(a.B, b.B), 0xff}
}

var (
	black = color.Black
	grey  = color.RGBA{0x60, 0x60, 0x60, 0xff}
)

// Dash patterns.
var (
	solid  []vg.Length
	dashed = []vg.Length{vg.Points(6), vg.Points(3)}
	dotted = []vg.Length{vg.Points(1.2), vg.Points(2.4)}
	// moreDashes distinguish further curves of one kind.
	moreDashes = [][]vg.Length{
		dashed,
		{vg.Points(8), vg.Points(2.5), vg.Points(1.5), vg.Points(2.5)},
		{vg.Points(3), vg.Points(2)},
		{vg.Points(10), vg.Points(3), vg.Points(1.5), vg.Points(2), vg.Points(1.5), vg.Points(3)},
	}
)

func dashFor(i int) []vg.Length { return moreDashes[i%len(moreDashes)] }

// Formatting.

// num prints v with up to 4 significant digits, as a legend or label wants
// it: 2, 0.5, 12.5, 1.386.
func num(v float64) string {
	if v == 0 {
		return "0"
	}
	return strconv.FormatFloat(v, 'g', 4, 64)
}

// half prints a quantum number that is a multiple of 1/2: 0, 1, -1/2, 3/2.
func half(v float64) string {
	twice := math.Round(2 * v)
	if math.Abs(2*v-twice) > 1e-6 {
		return num(v)
	}
	if int64(twice)%2 == 0 {
		return strconv.FormatInt(int64(twice)/2, 10)
	}
	return strconv.FormatInt(int64(twice), 10) + "/2"
}

func vector(v []float64) string {
	parts := make([]string, len(v))
	for i, x := range v {
		parts[i] = num(x)
	}
	return "(" + strings.Join(parts, ", ") + ")"
}

// checkFinite returns a DataError naming field[i] for the first value of v
// that is NaN or infinite.
func checkFinite(field string, v []float64) error {
	for i, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return dataErrorf(fmt.Sprintf("%s[%d]", field, i), "is %v; only finite numbers can be drawn", x)
		}
	}
	return nil
}

// checkLength returns a DataError naming field unless v has n values.
func checkLength(field string, v []float64, n int, of string) error {
	if len(v) != n {
		return dataErrorf(field, "has %d values for %d %s", len(v), n, of)
	}
	return nil
}

// Unit symbols; Liberation, gonum's default font, has the Greek letters.
const muB = "μ_B"

// muBOverKB is mu_B/k_B in K/T (CODATA 2018), the value of ed.MuBOverKB;
// kept here so that drawing does not pull in the engine.
const muBOverKB = 0.67171381563

// padY widens the vertical range of p by 3% of its span on each side, so
// that curves do not run along the frame; a range that starts or ends
// within 10% of its span from zero is taken to zero instead.
func padY(p *plot.Plot) {
	lo, hi := p.Y.Min, p.Y.Max
	span := hi - lo
	if !(span > 0) || math.IsInf(span, 0) {
		return
	}
	lo, hi = lo-0.03*span, hi+0.03*span
	if p.Y.Min >= 0 && p.Y.Min <= 0.1*span {
		lo = 0
	}
	if p.Y.Max <= 0 && p.Y.Max >= -0.1*span {
		hi = 0
	}
	p.Y.Min, p.Y.Max = lo, hi
}

// zeroX starts the horizontal range of p at zero when the data start
// within 10% of their span above it.
func zeroX(p *plot.Plot) {
	if span := p.X.Max - p.X.Min; p.X.Min > 0 && p.X.Min <= 0.1*span {
		p.X.Min = 0
	}
}

// wrap breaks the lines of s between words where they are wider than
// width in the style sty.
func wrap(sty text.Style, s string, width vg.Length) string {
	var out []string
	for _, line := range strings.Split(s, "\n") {
		words := strings.Fields(line)
		cur := ""
		for _, w := range words {
			next := w
			if cur != "" {
				next = cur + " " + w
			}
			if cur != "" && sty.Width(next) > width {
				out = append(out, cur)
				next = w
			}
			cur = next
		}
		out = append(out, cur)
	}
	return strings.Join(out, "\n")
}

// legendWidth is the widest line of legend text; longer entries continue
// on lines of their own below their sample.
const legendWidth = 5 * vg.Centimeter

// addEntry adds an entry to leg, its text broken into lines of at most
// legendWidth.
func addEntry(leg *plot.Legend, label string, thumbs ...plot.Thumbnailer) {
	lines := strings.Split(wrap(leg.TextStyle, label, legendWidth), "\n")
	leg.Add(lines[0], thumbs...)
	for _, l := range lines[1:] {
		leg.Add("  " + l)
	}
}

// joinOrBreak joins a and b with a comma where they fit on one legend line,
// and puts b on a line of its own otherwise.
func joinOrBreak(leg *plot.Legend, a, b string) string {
	if one := a + ", " + b; leg.TextStyle.Width(one) <= legendWidth {
		return one
	}
	return a + "\n" + b
}
