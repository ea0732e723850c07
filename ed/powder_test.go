package ed_test

// Powder averages (MagnetizationRequest.Powder).

import (
	"context"
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"

	"frustum/cluster"
	"frustum/ed"
)

func powder(t *testing.T, m *cluster.Model, n int, temps, fields []float64, chi bool) *ed.MagnetizationResult {
	t.Helper()
	r, err := ed.Magnetization(context.Background(), m,
		ed.MagnetizationRequest{Temperatures: temps, Fields: fields, Powder: n, Susceptibility: chi}, ed.Options{})
	if err != nil {
		t.Fatalf("powder Magnetization(%s, %d): %v", m.Name, n, err)
	}
	if r.Powder == nil {
		t.Fatalf("powder Magnetization(%s, %d): no PowderReport", m.Name, n)
	}
	if !strings.Contains(r.Report.Route, "powder average over ") {
		t.Errorf("route %q does not say it is a powder average", r.Report.Route)
	}
	return r
}

// tensorSpin is one spin 1/2 with the g tensor diag(gx, gy, gz).
func tensorSpin(gx, gy, gz float64) *cluster.Model {
	return &cluster.Model{Name: "spin 1/2 with a g tensor", Sites: []cluster.Site{
		{Label: "x", TwoS: 1, G: [9]float64{gx, 0, 0, 0, gy, 0, 0, 0, gz}, Group: "only"}}}
}

// freeSpinAlong is M, chi and the saturation of a free spin 1/2 along n for
// the effective g = |g^T n| (derivation: H = -(mu_B/k_B) B n . g S =
// -(mu_B/k_B) B |g^T n| S_u with u the unit vector along g^T n, so
// M = (|g^T n|/2) tanh(y/2), y = |g^T n| (mu_B/k_B) B / T, and
// chi = dM/dB = (|g^T n|^2 (mu_B/k_B) / (4T)) sech^2(y/2)).
func freeSpinAlong(geff, B, T float64) (m, chi, sat float64) {
	y := geff * ed.MuBOverKB * B / T
	c := 1 / math.Cosh(y/2)
	return geff / 2 * math.Tanh(y/2), geff * geff * ed.MuBOverKB / (4 * T) * c * c, geff / 2
}

// Rotational invariance (derivation: with an SU(2)-invariant H0 and scalar g
// values a rotation of every spin turns H(B n) into H(B n')): the powder
// average of an isotropic cluster is its curve along any one direction, with
// one g or two, and only one direction is evaluated.
func TestPowderIsotropicEqualsOneDirection(t *testing.T) {
	temps, fields := []float64{0, 1.5, 12}, []float64{0, 2, 9, 30}
	for _, gc := range []float64{2.1, 2.35} {
		m := cluster.DefectMultimer(cluster.MultimerParams{JPlanar: 40, JDefect: 6, GHost: 2.1, GCentre: gc})
		one := magnetizationChi(t, m, [3]float64{0.3, -0.2, 0.9}, temps, fields)
		for _, n := range []int{6, 26, 200} {
			p := powder(t, m, n, temps, fields, true)
			if p.Powder.Evaluated != 1 || !strings.Contains(p.Powder.Symmetry, "isotropic") || p.Powder.Deviation != 0 {
				t.Errorf("g_c = %g, N = %d: report %+v, want 1 isotropic direction and no deviation", gc, n, p.Powder)
			}
			expect(t, "isotropic saturation", p.Saturation, one.Saturation, 1e-12)
			for g, v := range one.GroupSaturation {
				expect(t, "isotropic group saturation "+g, p.GroupSaturation[g], v, 1e-12)
			}
			for ti := range temps {
				for bi := range fields {
					expect(t, "isotropic powder M", p.Curves[ti].Magnetization[bi], one.Curves[ti].Magnetization[bi], 1e-12)
					expect(t, "isotropic powder chi", p.Curves[ti].Susceptibility[bi], one.Curves[ti].Susceptibility[bi], 1e-12*math.Max(1, one.Curves[ti].Susceptibility[bi]))
					for g, v := range one.Curves[ti].Groups {
						expect(t, "isotropic powder group "+g, p.Curves[ti].Groups[g][bi], v[bi], 1e-12)
					}
				}
			}
		}
	}
}

