package cluster

import (
	"math"
	"slices"
	"strings"
	"testing"
)

// builtModels returns one model of each builder, for tests over all of them.
func builtModels() []*Model {
	return []*Model{
		Chain(2, 0.5, 1, false),
		Chain(6, 1, -3, false),
		Chain(3, 1.5, 2, true),
		Chain(10, 0.5, 1, true),
		ChainJ1J2(5, 1, 0.3),
		ChainJ1J2(8, 1, 0.5),
		Triangle(0.5, 100),
		Triangle(2.5, -1),
		Tetrahedron(1, 7),
		DefectMultimer(MultimerParams{}),
		DefectMultimer(MultimerParams{CentreSpin: 1.5, HostSpin: 0.5, JPlanar: 190, JDefect: 20, GHost: 2.1, GCentre: 2.2, DMPlanar: 15, Name: "invented heptamer"}),
	}
}

func TestBuilders(t *testing.T) {
	for _, tc := range []struct {
		m          *Model
		sites      int
		bonds      int
		symmetries []string
	}{
		{Chain(2, 0.5, 1, false), 2, 1, []string{"reflection"}},
		{Chain(7, 1, 1, false), 7, 6, []string{"reflection"}},
		{Chain(3, 0.5, 1, true), 3, 3, []string{"translation", "reflection"}},
		{Chain(12, 0.5, 1, true), 12, 12, []string{"translation", "reflection"}},
		{ChainJ1J2(5, 1, 0.5), 5, 10, []string{"translation", "reflection"}},
		{ChainJ1J2(10, 1, 0.5), 10, 20, []string{"translation", "reflection"}},
		{Triangle(0.5, 1), 3, 3, []string{"C3", "mirror"}},
		{Tetrahedron(1.5, 1), 4, 6, []string{"C3", "C2", "mirror"}},
		{DefectMultimer(MultimerParams{JPlanar: 1, JDefect: 0.1}), 7, 12, []string{"C3", "mirror-h", "mirror-v"}},
		{DefectMultimer(MultimerParams{JPlanar: 1, JDefect: 0.1, DMPlanar: 0.2}), 7, 12, []string{"C3", "mirror-h"}},
	} {
		m := tc.m
		if len(m.Sites) != tc.sites || len(m.Bonds) != tc.bonds {
			t.Errorf("%s: %d sites and %d bonds, want %d and %d", m.Name, len(m.Sites), len(m.Bonds), tc.sites, tc.bonds)
		}
		var names []string
		for _, s := range m.Symmetries {
			names = append(names, s.Name)
			if err := m.CheckPermutation(s.Perm); err != nil {
				t.Errorf("%s: symmetry %s: %v", m.Name, s.Name, err)
			}
		}
		if !slices.Equal(names, tc.symmetries) {
			t.Errorf("%s: symmetries %v, want %v", m.Name, names, tc.symmetries)
		}
		// Valid: the model passes its own validation unchanged.
		again, err := FromProto(m.ToProto())
		if err != nil {
			t.Errorf("%s: invalid: %v", m.Name, err)
		} else if !again.Equal(m) {
			t.Errorf("%s: round trip changed the model", m.Name)
		}
	}
}

func TestChainBonds(t *testing.T) {
	m := Chain(4, 1, 2.5, true)
	want := [][2]int{{0, 1}, {1, 2}, {2, 3}, {3, 0}}
	for i, b := range m.Bonds {
		if [2]int{b.A, b.B} != want[i] || b.J != 2.5 || b.Jz != 2.5 || b.DM != [3]float64{} {
			t.Errorf("bond %d = %+v", i, b)
		}
	}
	for i, s := range m.Sites {
		if s.Label != chainLabel(i) || s.TwoS != 2 || s.G != IsotropicG(2) {
			t.Errorf("site %d = %+v", i, s)
		}
	}
	// Ring of unit nearest-neighbour distance.
	for _, b := range m.Bonds {
		if d := distance(m.Sites[b.A].Position, m.Sites[b.B].Position); math.Abs(d-1) > 1e-12 {
			t.Errorf("bond %d-%d has length %g", b.A, b.B, d)
		}
	}
	j := ChainJ1J2(6, 1, 0.5)
	for _, b := range j.Bonds[6:] {
		if (b.B-b.A+6)%6 != 2 || b.J != 0.5 {
			t.Errorf("next-nearest bond %+v", b)
		}
	}
}

