package ed_test

// The susceptibility of the magnetization task, chi = dM/dB along the field
// (MagnetizationRequest.Susceptibility), and the group saturations.

import (
	"context"
	"math"
	"strings"
	"testing"

	"frustum/cluster"
	"frustum/ed"
)

func magnetizationChi(t *testing.T, m *cluster.Model, dir [3]float64, temps, fields []float64) *ed.MagnetizationResult {
	t.Helper()
	r, err := ed.Magnetization(context.Background(), m,
		ed.MagnetizationRequest{Temperatures: temps, Fields: fields, Direction: dir, Susceptibility: true}, ed.Options{})
	if err != nil {
		t.Fatalf("Magnetization(%s): %v", m.Name, err)
	}
	for _, c := range r.Curves {
		if len(c.Susceptibility) != len(fields) {
			t.Fatalf("Magnetization(%s): %d susceptibilities for %d fields", m.Name, len(c.Susceptibility), len(fields))
		}
	}
	return r
}

// unitOf returns v / |v|.
func unitOf(v [3]float64) [3]float64 {
	n := math.Sqrt(v[0]*v[0] + v[1]*v[1] + v[2]*v[2])
	return [3]float64{v[0] / n, v[1] / n, v[2] / n}
}

// expectChiMatchesThermo compares Magnetization's chi at every non-zero field
// with Thermo's at the same field vector (relative 1e-10 of the largest |chi|).
func expectChiMatchesThermo(t *testing.T, m *cluster.Model, dir [3]float64, temps, fields []float64, route string) {
	t.Helper()
	r := magnetizationChi(t, m, dir, temps, fields)
	if !strings.Contains(r.Report.Route, route) {
		t.Errorf("%s: route %q does not say %q", m.Name, r.Report.Route, route)
	}
	n := unitOf(dir)
	for bi, B := range fields {
		if B == 0 {
			continue // Thermo's zero-field direction is z
		}
		th := thermo(t, m, [3]float64{B * n[0], B * n[1], B * n[2]}, temps...)
		for ti, T := range temps {
			what := m.Name + " chi at B = " + formatG(B) + ", T = " + formatG(T)
			scale := math.Max(math.Abs(th.Susceptibility[ti]), 1e-300)
			expect(t, what, r.Curves[ti].Susceptibility[bi], th.Susceptibility[ti], 1e-10*scale)
			expect(t, m.Name+" M against thermo at B = "+formatG(B)+", T = "+formatG(T), r.Curves[ti].Magnetization[bi], th.Magnetization[ti], 1e-10*math.Max(1, math.Abs(th.Magnetization[ti])))
		}
	}
}

// Thermo's susceptibility (the same Kubo sum and S^z variance, checked against
// Bleaney-Bowers, Curie and numpy in the other tests) is the reference: on
// the shortcut route (SU(2), one g: chi from the S^z fluctuations) and on
// the per-field route (two g values, DM, a tilted field: the Kubo sum with
// its Van Vleck part; and S^z sectors with two g values along z).
func TestSusceptibilityMatchesThermo(t *testing.T) {
	temps := []float64{0.7, 2, 10, 80}
	tri := &cluster.Model{Name: "SU(2) triangle", Sites: []cluster.Site{site("a", 1, 2.1), site("b", 1, 2.1), site("c", 1, 2.1)},
		Bonds: []cluster.Bond{heis(0, 1, 5), heis(1, 2, 5), heis(2, 0, 5)}}
	expectChiMatchesThermo(t, tri, [3]float64{0.3, -0.5, 0.8}, temps, []float64{0, 0.5, 3, 8}, "chi from the S^z fluctuations")

	expectChiMatchesThermo(t, anisotropicCluster(), [3]float64{0.6, 0.2, -0.7}, temps, []float64{0.5, 4, 12}, "chi with its Van Vleck part")

	two := su2Cluster()
	two.Sites[1].G = cluster.IsotropicG(1.85)
	two.Sites[3].G = cluster.IsotropicG(2.35)
	expectChiMatchesThermo(t, two, [3]float64{0, 0, 1}, temps, []float64{0.2, 2, 9}, "chi with its Van Vleck part")
}

