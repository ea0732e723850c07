package figure

import (
	"bytes"
	"encoding/xml"
	"errors"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	frustumv1 "frustum/proto/frustum/v1"
)

// Handmade results: small, with the shapes of the real ones.

// brillouin is the moment of a free spin 1/2 with g = 2, in mu_B.
func brillouin(B, T float64) float64 {
	if T == 0 {
		return math.Copysign(1, B)
	}
	return math.Tanh(muBOverKB * B / T)
}

func sampleMagnetization() *frustumv1.MagnetizationResult {
	res := &frustumv1.MagnetizationResult{
		ClusterName:     "two free spins",
		Direction:       []float64{0, 0, 1},
		Saturation:      2,
		GroupSaturation: map[string]float64{"left": 1, "right": 1},
	}
	for i := 0; i <= 30; i++ {
		res.Field = append(res.Field, 0.5*float64(i))
	}
	for _, T := range []float64{2, 5, 10} {
		c := &frustumv1.MagnetizationCurve{Temperature: T, Groups: map[string]*frustumv1.GroupCurve{"left": {}, "right": {}}}
		for _, B := range res.Field {
			m := brillouin(B, T)
			c.Magnetization = append(c.Magnetization, 2*m)
			c.Groups["left"].Values = append(c.Groups["left"].Values, m)
			c.Groups["right"].Values = append(c.Groups["right"].Values, m)
		}
		res.Curves = append(res.Curves, c)
	}
	return res
}

// sampleThermo is a two-level system (levels 0 and 10 K) over 0.5..300 K.
func sampleThermo() *frustumv1.ThermoResult {
	res := &frustumv1.ThermoResult{
		ClusterName:             "two levels",
		Field:                   []float64{0, 0, 0},
		SusceptibilityDirection: []float64{0, 0, 1},
		Engine:                  &frustumv1.EngineReport{Dimension: 2},
	}
	const delta = 10.0
	for i := 0; i < 60; i++ {
		T := 0.5 * math.Pow(600, float64(i)/59)
		x := delta / T
		p := 1 / (1 + math.Exp(x))
		res.Temperature = append(res.Temperature, T)
		res.Energy = append(res.Energy, delta*p)
		res.SpecificHeat = append(res.SpecificHeat, x*x*p*(1-p))
		res.Entropy = append(res.Entropy, -p*math.Log(p)-(1-p)*math.Log(1-p))
		res.Magnetization = append(res.Magnetization, 0)
		res.Susceptibility = append(res.Susceptibility, 0.5/T)
	}
	return res
}

// sampleFit has free-spin-like data at three temperatures, a model and two
// baselines.
func sampleFit() *frustumv1.FitResult {
	res := &frustumv1.FitResult{
		Observable: "polarization",
		Link:       "global",
		DataName:   "invented.csv",
		ValueUnit:  "1",
		ScalingG:   2,
		Best:       "coupled pair",
	}
	models := []*frustumv1.ModelFit{
		{Name: "coupled pair", ReducedChiSquare: 1.1, Aic: 10},
		{Name: "decoupled", ReducedChiSquare: 3.2, Aic: 20},
		{Name: "free spin 1/2", Baseline: true, ReducedChiSquare: 8.5, Aic: 40},
		{Name: "free spin 1", Baseline: true, ReducedChiSquare: 30, Aic: 90},
	}
	for _, T := range []float64{2, 4, 8} {
		for i := 1; i <= 12; i++ {
			B := float64(i)
			x := 2 * muBOverKB * B / (2 * T)
			free := math.Tanh(x)
			y := 0.95*free - 0.02*math.Sin(float64(i))
			res.Temperature = append(res.Temperature, T)
			res.Field = append(res.Field, B)
			res.Value = append(res.Value, y)
			res.Sigma = append(res.Sigma, 0.02)
			res.Scaling = append(res.Scaling, x)
			curves := []float64{0.95 * free, 0.9 * free, free, math.Tanh(1.5 * x)}
			for k, m := range models {
				m.Curve = append(m.Curve, curves[k])
				m.Residual = append(m.Residual, (y-curves[k])/0.02)
			}
		}
	}
	res.Models = models
	return res
}