func TestTetrahedronGeometry(t *testing.T) {
	m := Tetrahedron(0.5, 1)
	for _, b := range m.Bonds {
		if d := distance(m.Sites[b.A].Position, m.Sites[b.B].Position); math.Abs(d-1) > 1e-12 {
			t.Errorf("edge %d-%d has length %g", b.A, b.B, d)
		}
	}
	tri := Triangle(0.5, 1)
	for _, b := range tri.Bonds {
		if d := distance(tri.Sites[b.A].Position, tri.Sites[b.B].Position); math.Abs(d-1) > 1e-12 {
			t.Errorf("triangle edge %d-%d has length %g", b.A, b.B, d)
		}
	}
}

func TestDefectMultimer(t *testing.T) {
	p := MultimerParams{CentreSpin: 1, HostSpin: 1.5, JPlanar: 190, JDefect: 20, GHost: 2.1, GCentre: 2.3, DMPlanar: 15, Name: "invented multimer"}
	m := DefectMultimer(p)
	if m.Name != "invented multimer" {
		t.Errorf("name %q", m.Name)
	}
	labels := make([]string, len(m.Sites))
	for i, s := range m.Sites {
		labels[i] = s.Label
	}
	if got := strings.Join(labels, ","); got != "c,t1,t2,t3,b1,b2,b3" {
		t.Errorf("labels %s", got)
	}
	if got := strings.Join(m.Groups(), ","); got != "bottom,impurity,top" {
		t.Errorf("groups %s", got)
	}
	c := m.Sites[0]
	if c.TwoS != 2 || c.G != IsotropicG(2.3) || c.Group != "impurity" || !slices.Equal(c.Position, []float64{0, 0, 0}) {
		t.Errorf("centre %+v", c)
	}
	for _, s := range m.Sites[1:] {
		if s.TwoS != 3 || s.G != IsotropicG(2.1) {
			t.Errorf("host %+v", s)
		}
		if z := s.Position[2]; (s.Group == "top" && z != 1) || (s.Group == "bottom" && z != -1) {
			t.Errorf("host %s at z = %g", s.Label, z)
		}
	}
	var planar, defect int
	for _, b := range m.Bonds {
		switch {
		case b.A == 0 || b.B == 0:
			defect++
			if b.J != 20 || b.Jz != 20 || b.DM != [3]float64{} {
				t.Errorf("defect bond %+v", b)
			}
		default:
			planar++
			if b.J != 190 || b.DM != [3]float64{0, 0, 15} {
				t.Errorf("planar bond %+v", b)
			}
			// Circulation: t1 -> t2 -> t3 -> t1 (and b), so B is A's successor.
			if (b.A-1)/3 != (b.B-1)/3 || (b.B-1)%3 != ((b.A-1)%3+1)%3 {
				t.Errorf("planar bond %s -> %s against the circulation", m.Sites[b.A].Label, m.Sites[b.B].Label)
			}
		}
	}
	if planar != 6 || defect != 6 {
		t.Errorf("%d planar and %d defect bonds, want 6 and 6", planar, defect)
	}

	// Defaults.
	d := DefectMultimer(MultimerParams{})
	if d.Name != "defect multimer" || d.Sites[0].TwoS != 1 || d.Sites[1].G != IsotropicG(2) {
		t.Errorf("defaults: %q, %+v, %+v", d.Name, d.Sites[0], d.Sites[1])
	}
}

func TestBuilderPanics(t *testing.T) {
	for name, f := range map[string]func(){
		"Chain n=1":             func() { Chain(1, 0.5, 1, false) },
		"Chain periodic n=2":    func() { Chain(2, 0.5, 1, true) },
		"Chain spin 0.7":        func() { Chain(4, 0.7, 1, false) },
		"Chain J NaN":           func() { Chain(4, 0.5, math.NaN(), false) },
		"ChainJ1J2 n=4":         func() { ChainJ1J2(4, 1, 0.5) },
		"Triangle spin 0":       func() { Triangle(0, 1) },
		"Tetrahedron J Inf":     func() { Tetrahedron(0.5, math.Inf(1)) },
		"DefectMultimer spin 3": func() { DefectMultimer(MultimerParams{HostSpin: 0.3}) },
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", name)
				}
			}()
			f()
		}()
	}
}

func distance(p, q []float64) float64 {
	return math.Sqrt((p[0]-q[0])*(p[0]-q[0]) + (p[1]-q[1])*(p[1]-q[1]) + (p[2]-q[2])*(p[2]-q[2]))
}
