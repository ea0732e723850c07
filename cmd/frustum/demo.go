package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"google.golang.org/protobuf/proto"

	"frustum/cluster"
	"frustum/compare"
	"frustum/ed"
	"frustum/figure"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// demoCompound is the invented compound of the demo scenario. It is not a
// real material; its numbers are chosen to look like a frustrated copper
// magnet with a paramagnetic defect.
const demoCompound = "frustumite"

// demoParams define the demo cluster; testdata/demo-multimer.json is the same
// cluster (TestDemoFileMatchesBuilder checks it).
var demoParams = cluster.MultimerParams{
	CentreSpin: 0.5,
	HostSpin:   0.5,
	JPlanar:    180, // K, host exchange in each triangle
	JDefect:    12,  // K, centre to each of the six host spins
	GHost:      2.1,
	GCentre:    2.2,
	DMPlanar:   0,
	Name:       "frustumite defect heptamer (invented compound)",
}

// The demo's grids: the low-energy manifold (both triangles in their S = 1/2
// doublets: 4 x 4 x 2 = 32 states), three temperatures and 0 to 15 T.
var (
	demoLevels = 32
	// The second spectrum: the lowest states at 12 T along z.
	demoFieldSpectrum = 12.0
	demoFieldLevels   = 16
	demoTemps         = []float64{2, 5, 10}
	demoFields        = []float64{0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15}
)

// demoModel returns the demo cluster.
func demoModel() *cluster.Model { return cluster.DefectMultimer(demoParams) }