// checkFiles saves fig as PNG and SVG and checks what was written.
func checkFiles(t *testing.T, fig *Figure, name string) {
	t.Helper()
	dir := t.TempDir()
	pngPath := filepath.Join(dir, name+".png")
	if err := Save(fig, pngPath, 0, 0); err != nil {
		t.Fatalf("Save %s: %v", pngPath, err)
	}
	b, err := os.ReadFile(pngPath)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.HasPrefix(b, []byte("\x89PNG\r\n\x1a\n")) {
		t.Fatalf("%s does not start with the PNG signature", pngPath)
	}
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("%s: %v", pngPath, err)
	}
	wantW := int(math.Round(fig.Width / 2.54 * DPI))
	if got := img.Bounds().Dx(); got < wantW-2 || got > wantW+2 {
		t.Errorf("%s is %d pixels wide, want %d (%g cm at %d dpi)", pngPath, got, wantW, fig.Width, DPI)
	}
	if inked(img) < 0.01 {
		t.Errorf("%s is almost blank", pngPath)
	}

	svgPath := filepath.Join(dir, strings.ToUpper(name)+".SVG")
	if err := Save(fig, svgPath, 12, 9); err != nil {
		t.Fatalf("Save %s: %v", svgPath, err)
	}
	b, err = os.ReadFile(svgPath)
	if err != nil {
		t.Fatal(err)
	}
	dec := xml.NewDecoder(bytes.NewReader(b))
	for {
		tok, err := dec.Token()
		if err != nil {
			t.Fatalf("%s: no root element: %v", svgPath, err)
		}
		if se, ok := tok.(xml.StartElement); ok {
			if se.Name.Local != "svg" {
				t.Errorf("%s: root element <%s>, want <svg>", svgPath, se.Name.Local)
			}
			break
		}
	}
	for _, want := range []string{"<path", "</svg>"} {
		if !bytes.Contains(b, []byte(want)) {
			t.Errorf("%s lacks %q", svgPath, want)
		}
	}
}

// inked is the fraction of pixels that are not white.
func inked(img image.Image) float64 {
	b := img.Bounds()
	n := 0
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			if r < 0xf000 || g < 0xf000 || bl < 0xf000 {
				n++
			}
		}
	}
	return float64(n) / float64(b.Dx()*b.Dy())
}

// dimerSpectra are the levels of a Heisenberg dimer (coupling J in K, g =
// 2) at the fields B, in the form the engine gives them: S at every field,
// S^z in a field.
func dimerSpectra(J float64, fields []float64) ZeemanData {
	d := ZeemanData{Field: fields}
	for _, B := range fields {
		h := 2 * muBOverKB * B
		s := &frustumv1.SpectrumResult{ClusterName: "handmade dimer", Field: []float64{0, 0, B}}
		type lv struct {
			e         float64
			deg       int32
			sz, total float64
			hasSz     bool
		}
		var ls []lv
		if B == 0 {
			ls = []lv{{e: -0.75 * J, deg: 1}, {e: 0.25 * J, deg: 3, total: 1}}
		} else {
			ls = []lv{{e: -0.75 * J, deg: 1, hasSz: true}}
			for _, sz := range []float64{1, 0, -1} {
				ls = append(ls, lv{e: 0.25*J - h*sz, deg: 1, sz: sz, total: 1, hasSz: true})
			}
		}
		sortLevels := func() {
			for i := range ls {
				for j := i + 1; j < len(ls); j++ {
					if ls[j].e < ls[i].e {
						ls[i], ls[j] = ls[j], ls[i]
					}
				}
			}
		}
		sortLevels()
		for _, l := range ls {
			pl := &frustumv1.Level{Energy: l.e, Degeneracy: l.deg, TotalSpin: proto.Float64(l.total)}
			if l.hasSz {
				pl.Sz = proto.Float64(l.sz)
			}
			s.Levels = append(s.Levels, pl)
		}
		d.Spectra = append(d.Spectra, s)
	}
	return d
}

func linspace(a, b float64, n int) []float64 {
	out := make([]float64, n)
	for i := range out {
		out[i] = a + (b-a)*float64(i)/float64(n-1)
	}
	return out
}

