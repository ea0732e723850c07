package ed

import (
	"context"
	"math"
	"strings"
	"testing"

	"frustum/cluster"
)

// rotZ returns the rotation by angle about z, row-major.
func rotZ(angle float64) [9]float64 {
	c, s := math.Cos(angle), math.Sin(angle)
	return [9]float64{c, -s, 0, s, c, 0, 0, 0, 1}
}

// rotatedTriangle: three spins 1 on a triangle (angles 0, 120, 240 degrees)
// with XXZ exchange, a DM vector with in-plane and z parts turned with each
// bond, single-ion terms and g tensors turned with each site (every site its
// own group). It is invariant under the rotation by 2 pi/3 about z only
// together with the cyclic site permutation, which moves the groups.
func rotatedTriangle() *cluster.Model {
	g0 := [9]float64{2.05, 0.08, 0, 0.08, 2.2, 0.06, 0, 0.06, 1.95}
	d0 := [3]float64{0.8 * math.Cos(math.Pi/3), 0.8 * math.Sin(math.Pi/3), 1.5}
	m := &cluster.Model{Name: "rotated triangle"}
	for k := 0; k < 3; k++ {
		q := rotZ(2 * math.Pi * float64(k) / 3)
		m.Sites = append(m.Sites, cluster.Site{Label: "t" + string(rune('1'+k)), TwoS: 2, G: conjugate(q, g0),
			Group: "g" + string(rune('1'+k)), SingleIon: 2.5})
		d := apply3(q, d0)
		m.Bonds = append(m.Bonds, cluster.Bond{A: k, B: (k + 1) % 3, J: 9, Jz: 7.5, DM: d})
	}
	if m.CheckPermutation([]int{1, 2, 0}) == nil {
		panic("the cyclic permutation alone must not commute with H")
	}
	return m
}

// tensorMultimer: the defect multimer (SU(2) exchange) with an axial g on the
// centre and g tensors turned with each host site about z: R_k g0 R_k^T on
// the top triangle, R_k g0' R_k^T on the bottom one with g0' = C2x g0 C2x^T.
// The rotation by 2 pi/3 about z maps it onto itself with the cyclic
// permutation of each triangle, and the C2 rotation about x only with the
// permutation that swaps the triangles (t1 <-> b1, t2 <-> b3, t3 <-> b2),
// so that the groups "top" and "bottom" trade places.
func tensorMultimer() *cluster.Model {
	m := cluster.DefectMultimer(cluster.MultimerParams{JPlanar: 50, JDefect: 8, GHost: 2.1, GCentre: 2.2})
	g0 := [9]float64{2.0, 0.12, 0.05, 0.12, 2.2, 0.1, 0.05, 0.1, 2.3}
	c2x := [9]float64{1, 0, 0, 0, -1, 0, 0, 0, -1}
	for i, s := range m.Sites {
		if s.Label == "c" {
			m.Sites[i].G = [9]float64{2.2, 0, 0, 0, 2.2, 0, 0, 0, 2.0}
			continue
		}
		k := int(s.Label[1] - '1')
		g := g0
		if s.Label[0] == 'b' {
			g = conjugate(c2x, g0)
		}
		m.Sites[i].G = conjugate(rotZ(2*math.Pi*float64(k)/3), g)
	}
	return m
}