func runDemo(ctx context.Context, cmd *command, args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet(cmd, "[--plots DIR] [--max-memory SIZE]",
		`Runs the demo scenario: `+demoCompound+`, an INVENTED compound (not a real
material), whose host is built of spin-1/2 triangles with a strong
antiferromagnetic exchange, and whose magnetic defect is a spin-1/2 centre
between a triangle above and a triangle below, coupled weakly to all six.
Prints the low-energy spectrum at zero field and the magnetization of the
cluster and of the defect centre at 2, 5 and 10 K from 0 to 15 T, beside a
free spin-1/2. The same cluster is in testdata/demo-multimer.json.

Then it sets the cluster against INVENTED measurements of the compound (the
field-induced change of its thermal conductivity at 2, 4 and 8 K, made from a
hidden model plus noise; the same data are in testdata/demo-data.csv): the
heptamer with its defect exchange and centre g fitted, against free spins
1/2 and 1, with the model table and the best parameters. Last it draws the
magnetization curves, the level diagram against field, the data against the
fits with residuals, and the scaling collapse into the folder --plots (a new
temporary folder by default), and names it.`,
		`frustum demo
go run ./cmd/frustum demo`)
	var maxMemory int64
	var plotDir string
	fs.stringFlag(&plotDir, "plots", "write the demo's pictures into `DIR` (created if needed; default a new temporary folder)")
	fs.funcFlag("max-memory", "refuse tasks that need more memory than `SIZE` (default 4GiB)", memoryFlag(&maxMemory))
	if err := fs.parse(args, stdout); err != nil {
		return err
	}
	opt := ed.Options{Limits: ed.Limits{MaxMemory: maxMemory}, Progress: progressTo(stderr)}
	c := demoModel().ToProto()

	p := demoParams
	fmt.Fprintf(stdout, `Frustum demo: %s, an INVENTED compound (not a real material)

A spin-1/2 defect "c" (group "impurity", g = %.2f) sits between two triangles
of spin-1/2 host spins, "t1 t2 t3" above (group "top") and "b1 b2 b3" below
(group "bottom"), g = %.2f. Host exchange J_planar = %g K inside each
triangle; the defect couples to all six host spins with J_defect = %g K.
All numbers are invented. The cluster file is testdata/demo-multimer.json.

`, demoCompound, p.GCentre, p.GHost, p.JPlanar, p.JDefect)

	spec, err := tasks.Spectrum(ctx, c, &frustumv1.SpectrumParameters{}, opt)
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "Low-energy spectrum at zero field (the lowest %d of %d states)\n\n", demoLevels, spec.GetTotalStates())
	if err := demoLevelTable(stdout, spec, demoLevels); err != nil {
		return err
	}
	fmt.Fprintf(stdout, `
  Each triangle's ground state is two spin-1/2 doublets (the frustration
  leaves its chirality free), so every level above is at least 4-fold
  degenerate beyond its spin multiplet.

`)
	inField, err := tasks.Spectrum(ctx, c, &frustumv1.SpectrumParameters{Field: []float64{0, 0, demoFieldSpectrum}}, opt)
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "The lowest %d states at B = %g T along z, near the crossing of the ground level\n\n", demoFieldLevels, demoFieldSpectrum)
	if err := demoLevelTable(stdout, inField, demoFieldLevels); err != nil {
		return err
	}
	fmt.Fprintf(stdout, `
  Sz and S are shown where they are good quantum numbers ("-" where not):
  in a field the different g values of centre and host mix total-spin
  multiplets, and only Sz is left.

`)

	mag, err := tasks.Magnetization(ctx, c, &frustumv1.MagnetizationParameters{
		Temperatures: demoTemps, Fields: demoFields, Direction: []float64{0, 0, 1},
	}, opt)
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "Magnetization along z (mu_B per cluster): the whole cluster, the defect\ncentre alone (group \"impurity\"), and a free spin-1/2 with g = %.2f\n\n", p.GCentre)
	if err := demoMagnetizationTable(stdout, mag, p.GCentre); err != nil {
		return err
	}
	if msg := signChange(mag); msg != "" {
		fmt.Fprintf(stdout, "\n  %s\n", msg)
	}
	fmt.Fprintf(stdout, `  Unlike the free spin, the coupled centre does not follow a function of
  g mu_B B / k_B T alone: that difference is what tells a cluster model
  from free paramagnetic defects in measured field dependence.
`)
	if err := report(stdout, mag.GetEngine()); err != nil {
		return err
	}
	fit, err := demoFit(ctx, stdout, opt)
	if err != nil {
		return err
	}
	dir, err := demoPlots(ctx, c, mag, fit, plotDir, opt)
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, `
Pictures in %s:
  magnetization.png  M(B) of the cluster and of its groups at 2, 5 and 10 K
  zeeman.png         the lowest levels against B along z, ground-state crossings marked
  fit.png            the invented data against every model, residuals below
  collapse.png       the data against x = g mu_B B / (2 k_B T): free spins would fall on one curve

Next:
  frustum spectrum      --cluster testdata/demo-multimer.json --levels 32 --field 0,0,10
  frustum thermo        --cluster testdata/demo-multimer.json --temps log:0.5:300:60
  frustum magnetization --cluster testdata/demo-multimer.json --temps 2,5,10 --fields 0:15:61 --powder 26
  frustum fit --data testdata/demo-data.csv --model testdata/demo-multimer.json \
      --vary 'Jd=%s:0:60' --vary 'gc=sites[0].g:1.8:2.6'
  frustum plot --input RESULT.json --out RESULT.png
`, dir, demoDefectBondPaths)
	for _, w := range append(spec.GetEngine().GetWarnings(), mag.GetEngine().GetWarnings()...) {
		fmt.Fprintf(stderr, "frustum: warning: %s\n", oneLine(w))
	}
	return nil
}

// demoDefectBondPaths are the six centre-to-host bonds of the demo
// heptamer (bonds 6 to 11 of testdata/demo-multimer.json), tied to one
// fitted exchange.
const demoDefectBondPaths = "bonds[6].exchange,bonds[7].exchange,bonds[8].exchange,bonds[9].exchange,bonds[10].exchange,bonds[11].exchange"