// Closed forms. Bleaney and Bowers, Proc. R. Soc. A 214, 451 (1952):
// chi = g^2 (mu_B/k_B) 2 / (T (3 + e^{J/T})) mu_B/T per dimer at zero field
// (shortcut route). Free spins (derivation): M = g <m> with
// <m> = (1/2) tanh(y/2) for S = 1/2 and 2 sinh y / (1 + 2 cosh y) for S = 1,
// y = g (mu_B/k_B) B / T, so chi = g (d<m>/dy) g (mu_B/k_B)/T with
// d<m>/dy = (1/4) sech^2(y/2) and (2 cosh y + 4)/(1 + 2 cosh y)^2; two
// uncoupled spins with different g go the per-field route and their chi is
// the sum.
func TestSusceptibilityClosedForms(t *testing.T) {
	const j, g = 15.0, 2.1
	temps := []float64{0.5, 2, 9.3545, 40, 150}
	r := magnetizationChi(t, dimerModel(j, g), [3]float64{0, 1, 1}, temps, []float64{0})
	for ti, T := range temps {
		want := g * g * ed.MuBOverKB * 2 / (T * (3 + math.Exp(j/T)))
		expectRel(t, "Bleaney-Bowers chi (magnetization), T = "+formatG(T), r.Curves[ti].Susceptibility[0], want, 1e-9)
	}

	free := func(twoS int, g, B, T float64) float64 {
		y := g * ed.MuBOverKB * B / T
		var d float64
		if twoS == 1 {
			c := 1 / math.Cosh(y/2)
			d = c * c / 4
		} else {
			d = (2*math.Cosh(y) + 4) / ((1 + 2*math.Cosh(y)) * (1 + 2*math.Cosh(y)))
		}
		return g * g * ed.MuBOverKB / T * d
	}
	pair := &cluster.Model{Name: "two free spins", Sites: []cluster.Site{site("a", 1, 2.0), site("b", 2, 2.3)}}
	fields := []float64{0, 0.4, 2, 7}
	temps = []float64{0, 0.3, 1.5, 20}
	r = magnetizationChi(t, pair, [3]float64{0, 0, 1}, temps, fields)
	if !strings.Contains(r.Report.Route, "Van Vleck") {
		t.Errorf("two free spins with different g: route %q, want the per-field Kubo route", r.Report.Route)
	}
	for ti, T := range temps {
		for bi, B := range fields {
			what := "two free spins chi, B = " + formatG(B) + ", T = " + formatG(T)
			if T == 0 {
				expect(t, what+" (T = 0 is reported as 0)", r.Curves[ti].Susceptibility[bi], 0, 0)
				continue
			}
			want := free(1, 2.0, B, T) + free(2, 2.3, B, T)
			expectRel(t, what, r.Curves[ti].Susceptibility[bi], want, 1e-9)
		}
	}
	// One free spin 1/2 with a tilted field (shortcut route).
	r = magnetizationChi(t, freeSpin(1, 2.2), [3]float64{1, 1, 0}, temps, fields)
	for ti, T := range temps {
		for bi, B := range fields {
			want := 0.0
			if T > 0 {
				want = free(1, 2.2, B, T)
			}
			expectRel(t, "free spin 1/2 chi, B = "+formatG(B)+", T = "+formatG(T), r.Curves[ti].Susceptibility[bi], want, 1e-9)
		}
	}
}

// Without Susceptibility the curves carry none.
func TestSusceptibilityOnlyWhenAsked(t *testing.T) {
	r := magnetization(t, anisotropicCluster(), [3]float64{0, 0, 1}, []float64{1}, []float64{1})
	if r.Curves[0].Susceptibility != nil {
		t.Errorf("susceptibility returned without being asked for")
	}
}

// Definition (api.go): GroupSaturation[g] = sum over the sites of g of
// |g_i^T n| S_i; with every site in a group they add up to Saturation.
func TestGroupSaturation(t *testing.T) {
	a := anisotropicCluster()
	dir := [3]float64{0.2, 0.4, -0.9}
	n := unitOf(dir)
	want := map[string]float64{}
	for _, s := range a.Sites {
		var v [3]float64
		for nu := 0; nu < 3; nu++ {
			for mu := 0; mu < 3; mu++ {
				v[nu] += n[mu] * s.G[3*mu+nu]
			}
		}
		want[s.Group] += math.Sqrt(v[0]*v[0]+v[1]*v[1]+v[2]*v[2]) * s.Spin()
	}
	for _, route := range []string{"per field", "shortcut"} {
		m := a
		if route == "shortcut" {
			m = su2Cluster()
			for i := range m.Sites {
				m.Sites[i].Group = []string{"x", "y"}[i%2]
			}
			want = map[string]float64{}
			for _, s := range m.Sites {
				want[s.Group] += 2.1 * s.Spin()
			}
		}
		r := magnetization(t, m, dir, []float64{1}, []float64{2})
		if len(r.GroupSaturation) != len(want) {
			t.Fatalf("%s: group saturations %v, want %v", route, r.GroupSaturation, want)
		}
		sum := 0.0
		for g, w := range want {
			expect(t, route+" group saturation "+g, r.GroupSaturation[g], w, 1e-12)
			sum += r.GroupSaturation[g]
		}
		expect(t, route+" group saturations add up to the saturation", sum, r.Saturation, 1e-12)
	}
	if r := magnetization(t, freeSpin(1, 2), [3]float64{0, 0, 1}, []float64{1}, []float64{1}); r.GroupSaturation != nil {
		t.Errorf("group saturations %v without groups", r.GroupSaturation)
	}
}

// Invariant, no source: the per-field route needs the moment's matrix
// elements for chi, and its memory estimate grows with them (plan.go: 6
// instead of 3 matrices per block); the shortcut route needs nothing more.
// The plan is what the run reports.
func TestSusceptibilityPlanMemory(t *testing.T) {
	for _, c := range []struct {
		m    *cluster.Model
		more bool
	}{{anisotropicCluster(), true}, {su2Cluster(), false}} {
		req := ed.MagnetizationRequest{Temperatures: []float64{1}, Fields: []float64{1, 2}, Direction: [3]float64{1, 0, 1}}
		without, err := ed.PlanMagnetization(c.m, req, ed.Options{})
		if err != nil {
			t.Fatal(err)
		}
		req.Susceptibility = true
		with, err := ed.PlanMagnetization(c.m, req, ed.Options{})
		if err != nil {
			t.Fatal(err)
		}
		if (with.MemoryBytes > without.MemoryBytes) != c.more || with.MemoryBytes < without.MemoryBytes {
			t.Errorf("%s: memory %d B with chi, %d B without; want more: %v", c.m.Name, with.MemoryBytes, without.MemoryBytes, c.more)
		}
		run, err := ed.Magnetization(context.Background(), c.m, req, ed.Options{})
		if err != nil {
			t.Fatal(err)
		}
		run.Report.Diagonalizations = 0
		if run.Report.MemoryBytes != with.MemoryBytes || run.Report.Route != with.Route {
			t.Errorf("%s: plan %+v, run %+v", c.m.Name, with, run.Report)
		}
	}
}