func TestFiguresSave(t *testing.T) {
	mag := sampleMagnetization()
	powder := sampleMagnetization()
	powder.Direction = nil
	powder.Powder = &frustumv1.PowderReport{Rule: "Lebedev 26", Directions: 26}
	cases := []struct {
		name  string
		build func() (*Figure, error)
		title string
	}{
		{"magnetization", func() (*Figure, error) { return Magnetization(mag, MagnetizationOptions{}) }, "field along (0, 0, 1)"},
		{"groups", func() (*Figure, error) { return Magnetization(mag, MagnetizationOptions{Groups: true}) }, "two free spins"},
		{"polarization", func() (*Figure, error) {
			return Magnetization(mag, MagnetizationOptions{Groups: true, Polarization: true})
		}, "two free spins"},
		{"powder", func() (*Figure, error) { return Magnetization(powder, MagnetizationOptions{}) }, "powder average (Lebedev 26)"},
		{"thermo", func() (*Figure, error) { return Thermo(sampleThermo()) }, "two levels"},
		{"zeeman", func() (*Figure, error) { return Zeeman(dimerSpectra(10, linspace(0, 15, 31))) }, "field along (0, 0, 1)"},
		{"fit", func() (*Figure, error) { return Fit(sampleFit()) }, "O = polarization"},
		{"collapse", func() (*Figure, error) { return Collapse(sampleFit()) }, "invented.csv"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			fig, err := tc.build()
			if err != nil {
				t.Fatal(err)
			}
			if !strings.Contains(fig.Title, tc.title) {
				t.Errorf("title %q lacks %q", fig.Title, tc.title)
			}
			checkFiles(t, fig, tc.name)
		})
	}
}