// Reference library: an axial g tensor diag(g_perp, g_perp, g_par) on a free
// spin 1/2, whose M along n depends on cos(theta) alone through
// g(theta) = sqrt(g_par^2 cos^2 + g_perp^2 sin^2) (freeSpinAlong); the powder
// average is int_0^1 d(cos theta) of it, evaluated with gonum's quad.Fixed on
// 400 Legendre points. The rule's error stays within its own reported
// Deviation, and from 50 points on M is within 1e-6 of saturation and chi
// within 1e-6 of its Curie scale g_par^2 (mu_B/k_B)/(4T) at moderate y; the uniaxial symmetry leaves 7 + 3 orbits of Lebedev 50 and 38 (and 3 of
// the 6x12 product rule plus 6 of Lebedev 38, its coarser rule).
func TestPowderAxialFreeSpin(t *testing.T) {
	const gPerp, gPar = 1.9, 2.35
	m := tensorSpin(gPerp, gPerp, gPar)
	temps, fields := []float64{0.8, 3}, []float64{0.5, 2, 5}
	gOf := func(c float64) float64 { return math.Sqrt(gPar*gPar*c*c + gPerp*gPerp*(1-c*c)) }
	ref := func(f func(geff float64) float64) float64 {
		return quad.Fixed(func(c float64) float64 { return f(gOf(c)) }, 0, 1, 400, quad.Legendre{}, 0)
	}
	for _, c := range []struct {
		n, evaluated int
	}{{14, 0}, {26, 0}, {38, 0}, {50, 10}, {72, 9}, {200, 0}} {
		p := powder(t, m, c.n, temps, fields, true)
		if c.evaluated > 0 && p.Powder.Evaluated != c.evaluated {
			t.Errorf("axial spin, %s: %d directions evaluated (%s), want %d", p.Powder.Rule, p.Powder.Evaluated, p.Powder.Symmetry, c.evaluated)
		}
		satRef := ref(func(g float64) float64 { return g / 2 })
		expect(t, p.Powder.Rule+" saturation", p.Saturation, satRef, math.Max(p.Powder.Deviation, 1e-12))
		expect(t, p.Powder.Rule+" group saturation", p.GroupSaturation["only"], p.Saturation, 1e-14)
		worst := 0.0
		for ti, T := range temps {
			for bi, B := range fields {
				mRef := ref(func(g float64) float64 { x, _, _ := freeSpinAlong(g, B, T); return x })
				chiRef := ref(func(g float64) float64 { _, x, _ := freeSpinAlong(g, B, T); return x })
				got := p.Curves[ti].Magnetization[bi]
				worst = math.Max(worst, math.Abs(got-mRef))
				expect(t, p.Powder.Rule+" M within its deviation", got, mRef, p.Powder.Deviation+1e-13)
				expect(t, p.Powder.Rule+" group M", p.Curves[ti].Groups["only"][bi], got, 1e-14)
				if c.n >= 50 {
					expect(t, p.Powder.Rule+" M to 1e-6 of saturation", got, mRef, 1e-6*satRef)
					curie := gPar * gPar * ed.MuBOverKB / (4 * T) // the zero-field scale of chi
					expect(t, p.Powder.Rule+" chi to 1e-6 of the Curie scale", p.Curves[ti].Susceptibility[bi], chiRef, 1e-6*curie)
				}
			}
		}
		if p.Powder.Deviation <= 0 || worst > p.Powder.Deviation {
			t.Errorf("%s: error %.3g against the reference, reported deviation %.3g", p.Powder.Rule, worst, p.Powder.Deviation)
		}
	}
}