// Derivation (the comment of powder.go): every symmetry used maps the curves
// onto themselves, so averaging with the symmetry reduction and with every
// direction evaluated gives the same M, group moments, chi and saturations
// (to 1e-12 of the saturation). The reduction has to use the site
// permutations (and the group relabelling) for the rotated triangle and the
// tensor multimer, and time reversal alone for the asymmetric cluster.
func TestPowderReductionChangesNothing(t *testing.T) {
	for _, c := range []struct {
		m          *cluster.Model
		n          int
		permuted   bool
		evaluated  int // with the reduction; 0: not checked
		allWithout int // without: points of the rule and its coarser one
	}{
		// C3 about z with the cyclic permutation: 72 / (3 x 2) orbits, and
		// the 38 / 2 antipodal pairs of Lebedev 38, which has no C3 about z.
		{rotatedTriangle(), 72, true, 12 + 19, 72 + 38},
		// C2 about x (with the triangles swapped) and time reversal (C3
		// about z does not map Lebedev points): 5 orbits of Lebedev 14,
		// whose coarser Lebedev 6 lies inside it.
		{tensorMultimer(), 14, true, 5, 14},
		{anisotropicTestCluster(), 26, false, 13, 26}, // Lebedev 14 lies inside Lebedev 26
	} {
		req := MagnetizationRequest{Temperatures: []float64{0, 0.7, 6}, Fields: []float64{0, 4}, Powder: c.n, Susceptibility: true}
		ctx := context.Background()
		red, err := magnetization(ctx, c.m, req, Options{}, true)
		if err != nil {
			t.Fatal(err)
		}
		all, err := magnetization(ctx, c.m, req, Options{}, false)
		if err != nil {
			t.Fatal(err)
		}
		name := c.m.Name
		if all.Powder.Evaluated != c.allWithout {
			t.Errorf("%s without reduction: %d directions evaluated, want %d", name, all.Powder.Evaluated, c.allWithout)
		}
		if red.Powder.Evaluated >= all.Powder.Evaluated || (c.evaluated > 0 && red.Powder.Evaluated != c.evaluated) {
			t.Errorf("%s: %d directions evaluated with the reduction (%s), %d without; want %d", name, red.Powder.Evaluated, red.Powder.Symmetry, all.Powder.Evaluated, c.evaluated)
		}
		if got := strings.Contains(red.Powder.Symmetry, "site permutation"); got != c.permuted {
			t.Errorf("%s: symmetry %q, site permutations used: %v, want %v", name, red.Powder.Symmetry, got, c.permuted)
		}
		tol := 1e-12 * red.Saturation
		if math.Abs(red.Saturation-all.Saturation) > tol {
			t.Errorf("%s: saturation %.15g reduced, %.15g all", name, red.Saturation, all.Saturation)
		}
		for g, v := range all.GroupSaturation {
			if math.Abs(red.GroupSaturation[g]-v) > tol {
				t.Errorf("%s: group %s saturation %.15g reduced, %.15g all", name, g, red.GroupSaturation[g], v)
			}
		}
		if math.Abs(red.Powder.Deviation-all.Powder.Deviation) > tol {
			t.Errorf("%s: deviation %.6g reduced, %.6g all", name, red.Powder.Deviation, all.Powder.Deviation)
		}
		for ti, cu := range all.Curves {
			rc := red.Curves[ti]
			for bi := range cu.Magnetization {
				if d := math.Abs(rc.Magnetization[bi] - cu.Magnetization[bi]); d > tol {
					t.Errorf("%s: M(T=%g, B=%g) %.15g reduced, %.15g all", name, cu.Temperature, req.Fields[bi], rc.Magnetization[bi], cu.Magnetization[bi])
				}
				if d := math.Abs(rc.Susceptibility[bi] - cu.Susceptibility[bi]); d > 1e-12*math.Max(1, math.Abs(cu.Susceptibility[bi])) {
					t.Errorf("%s: chi(T=%g, B=%g) %.15g reduced, %.15g all", name, cu.Temperature, req.Fields[bi], rc.Susceptibility[bi], cu.Susceptibility[bi])
				}
				for g, v := range cu.Groups {
					if d := math.Abs(rc.Groups[g][bi] - v[bi]); d > tol {
						t.Errorf("%s: group %s M(T=%g, B=%g) %.15g reduced, %.15g all", name, g, cu.Temperature, req.Fields[bi], rc.Groups[g][bi], v[bi])
					}
				}
			}
		}
	}
}