// TestFigureLabels checks the axis labels and legends that carry the units.
func TestFigureLabels(t *testing.T) {
	m, err := Magnetization(sampleMagnetization(), MagnetizationOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if p := m.Panels[0].Plot; p.X.Label.Text != "B (T)" || p.Y.Label.Text != "M (μ_B per cluster)" {
		t.Errorf("magnetization axes %q, %q", p.X.Label.Text, p.Y.Label.Text)
	}
	m, err = Magnetization(sampleMagnetization(), MagnetizationOptions{Polarization: true})
	if err != nil {
		t.Fatal(err)
	}
	if p := m.Panels[0].Plot; p.Y.Label.Text != "M/M_sat" || p.Y.Max < 1 || p.Y.Max > 1.05 {
		t.Errorf("polarization axis %q up to %g, want M/M_sat up to the saturation 1", p.Y.Label.Text, p.Y.Max)
	}

	th, err := Thermo(sampleThermo())
	if err != nil {
		t.Fatal(err)
	}
	var labels []string
	for _, p := range th.Panels {
		labels = append(labels, p.Plot.Y.Label.Text)
	}
	if want := "E (K)|C (k_B)|S (k_B)|χ (μ_B/T)"; strings.Join(labels, "|") != want {
		t.Errorf("thermo panels %q, want %q", strings.Join(labels, "|"), want)
	}
	bottom := th.Panels[3].Plot
	if bottom.X.Label.Text != "T (K)" || th.Panels[0].Plot.X.Label.Text != "" {
		t.Errorf("the T axis label belongs to the bottom panel alone: %q, top %q", bottom.X.Label.Text, th.Panels[0].Plot.X.Label.Text)
	}
	if _, ok := bottom.X.Scale.(interface {
		Normalize(min, max, x float64) float64
	}); !ok || bottom.X.Scale.Normalize(1, 100, 10) != 0.5 {
		t.Errorf("0.5..300 K is not on a log scale")
	}
	for _, p := range th.Panels {
		if p.Plot.X.Min != bottom.X.Min || p.Plot.X.Max != bottom.X.Max {
			t.Errorf("panel %q: T from %g to %g, bottom from %g to %g", p.Plot.Y.Label.Text, p.Plot.X.Min, p.Plot.X.Max, bottom.X.Min, bottom.X.Max)
		}
	}
	// The entropy panel reaches the limit ln 2.
	if s := th.Panels[2].Plot; s.Y.Max < math.Ln2 {
		t.Errorf("entropy axis ends at %g, below ln 2", s.Y.Max)
	}
	// A decade or less stays linear.
	narrow := sampleThermo()
	narrow.Temperature = linspace(1, 10, len(narrow.Temperature))
	th, err = Thermo(narrow)
	if err != nil {
		t.Fatal(err)
	}
	if th.Panels[3].Plot.X.Scale.Normalize(1, 10, 5.5) != 0.5 {
		t.Error("1..10 K is not on a linear scale")
	}
}

func TestSaveFormat(t *testing.T) {
	fig, err := Thermo(sampleThermo())
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	for _, name := range []string{"out.pdf", "out.png.txt", "out"} {
		path := filepath.Join(dir, name)
		err := Save(fig, path, 0, 0)
		if err == nil {
			t.Errorf("Save %s: no error", name)
			continue
		}
		ext := filepath.Ext(name)
		if ext == "" {
			if !strings.Contains(err.Error(), "no file extension") {
				t.Errorf("Save %s: %v", name, err)
			}
		} else if !strings.Contains(err.Error(), `"`+ext+`"`) {
			t.Errorf("Save %s: error %q does not name the extension %s", name, err, ext)
		}
		if _, err := os.Stat(path); !errors.Is(err, os.ErrNotExist) {
			t.Errorf("Save %s created the file", name)
		}
	}
	if err := Save(fig, filepath.Join(dir, "missing", "out.png"), 0, 0); err == nil {
		t.Error("Save into a missing directory: no error")
	}
	// The size in centimetres sets the pixels at DPI.
	path := filepath.Join(dir, "small.png")
	if err := Save(fig, path, 5.08, 2.54); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	cfg, err := png.DecodeConfig(f)
	if err != nil {
		t.Fatal(err)
	}
	if cfg.Width != 2*DPI || cfg.Height != DPI {
		t.Errorf("5.08 x 2.54 cm at %d dpi is %dx%d pixels, want %dx%d", DPI, cfg.Width, cfg.Height, 2*DPI, DPI)
	}
}

// TestDataErrors checks that results that cannot be drawn are refused with
// a *DataError naming the field.
func TestDataErrors(t *testing.T) {
	shortCurve := sampleMagnetization()
	shortCurve.Curves[1].Magnetization = shortCurve.Curves[1].Magnetization[:3]
	nanCurve := sampleMagnetization()
	nanCurve.Curves[0].Magnetization[4] = math.NaN()
	noGroups := sampleMagnetization()
	for _, c := range noGroups.Curves {
		c.Groups = nil
	}
	noSat := sampleMagnetization()
	noSat.Saturation = 0
	shortGroup := sampleMagnetization()
	shortGroup.Curves[2].Groups["right"].Values = nil

	thermoShort := sampleThermo()
	thermoShort.SpecificHeat = thermoShort.SpecificHeat[1:]
	thermoZero := sampleThermo()
	thermoZero.Temperature[0] = 0

	fitShort := sampleFit()
	fitShort.Models[2].Curve = fitShort.Models[2].Curve[:5]
	fitSigma := sampleFit()
	fitSigma.Sigma[7] = 0
	fitNoModels := sampleFit()
	fitNoModels.Models = nil
	fitField := sampleFit()
	fitField.Field = fitField.Field[:10]
	collapseShort := sampleFit()
	collapseShort.Scaling = collapseShort.Scaling[:2]

	zeeman := dimerSpectra(10, linspace(0, 15, 4))
	zeemanFewer := zeeman
	zeemanFewer.Spectra = zeeman.Spectra[:3]
	zeemanDown := dimerSpectra(10, []float64{0, 2, 1, 3})
	zeemanEmpty := dimerSpectra(10, linspace(0, 15, 4))
	zeemanEmpty.Spectra[2] = &frustumv1.SpectrumResult{}

	magnetization := func(r *frustumv1.MagnetizationResult, o MagnetizationOptions) func() error {
		return func() error { _, err := Magnetization(r, o); return err }
	}
	for _, tc := range []struct {
		name, field string
		draw        func() error
	}{
		{"no fields", "field", magnetization(&frustumv1.MagnetizationResult{Curves: []*frustumv1.MagnetizationCurve{{}}}, MagnetizationOptions{})},
		{"no curves", "curves", magnetization(&frustumv1.MagnetizationResult{Field: []float64{1}}, MagnetizationOptions{})},
		{"short curve", "curves[1].magnetization", magnetization(shortCurve, MagnetizationOptions{})},
		{"NaN", "curves[0].magnetization[4]", magnetization(nanCurve, MagnetizationOptions{})},
		{"no groups", "curves[0].groups", magnetization(noGroups, MagnetizationOptions{Groups: true})},
		{"short group", `curves[2].groups["right"].values`, magnetization(shortGroup, MagnetizationOptions{Groups: true})},
		{"no saturation", "saturation", magnetization(noSat, MagnetizationOptions{Polarization: true})},
		{"nil magnetization", "magnetization result", magnetization(nil, MagnetizationOptions{})},
		{"no temperatures", "temperature", func() error { _, err := Thermo(&frustumv1.ThermoResult{}); return err }},
		{"short thermo", "specificHeat", func() error { _, err := Thermo(thermoShort); return err }},
		{"T = 0", "temperature[0]", func() error { _, err := Thermo(thermoZero); return err }},
		{"empty fit", "value", func() error { _, err := Fit(&frustumv1.FitResult{}); return err }},
		{"short model", "models[2].curve", func() error { _, err := Fit(fitShort); return err }},
		{"sigma 0", "sigma[7]", func() error { _, err := Fit(fitSigma); return err }},
		{"no models", "models", func() error { _, err := Fit(fitNoModels); return err }},
		{"short field", "field", func() error { _, err := Fit(fitField); return err }},
		{"short scaling", "scaling", func() error { _, err := Collapse(collapseShort); return err }},
		{"zeeman no fields", "field", func() error { _, err := Zeeman(ZeemanData{}); return err }},
		{"zeeman fewer spectra", "spectra", func() error { _, err := Zeeman(zeemanFewer); return err }},
		{"zeeman decreasing", "field[2]", func() error { _, err := Zeeman(zeemanDown); return err }},
		{"zeeman no levels", "spectra[2].levels", func() error { _, err := Zeeman(zeemanEmpty); return err }},
	} {
		err := tc.draw()
		var de *DataError
		if !errors.As(err, &de) {
			t.Errorf("%s: error %v, want a *DataError", tc.name, err)
			continue
		}
		if de.Field != tc.field || !strings.HasPrefix(err.Error(), tc.field+": ") {
			t.Errorf("%s: error %q names the field %q, want %q", tc.name, err, de.Field, tc.field)
		}
	}
	if got := GroundCrossings(zeemanFewer); got != nil {
		t.Errorf("GroundCrossings of mismatched data = %v, want nil", got)
	}
}

// TestSmallResults draws results with a single point or constant values,
// which give the axes no span of their own.
func TestSmallResults(t *testing.T) {
	one := &frustumv1.MagnetizationResult{ClusterName: "one", Field: []float64{5}, Saturation: 1,
		Curves: []*frustumv1.MagnetizationCurve{{Temperature: 2, Magnetization: []float64{0.5}}}}
	flat := sampleThermo()
	for i := range flat.SpecificHeat {
		flat.SpecificHeat[i], flat.Susceptibility[i] = 0, 0
	}
	single := &frustumv1.ThermoResult{Temperature: []float64{3}, Energy: []float64{-1}, SpecificHeat: []float64{0.2},
		Entropy: []float64{0.1}, Magnetization: []float64{0}, Susceptibility: []float64{0.3}}
	fit := sampleFit()
	fit.Sigma = nil
	for _, m := range fit.Models {
		m.Residual = nil
	}
	point := &frustumv1.FitResult{Temperature: []float64{2}, Field: []float64{1}, Value: []float64{0.3},
		Models: []*frustumv1.ModelFit{{Name: "m", Curve: []float64{0.31}}}}
	for _, tc := range []struct {
		name  string
		build func() (*Figure, error)
	}{
		{"one field", func() (*Figure, error) { return Magnetization(one, MagnetizationOptions{Polarization: true}) }},
		{"flat thermo", func() (*Figure, error) { return Thermo(flat) }},
		{"one temperature", func() (*Figure, error) { return Thermo(single) }},
		{"one Zeeman field", func() (*Figure, error) { return Zeeman(dimerSpectra(10, []float64{3})) }},
		{"fit without sigma", func() (*Figure, error) { return Fit(fit) }},
		{"fit of one point", func() (*Figure, error) { return Fit(point) }},
		{"collapse of one point", func() (*Figure, error) { return Collapse(point) }},
	} {
		fig, err := tc.build()
		if err != nil {
			t.Errorf("%s: %v", tc.name, err)
			continue
		}
		var b bytes.Buffer
		if err := fig.Encode(&b, PNG, 8, 6); err != nil || b.Len() == 0 {
			t.Errorf("%s: Encode: %v (%d bytes)", tc.name, err, b.Len())
		}
	}
	// Without sigma the residuals are y - model, computed from the curves.
	fig, err := Fit(fit)
	if err != nil {
		t.Fatal(err)
	}
	if got := fig.Panels[1].Plot.Y.Label.Text; got != "y − model" {
		t.Errorf("residual axis without sigma: %q", got)
	}
}