// demoFit fits the demo cluster and the free spins to the invented data
// and prints the model table.
func demoFit(ctx context.Context, stdout io.Writer, opt ed.Options) (*frustumv1.FitResult, error) {
	raw, err := makeDemoData()
	if err != nil {
		return nil, err
	}
	d, err := compare.ReadCSV(bytes.NewReader(raw), "testdata/demo-data.csv")
	if err != nil {
		return nil, err
	}
	h := demoHidden
	fmt.Fprintf(stdout, `
Measurements (INVENTED): the field-induced relative change of the thermal
conductivity of %s, in percent, at %s K from %g to %g T (%d points with
their sigma; testdata/demo-data.csv). A common reading: the field polarizes
the defects and removes the spin fluctuations that scatter phonons, so the
change follows the defects' polarization. Linked as y = a M/M_sat + c, the
heptamer is fitted with its defect exchange Jd (the six centre bonds share
one value) and the centre's g varied; free spins 1/2 and 1 (Brillouin, g
fitted) are the baselines.

`, demoCompound, joinNumbers(h.temps), h.fieldStep, h.fieldMax, d.Len())
	vary := []*frustumv1.FitParameter{
		{Name: "Jd", Paths: strings.Split(demoDefectBondPaths, ","), Min: proto.Float64(0), Max: proto.Float64(60)},
		{Name: "gc", Paths: []string{"sites[0].g"}, Min: proto.Float64(1.8), Max: proto.Float64(2.6)},
	}
	fit, err := tasks.Fit(ctx, &frustumv1.FitParameters{Data: tasks.DataToProto(d), Models: []*frustumv1.Cluster{demoModel().ToProto()},
		Observable: "polarization", Vary: vary}, opt)
	if err != nil {
		return nil, err
	}
	if err := fitTable(stdout, fit); err != nil {
		return nil, err
	}
	// Set the fit against the hidden model and the baselines.
	m := fit.GetModels()[0]
	fmt.Fprintf(stdout, "\n  The invented data were made with Jd = %g K and g = %g for the centre:\n", h.params.JDefect, h.params.GCentre)
	for i, want := range []float64{h.params.JDefect, h.params.GCentre} {
		if i < len(m.GetParameters()) {
			p := m.GetParameters()[i]
			fmt.Fprintf(stdout, "  the fit's %s lies %.1f of its standard errors from the hidden value.\n", p.GetName(), math.Abs(p.GetValue()-want)/p.GetError())
		}
	}
	for _, b := range fit.GetModels()[1:] {
		g := 0.0
		if len(b.GetParameters()) > 0 {
			g = b.GetParameters()[0].GetValue()
		}
		fmt.Fprintf(stdout, "  The %s needs g = %.2f to follow the data and still misses by dAIC = %.0f.\n", b.GetName(), g, b.GetAic()-m.GetAic())
	}
	return fit, nil
}

func joinNumbers(v []float64) string {
	var parts []string
	for _, x := range v {
		parts = append(parts, num(x))
	}
	return strings.Join(parts, ", ")
}

// demoPlots draws the demo's pictures into dir (a new temporary folder when
// dir is empty) and returns the folder.
func demoPlots(ctx context.Context, c *frustumv1.Cluster, mag *frustumv1.MagnetizationResult, fit *frustumv1.FitResult, dir string, opt ed.Options) (string, error) {
	var err error
	if dir == "" {
		dir, err = os.MkdirTemp("", "frustum-demo-")
	} else {
		err = os.MkdirAll(dir, 0o755)
	}
	if err != nil {
		return "", fmt.Errorf("--plots: %w", err)
	}
	zd := figure.ZeemanData{Lowest: demoFieldLevels}
	for i := 0; i <= 60; i++ {
		B := 0.25 * float64(i)
		sp, err := tasks.Spectrum(ctx, c, &frustumv1.SpectrumParameters{Field: []float64{0, 0, B}, Levels: int32(demoFieldLevels)}, ed.Options{Limits: opt.Limits})
		if err != nil {
			return "", err
		}
		zd.Field, zd.Spectra = append(zd.Field, B), append(zd.Spectra, sp)
	}
	figs := []struct {
		name string
		make func() (*figure.Figure, error)
	}{
		{"magnetization.png", func() (*figure.Figure, error) {
			return figure.Magnetization(mag, figure.MagnetizationOptions{Groups: true})
		}},
		{"zeeman.png", func() (*figure.Figure, error) { return figure.Zeeman(zd) }},
		{"fit.png", func() (*figure.Figure, error) { return figure.Fit(fit) }},
		{"collapse.png", func() (*figure.Figure, error) { return figure.Collapse(fit) }},
	}
	for _, f := range figs {
		fig, err := f.make()
		if err != nil {
			return "", fmt.Errorf("%s: %w", f.name, err)
		}
		if err := figure.Save(fig, filepath.Join(dir, f.name), 0, 0); err != nil {
			return "", err
		}
	}
	return dir, nil
}