// anisotropicTestCluster: no symmetry but time reversal (mixed spins, DM,
// bond tensor, single-ion terms, non-symmetric g tensors).
func anisotropicTestCluster() *cluster.Model {
	return &cluster.Model{Name: "anisotropic", Sites: []cluster.Site{
		{Label: "c", TwoS: 1, G: [9]float64{2.25, 0.1, -0.05, 0.0, 2.05, 0.08, 0.12, 0, 1.95}, Group: "centre"},
		{Label: "p", TwoS: 2, G: [9]float64{1.9, 0, 0, 0.15, 2.2, 0, 0, -0.1, 2.0}, Group: "outer", SingleIon: 4.5},
		{Label: "q", TwoS: 1, G: cluster.IsotropicG(2.0), Group: "outer"},
	}, Bonds: []cluster.Bond{
		{A: 0, B: 1, J: 12, Jz: 10, DM: [3]float64{1.5, -0.8, 2.2}},
		{A: 1, B: 2, J: 8, Jz: 8, Tensor: [9]float64{0.5, 0.3, 0, 0.3, -0.2, 0.4, 0, 0.4, 0.1}},
		{A: 2, B: 0, J: 5, Jz: 6.5, DM: [3]float64{0, 0, -1.2}},
	}}
}

// Derivation (the comment of powder.go, with the models' construction): the
// rotations the reduction finds. The tensor multimer has C3 about z with the
// cyclic permutation of each triangle and C2 about x only with the triangles
// swapped (so the groups top and bottom trade places); the rotated triangle
// has C3 about z with the cyclic permutation; the asymmetric cluster has time
// reversal alone; an axial free spin has every candidate that keeps z up to
// sign, with the identity permutation.
func TestPowderRotationsFound(t *testing.T) {
	names := func(rs []spinRotation) map[string]spinRotation {
		out := map[string]spinRotation{}
		for _, r := range rs {
			out[r.name] = r
		}
		return out
	}
	tm := tensorMultimer()
	groups := tm.Groups() // bottom, impurity, top
	got := names(modelRotations(tm, groups, []int{12}))
	c3, c2 := got["C3[0,0,1]"], got["C2[1,0,0]"]
	if !c3.permuted || c3.groups != nil {
		t.Errorf("tensor multimer: C3 about z %+v, want a site permutation keeping the groups", c3)
	}
	if !c2.permuted || len(c2.groups) != 3 || groups[c2.groups[0]] != "top" || groups[c2.groups[2]] != "bottom" || groups[c2.groups[1]] != "impurity" {
		t.Errorf("tensor multimer: C2 about x %+v, want top and bottom swapped (groups %v)", c2, groups)
	}
	if len(got) != 3 { // time reversal, C3 and C2x; C6, C12 and C2 about z move a site to 60, 30 or 180 degrees
		t.Errorf("tensor multimer: rotations %v", got)
	}
	tr := names(modelRotations(rotatedTriangle(), []string{"g1", "g2", "g3"}, nil))
	if r, ok := tr["C3[0,0,1]"]; !ok || !r.permuted || len(tr) != 2 {
		t.Errorf("rotated triangle: rotations %v, want time reversal and C3 about z with a permutation", tr)
	}
	if a := modelRotations(anisotropicTestCluster(), []string{"centre", "outer"}, nil); len(a) != 1 {
		t.Errorf("asymmetric cluster: rotations %v, want time reversal alone", a)
	}
	ax := &cluster.Model{Name: "axial", Sites: []cluster.Site{{Label: "x", TwoS: 1, G: [9]float64{1.9, 0, 0, 0, 1.9, 0, 0, 0, 2.3}}}}
	rs := modelRotations(ax, nil, []int{14})
	// The cube's rotations keeping the z axis up to sign: C4 (two), C2 about
	// z, and the C2 about x, y, [1,1,0], [1,-1,0]; plus C3, C6, C14 about z
	// and time reversal.
	if len(rs) != 7+3+1 {
		t.Errorf("axial spin: %d rotations %v, want 11", len(rs), names(rs))
	}
	for _, r := range rs {
		if r.permuted {
			t.Errorf("axial spin: rotation %s with a permutation", r.name)
		}
	}
}