// Reference library: a rhombic g tensor diag(1.8, 2.05, 2.4) on a free spin
// 1/2 (freeSpinAlong with |g^T n|), averaged over the octant
// (2/pi) int_0^1 d(cos theta) int_0^{pi/2} d(phi) by nested gonum quad.Fixed
// Legendre rules (160 x 160 points). The D2 symmetry leaves 10 + 6 orbits of
// Lebedev 50 and 38.
func TestPowderRhombicFreeSpin(t *testing.T) {
	g := [3]float64{1.8, 2.05, 2.4}
	m := tensorSpin(g[0], g[1], g[2])
	temps, fields := []float64{1}, []float64{1, 4}
	ref := func(f func(geff float64) float64) float64 {
		return 2 / math.Pi * quad.Fixed(func(c float64) float64 {
			s := math.Sqrt(1 - c*c)
			return quad.Fixed(func(phi float64) float64 {
				n := [3]float64{s * math.Cos(phi), s * math.Sin(phi), c}
				return f(math.Sqrt(g[0]*g[0]*n[0]*n[0] + g[1]*g[1]*n[1]*n[1] + g[2]*g[2]*n[2]*n[2]))
			}, 0, math.Pi/2, 160, quad.Legendre{}, 0)
		}, 0, 1, 160, quad.Legendre{}, 0)
	}
	for _, n := range []int{26, 50, 200} {
		p := powder(t, m, n, temps, fields, false)
		if n == 50 && p.Powder.Evaluated != 16 {
			t.Errorf("rhombic spin, Lebedev 50: %d directions evaluated (%s), want 16", p.Powder.Evaluated, p.Powder.Symmetry)
		}
		expect(t, p.Powder.Rule+" rhombic saturation", p.Saturation, ref(func(x float64) float64 { return x / 2 }), p.Powder.Deviation+1e-12)
		for bi, B := range fields {
			want := ref(func(x float64) float64 { v, _, _ := freeSpinAlong(x, B, temps[0]); return v })
			expect(t, p.Powder.Rule+" rhombic M, B = "+formatG(B), p.Curves[0].Magnetization[bi], want, p.Powder.Deviation+1e-13)
			if n >= 50 {
				expect(t, p.Powder.Rule+" rhombic M to 1e-6 of saturation", p.Curves[0].Magnetization[bi], want, 1e-6*p.Saturation)
			}
		}
	}
}