// demoLevelTable prints the levels of r that hold its lowest n states.
func demoLevelTable(w io.Writer, r *frustumv1.SpectrumResult, n int) error {
	t := &table{header: []string{"E (K)", "E - E0 (K)", "degeneracy", "Sz", "S"}}
	e0 := 0.0
	if len(r.GetLevels()) > 0 {
		e0 = r.GetLevels()[0].GetEnergy()
	}
	shown := 0
	for _, l := range r.GetLevels() {
		if shown >= n {
			break
		}
		shown += int(l.GetDegeneracy())
		sz, s := "-", "-"
		if l.Sz != nil {
			sz = half(l.GetSz())
		}
		if l.TotalSpin != nil {
			s = half(l.GetTotalSpin())
		}
		t.add(fixed(l.GetEnergy(), 4), fixed(l.GetEnergy()-e0, 4), fmt.Sprint(l.GetDegeneracy()), sz, s)
	}
	return t.write(w)
}

// freeSpinHalf is the moment g S B_S(x) of a free spin-1/2 along the field,
// in mu_B: (g/2) tanh(g mu_B B / (2 k_B T)); at T = 0 its sign.
func freeSpinHalf(g, B, T float64) float64 {
	if T == 0 {
		switch {
		case B > 0:
			return g / 2
		case B < 0:
			return -g / 2
		}
		return 0
	}
	return g / 2 * math.Tanh(g*ed.MuBOverKB*B/(2*T))
}

// demoMagnetizationTable prints B, then for each temperature M of the
// cluster, of the impurity group and of a free spin, under a two-row header.
func demoMagnetizationTable(w io.Writer, r *frustumv1.MagnetizationResult, g float64) error {
	curves := r.GetCurves()
	n := len(curves)
	header := []string{"B (T)"}
	for range 3 {
		for _, c := range curves {
			header = append(header, sig(c.GetTemperature(), 4)+" K")
		}
	}
	t := &table{header: header}
	for i, B := range r.GetField() {
		row := []string{sig(B, 6)}
		for _, c := range curves {
			row = append(row, fixed(at(c.GetMagnetization(), i), 4))
		}
		for _, c := range curves {
			row = append(row, fixed(at(c.GetGroups()["impurity"].GetValues(), i), 4))
		}
		for _, c := range curves {
			row = append(row, fixed(freeSpinHalf(g, B, c.GetTemperature()), 4))
		}
		t.add(row...)
	}
	// The group titles above the temperature columns.
	var widths []int
	for j := range header {
		wd := len(header[j])
		for _, row := range t.rows {
			wd = max(wd, len(row[j]))
		}
		widths = append(widths, wd)
	}
	titles := []string{"cluster M (mu_B)", "impurity M (mu_B)", "free spin-1/2 (mu_B)"}
	line := "   " + spaces(widths[0])
	for k, title := range titles {
		span := 0
		for j := 1 + k*n; j < 1+(k+1)*n; j++ {
			span += 2 + widths[j]
		}
		line += "  " + center(title, span-2)
	}
	fmt.Fprintln(w, strings.TrimRight(line, " "))
	return t.write(w)
}

func spaces(n int) string {
	if n <= 0 {
		return ""
	}
	return fmt.Sprintf("%*s", n, "")
}

func center(s string, width int) string {
	if len(s) >= width {
		return s
	}
	left := (width - len(s)) / 2
	return spaces(left) + s + spaces(width-len(s)-left)
}

// signChange describes where the impurity moment at the lowest temperature
// changes sign, if it does.
func signChange(r *frustumv1.MagnetizationResult) string {
	if len(r.GetCurves()) == 0 {
		return ""
	}
	c := r.GetCurves()[0]
	v := c.GetGroups()["impurity"].GetValues()
	B := r.GetField()
	for i := 1; i < len(v) && i < len(B); i++ {
		if B[i-1] > 0 && v[i-1] < 0 && v[i] > 0 {
			return fmt.Sprintf("At %s K the defect centre points against the field at low field (it is\n  locked antiparallel to the two triangles) and turns over between %s and %s T,\n  as the field brings down the levels of higher total spin.",
				sig(c.GetTemperature(), 4), sig(B[i-1], 4), sig(B[i], 4))
		}
	}
	return ""
}
