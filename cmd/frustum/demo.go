package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"strings"

	"frustum/cluster"
	"frustum/ed"
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
	fs := newFlagSet(cmd, "[--max-memory SIZE]",
		`Runs the demo scenario: `+demoCompound+`, an INVENTED compound (not a real
material), whose host is built of spin-1/2 triangles with a strong
antiferromagnetic exchange, and whose magnetic defect is a spin-1/2 centre
between a triangle above and a triangle below, coupled weakly to all six.
Prints the low-energy spectrum at zero field and the magnetization of the
cluster and of the defect centre at 2, 5 and 10 K from 0 to 15 T, beside a
free spin-1/2. The same cluster is in testdata/demo-multimer.json.`,
		`frustum demo
go run ./cmd/frustum demo`)
	var maxMemory int64
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
	fmt.Fprintf(stdout, `
Next:
  frustum spectrum      --cluster testdata/demo-multimer.json --levels 32 --field 0,0,10
  frustum thermo        --cluster testdata/demo-multimer.json --temps log:0.5:300:60
  frustum magnetization --cluster testdata/demo-multimer.json --temps 2,5,10 --fields 0:15:61 --csv
`)
	for _, w := range append(spec.GetEngine().GetWarnings(), mag.GetEngine().GetWarnings()...) {
		fmt.Fprintf(stderr, "frustum: warning: %s\n", oneLine(w))
	}
	return nil
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