// Invariant, no source: the plan of a powder average is what the run does;
// the 6-point rule has no convergence estimate and says so; bad requests
// name their field.
func TestPowderPlanAndRequests(t *testing.T) {
	m := anisotropicCluster()
	req := ed.MagnetizationRequest{Temperatures: []float64{0, 2}, Fields: []float64{0, 1, 6}, Powder: 14, Susceptibility: true}
	var stages []string
	var last [2]int
	opt := ed.Options{Progress: func(stage string, done, total int) {
		if stage == "powder directions" {
			last = [2]int{done, total}
		}
		stages = append(stages, stage)
	}}
	plan, err := ed.PlanMagnetization(m, req, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	run, err := ed.Magnetization(context.Background(), m, req, opt)
	if err != nil {
		t.Fatal(err)
	}
	if run.Report.Diagonalizations == 0 {
		t.Errorf("no diagonalizations counted")
	}
	r := run.Report
	r.Diagonalizations, r.Warnings, plan.Warnings = 0, nil, nil
	r.Eigenvectors, r.EigenvectorsSkipped, r.NeglectedWeight = 0, 0, 0 // counts of the run
	if !reflect.DeepEqual(plan, r) {
		t.Errorf("powder plan %+v\nrun %+v", plan, r)
	}
	if !strings.Contains(plan.Route, "powder average over 14 field directions") {
		t.Errorf("route %q", plan.Route)
	}
	if last != [2]int{run.Powder.Evaluated, run.Powder.Evaluated} {
		t.Errorf("last powder progress %v, want %d of %d (stages %v)", last, run.Powder.Evaluated, run.Powder.Evaluated, stages)
	}
	// Time reversal only (no symmetry): 7 of Lebedev 14's pairs, and 3 more
	// pairs of Lebedev 6... which are all points of Lebedev 14.
	if run.Powder.Evaluated != 7 || run.Powder.CoarseRule != "Lebedev 6" || run.Powder.CoarseDirections != 6 {
		t.Errorf("powder report %+v: want 7 evaluated, coarse Lebedev 6", run.Powder)
	}
	if run.Direction != [3]float64{} {
		t.Errorf("powder result direction %v, want zero", run.Direction)
	}
	for _, c := range run.Curves {
		if c.Magnetization[0] != 0 {
			t.Errorf("powder M at B = 0 is %g", c.Magnetization[0])
		}
	}

	six, err := ed.Magnetization(context.Background(), m, ed.MagnetizationRequest{Temperatures: []float64{1}, Fields: []float64{1}, Powder: 3}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if six.Powder.Rule != "Lebedev 6" || six.Powder.CoarseRule != "none" || len(six.Report.Warnings) == 0 ||
		!strings.Contains(strings.Join(six.Report.Warnings, "\n"), "no convergence estimate") {
		t.Errorf("6-point powder: report %+v, warnings %q", six.Powder, six.Report.Warnings)
	}
	// A coarse average far from converged is flagged.
	hot, err := ed.Magnetization(context.Background(), tensorSpin(1, 1, 3), ed.MagnetizationRequest{Temperatures: []float64{0.1}, Fields: []float64{2}, Powder: 14}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if hot.Powder.RelativeDeviation <= 1e-3 || !strings.Contains(strings.Join(hot.Report.Warnings, "\n"), "unconverged") {
		t.Errorf("strongly anisotropic spin at low T on 14 points: report %+v, warnings %q", hot.Powder, hot.Report.Warnings)
	}

	for _, c := range []struct {
		req   ed.MagnetizationRequest
		field string
	}{
		{ed.MagnetizationRequest{Temperatures: []float64{1}, Fields: []float64{1}, Powder: 26, Direction: [3]float64{0, 0, 1}}, "direction"},
		{ed.MagnetizationRequest{Temperatures: []float64{1}, Fields: []float64{1}, Powder: -1}, "powder"},
		{ed.MagnetizationRequest{Temperatures: []float64{1}, Fields: []float64{1}, Powder: 100001}, "powder"},
	} {
		_, err := ed.Magnetization(context.Background(), m, c.req, ed.Options{})
		var re *ed.RequestError
		if !errors.As(err, &re) || re.Field != c.field {
			t.Errorf("powder %d, direction %v: error %v, want a RequestError on %q", c.req.Powder, c.req.Direction, err, c.field)
		}
		if _, err := ed.PlanMagnetization(m, c.req, ed.Options{}); !errors.As(err, &re) || re.Field != c.field {
			t.Errorf("plan, powder %d: error %v, want a RequestError on %q", c.req.Powder, err, c.field)
		}
	}
	var le *ed.LimitError
	if _, err := ed.PlanMagnetization(m, req, ed.Options{Limits: ed.Limits{MaxMemory: 1 << 10}}); !errors.As(err, &le) {
		t.Errorf("powder plan over the memory limit: %v, want a LimitError", err)
	}
}

// A powder average by finite-temperature Lanczos (every direction its own
// FTLM run, since alternate sites carry an axial g tensor) against the same
// average by full diagonalization (the dense route, an independent
// construction): within 4 of the reported errors at every point (common
// practice, no source), the errors present and positive. The averaged
// error is sum_k |w_k| sigma_k, a bound whatever the correlation between
// the directions (Minkowski's inequality), so the check is conservative.
func TestPowderFTLMCarriesErrors(t *testing.T) {
	m, err := cluster.Ring(8, cluster.ChainParams{J1: 1})
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < len(m.Sites); i += 2 {
		m.Sites[i].G = [9]float64{1.9, 0, 0, 0, 1.9, 0, 0, 0, 2.4}
	}
	temps, fields := []float64{0.3, 2}, []float64{0.5, 3}
	req := ed.MagnetizationRequest{Temperatures: temps, Fields: fields, Powder: 6, Susceptibility: true}
	full, err := ed.Magnetization(context.Background(), m, req, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	req.Method, req.FTLM = ed.MethodFTLM, ed.FTLMOptions{Vectors: 8, Steps: 40, ExactBelow: -1, Seed: 3}
	ft, err := ed.Magnetization(context.Background(), m, req, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if ft.Powder == nil || ft.Powder.Evaluated < 2 {
		t.Fatalf("powder report %+v", ft.Powder)
	}
	for ti := range temps {
		f, c := full.Curves[ti], ft.Curves[ti]
		if len(c.MagnetizationError) != len(fields) || len(c.SusceptibilityError) != len(fields) {
			t.Fatalf("T = %g: errors %v, %v", temps[ti], c.MagnetizationError, c.SusceptibilityError)
		}
		for bi := range fields {
			for _, q := range []struct {
				name           string
				got, err, want float64
			}{
				{"M", c.Magnetization[bi], c.MagnetizationError[bi], f.Magnetization[bi]},
				{"chi", c.Susceptibility[bi], c.SusceptibilityError[bi], f.Susceptibility[bi]},
			} {
				if !(q.err > 0) || math.Abs(q.got-q.want) > 4*q.err {
					t.Errorf("T = %g, B = %g: %s = %.6g +- %.2g, full %.6g", temps[ti], fields[bi], q.name, q.got, q.err, q.want)
				}
			}
		}
	}
}
