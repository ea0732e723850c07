package cluster

import (
	"errors"
	"math"
	"math/bits"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// mustBuild fails the test on a builder error.
func mustBuild(t *testing.T, m *Model, err error) *Model {
	t.Helper()
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// checkValid checks the invariants every builder promises: the model
// passes its own validation unchanged (so every declared symmetry passes
// CheckPermutation), and its symmetries have the given names.
func checkValid(t *testing.T, m *Model, symmetries []string) {
	t.Helper()
	again, err := FromProto(m.ToProto())
	if err != nil {
		t.Errorf("%s: invalid: %v", m.Name, err)
	} else if !again.Equal(m) {
		t.Errorf("%s: FromProto(ToProto) changed the model", m.Name)
	}
	var names []string
	for _, s := range m.Symmetries {
		names = append(names, s.Name)
		if err := m.CheckPermutation(s.Perm); err != nil {
			t.Errorf("%s: symmetry %s: %v", m.Name, s.Name, err)
		}
	}
	if !slices.Equal(names, symmetries) {
		t.Errorf("%s: symmetries %v, want %v", m.Name, names, symmetries)
	}
}

// coordination returns the number of bonds at each site and the sum of the
// exchange J over the bonds.
func coordination(m *Model) ([]int, float64) {
	z := make([]int, len(m.Sites))
	sum := 0.0
	for _, b := range m.Bonds {
		z[b.A]++
		z[b.B]++
		sum += b.J
	}
	return z, sum
}

// triangles counts the 3-cliques of the bond graph.
func triangles(m *Model) int {
	n := len(m.Sites)
	adj := make([][]bool, n)
	for i := range adj {
		adj[i] = make([]bool, n)
	}
	for _, b := range m.Bonds {
		adj[b.A][b.B], adj[b.B][b.A] = true, true
	}
	count := 0
	for a := range n {
		for b := a + 1; b < n; b++ {
			for c := b + 1; c < n && adj[a][b]; c++ {
				if adj[a][c] && adj[b][c] {
					count++
				}
			}
		}
	}
	return count
}

// Closed forms of the site and bond counts (derivation: a torus of N sites
// of coordination z has z N / 2 bonds; the open counts are written out in
// each builder's doc, one bond per pair of neighbouring sites inside the
// patch), the coordination of every site on a torus, and the exchange sum
// z N J / 2.
func TestLatticeCounts(t *testing.T) {
	type counted struct {
		m            *Model
		sites, bonds int
		z            int // coordination of every site, 0 when it varies
		symmetries   []string
	}
	var cases []counted
	add := func(m *Model, err error, sites, bonds, z int, symmetries ...string) {
		t.Helper()
		cases = append(cases, counted{mustBuild(t, m, err), sites, bonds, z, symmetries})
	}
	for _, n := range []int{3, 4, 7, 12} {
		m, err := Ring(n, ChainParams{J1: 1.5})
		add(m, err, n, n, 2, "T1", "R")
	}
	m, err := Ring(9, ChainParams{J1: 1, J2: 0.4})
	add(m, err, 9, 18, 4, "T1", "R")
	m, err = Ring(6, ChainParams{J1: 1, DM: [3]float64{0, 0, 0.1}})
	add(m, err, 6, 6, 2, "T1")

	m, err = Ladder(2, 5, LadderParams{JLeg: 1, JRung: 1}, true)
	add(m, err, 10, 15, 3, "T1", "R", "Rleg")
	m, err = Ladder(3, 4, LadderParams{JLeg: 1, JRung: 0.5}, true)
	add(m, err, 12, 12+8, 0, "T1", "R", "Rleg")
	m, err = Ladder(2, 5, LadderParams{JLeg: 1, JRung: 0.5}, false)
	add(m, err, 10, 2*4+5, 0, "R", "Rleg")
	m, err = Ladder(3, 4, LadderParams{JLeg: 1, JRung: 0.5}, false)
	add(m, err, 12, 3*3+2*4, 0, "R", "Rleg")
	m, err = Ladder(2, 1, LadderParams{JLeg: 1, JRung: 0.5}, false)
	add(m, err, 2, 1, 1, "Rleg")

	for _, l := range [][2]int{{3, 3}, {3, 4}, {4, 4}, {5, 3}} {
		m, err := Triangular(l[0], l[1], LatticeParams{J: 2}, true)
		n := l[0] * l[1]
		if l[0] == l[1] {
			add(m, err, n, 3*n, 6, "T1", "T2", "C2", "C6", "R")
		} else {
			add(m, err, n, 3*n, 6, "T1", "T2", "C2")
		}
	}
	for _, l := range [][2]int{{1, 2}, {3, 3}, {4, 2}} {
		m, err := Triangular(l[0], l[1], LatticeParams{J: 2}, false)
		l1, l2 := l[0], l[1]
		bonds := (l1-1)*l2 + l1*(l2-1) + (l1-1)*(l2-1)
		if l1 == l2 {
			add(m, err, l1*l2, bonds, 0, "C2", "R")
		} else {
			add(m, err, l1*l2, bonds, 0, "C2")
		}
	}

	for _, l := range [][2]int{{2, 2}, {2, 3}, {3, 3}, {4, 4}} {
		m, err := Kagome(l[0], l[1], LatticeParams{J: 1}, true)
		n := 3 * l[0] * l[1]
		if l[0] == l[1] {
			add(m, err, n, 2*n, 4, "T1", "T2", "C2", "C6", "R")
		} else {
			add(m, err, n, 2*n, 4, "T1", "T2", "C2")
		}
	}
	m, err = Kagome(3, 3, LatticeParams{J: 1, DM: 0.2}, true)
	add(m, err, 27, 54, 4, "T1", "T2", "C2", "C6")
	for _, l := range [][2]int{{1, 1}, {2, 3}, {3, 3}} {
		m, err := Kagome(l[0], l[1], LatticeParams{J: 1}, false)
		l1, l2 := l[0], l[1]
		bonds := 3*l1*l2 + (l1-1)*l2 + l1*(l2-1) + (l1-1)*(l2-1)
		if l1 == l2 {
			add(m, err, 3*l1*l2, bonds, 0, "R")
		} else {
			add(m, err, 3*l1*l2, bonds, 0)
		}
	}
	m, err = Kagome(2, 2, LatticeParams{J: 1, DM: 0.2}, false)
	add(m, err, 12, 12+2+2+1, 0)

	for _, tc := range cases {
		m := tc.m
		if len(m.Sites) != tc.sites || len(m.Bonds) != tc.bonds {
			t.Errorf("%s: %d sites and %d bonds, want %d and %d", m.Name, len(m.Sites), len(m.Bonds), tc.sites, tc.bonds)
		}
		checkValid(t, m, tc.symmetries)
		if tc.z == 0 {
			continue
		}
		z, sum := coordination(m)
		for i, zi := range z {
			if zi != tc.z {
				t.Errorf("%s: site %s has %d bonds, want %d", m.Name, m.Sites[i].Label, zi, tc.z)
			}
		}
		// Where every bond has the same J: sum = z N J / 2.
		j := m.Bonds[0].J
		if slices.ContainsFunc(m.Bonds, func(b Bond) bool { return b.J != j }) {
			continue
		}
		if want := float64(tc.z*tc.sites) * j / 2; math.Abs(sum-want) > 1e-12*want {
			t.Errorf("%s: sum of J = %g, want z N J / 2 = %g", m.Name, sum, want)
		}
	}
}

// The symmetries declared on an L x L torus generate p6mm there: 12 L^2
// elements (L^2 translations times the 12 operations of the point group
// 6mm), or 6 L^2 with DM on the kagome lattice, whose mirrors reverse the
// circulation (derivation in Kagome's doc). International Tables for
// Crystallography, vol. A: p6mm, point group order 12.
func TestLatticeDeclaredGroups(t *testing.T) {
	for _, tc := range []struct {
		m     *Model
		order int
	}{
		{must(Triangular(3, 3, LatticeParams{J: 1}, true)), 12 * 9},
		{must(Triangular(4, 4, LatticeParams{J: 1}, true)), 12 * 16},
		{must(Triangular(5, 5, LatticeParams{J: 1}, true)), 12 * 25},
		{must(Kagome(2, 2, LatticeParams{J: 1}, true)), 12 * 4},
		{must(Kagome(3, 3, LatticeParams{J: 1}, true)), 12 * 9},
		{must(Kagome(3, 3, LatticeParams{J: 1, DM: 0.3}, true)), 6 * 9},
		// A rectangle keeps the translations and the inversion: 2 L1 L2.
		{must(Triangular(3, 5, LatticeParams{J: 1}, true)), 2 * 15},
		{must(Kagome(2, 3, LatticeParams{J: 1}, true)), 2 * 6},
		// The ring: the dihedral group of order 2N.
		{must(Ring(7, ChainParams{J1: 1})), 14},
	} {
		var gens []Permutation
		for _, s := range tc.m.Symmetries {
			gens = append(gens, s.Perm)
		}
		group, err := Closure(gens, 0)
		if err != nil || len(group) != tc.order {
			t.Errorf("%s: the declared symmetries generate %d elements (%v), want %d", tc.m.Name, len(group), err, tc.order)
		}
	}
}

// Every bond of an open patch joins nearest neighbours at distance 1, and
// on the kagome lattice every bond a -> b turns counterclockwise around its
// triangle: the third corner c lies to the left of a -> b (derivation: the
// orientation of Kagome's doc; (b - a) x (c - a) has a positive z
// component).
func TestLatticeGeometry(t *testing.T) {
	for _, m := range []*Model{
		must(Triangular(4, 3, LatticeParams{J: 1}, false)),
		must(Kagome(3, 2, LatticeParams{J: 1, DM: 1}, false)),
		must(Ladder(3, 4, LadderParams{JLeg: 1, JRung: 1}, false)),
		must(KagomeDefect(2, 2, KagomeDefectParams{J: 1, JDefect: 1, Open: true, Layers: 2})),
	} {
		for _, b := range m.Bonds {
			if m.Sites[b.A].Group == "impurity" || m.Sites[b.B].Group == "impurity" {
				continue
			}
			if d := distance(m.Sites[b.A].Position, m.Sites[b.B].Position); math.Abs(d-1) > 1e-12 {
				t.Errorf("%s: bond %s-%s has length %g", m.Name, m.Sites[b.A].Label, m.Sites[b.B].Label, d)
			}
		}
	}
	// On an open patch a bond at the edge may lie in no triangle; on a torus
	// every bond lies in exactly one.
	m := must(Kagome(3, 3, LatticeParams{J: 1, DM: 0.5}, false))
	inTriangle := 0
	for _, b := range m.Bonds {
		thirds := thirdCorners(m, b)
		for _, c := range thirds {
			pa, pb, pc := m.Sites[b.A].Position, m.Sites[b.B].Position, m.Sites[c].Position
			cross := (pb[0]-pa[0])*(pc[1]-pa[1]) - (pb[1]-pa[1])*(pc[0]-pa[0])
			if cross <= 0 {
				t.Errorf("bond %s -> %s runs clockwise around %s", m.Sites[b.A].Label, m.Sites[b.B].Label, m.Sites[c].Label)
			}
		}
		if len(thirds) > 1 || b.DM != [3]float64{0, 0, 0.5} {
			t.Errorf("bond %s -> %s: in %d triangles, DM %v; want at most 1 and (0, 0, 0.5)", m.Sites[b.A].Label, m.Sites[b.B].Label, len(thirds), b.DM)
		}
		inTriangle += len(thirds)
	}
	// 9 up and 4 complete down triangles.
	if inTriangle != 3*(9+4) {
		t.Errorf("%d bonds in triangles, want %d", inTriangle, 3*(9+4))
	}
	torus := must(Kagome(3, 3, LatticeParams{J: 1, DM: 0.5}, true))
	for _, b := range torus.Bonds {
		if got := len(thirdCorners(torus, b)); got != 1 {
			t.Errorf("torus: bond %s -> %s in %d triangles, want 1", torus.Sites[b.A].Label, torus.Sites[b.B].Label, got)
		}
	}
}

// thirdCorners returns the sites bonded to both ends of b.
func thirdCorners(m *Model, b Bond) []int {
	bonded := map[[2]int]bool{}
	for _, e := range m.Bonds {
		bonded[[2]int{e.A, e.B}], bonded[[2]int{e.B, e.A}] = true, true
	}
	var out []int
	for c := range m.Sites {
		if bonded[[2]int{b.A, c}] && bonded[[2]int{b.B, c}] {
			out = append(out, c)
		}
	}
	return out
}

func must(m *Model, err error) *Model {
	if err != nil {
		panic(err)
	}
	return m
}

// Triangles: the kagome torus has one up and one down triangle per cell,
// 2 L1 L2 = 2N/3, every bond in exactly one (derivation: each site is a
// corner of two triangles, each triangle has three); the triangular torus
// has two per site, 2N (each site is a corner of six, each triangle has
// three) once L >= 4. On the 3 x 3 triangular torus each of the 3 x 3
// straight lines of three sites closes into a triangle too: the graph is
// K_{3,3,3} (every site is bonded to the 6 sites outside its line along
// a1 + a2), with 3^3 = 27 triangles (derivation).
func TestLatticeTriangles(t *testing.T) {
	for _, tc := range []struct {
		m    *Model
		want int
	}{
		{must(Kagome(2, 2, LatticeParams{J: 1}, true)), 8},
		{must(Kagome(3, 4, LatticeParams{J: 1}, true)), 24},
		{must(Kagome(3, 3, LatticeParams{J: 1}, false)), 9 + 4},
		{must(Triangular(4, 4, LatticeParams{J: 1}, true)), 32},
		{must(Triangular(5, 4, LatticeParams{J: 1}, true)), 40},
		{must(Triangular(3, 3, LatticeParams{J: 1}, true)), 27},
		{must(Triangular(3, 3, LatticeParams{J: 1}, false)), 2 * 2 * 2},
	} {
		if got := triangles(tc.m); got != tc.want {
			t.Errorf("%s: %d triangles, want %d", tc.m.Name, got, tc.want)
		}
	}
}

// Ring is Chain(periodic) and ChainJ1J2 with other names: the refactored
// builders keep their sites and bonds (common practice, no source).
func TestRingMatchesChain(t *testing.T) {
	r := must(Ring(7, ChainParams{Spin: 1, J1: 2.5}))
	c := Chain(7, 1, 2.5, true)
	if !slices.Equal(r.Bonds, c.Bonds) || len(r.Sites) != len(c.Sites) {
		t.Errorf("Ring and Chain differ: %v, %v", r.Bonds, c.Bonds)
	}
	for i := range r.Sites {
		a, b := r.Sites[i], c.Sites[i]
		if a.Label != b.Label || a.TwoS != b.TwoS || a.G != b.G || !slices.Equal(a.Position, b.Position) {
			t.Errorf("site %d: %+v and %+v", i, a, b)
		}
	}
	r = must(Ring(8, ChainParams{J1: 1, J2: 0.5}))
	if j := ChainJ1J2(8, 1, 0.5); !slices.Equal(r.Bonds, j.Bonds) {
		t.Errorf("Ring and ChainJ1J2 differ: %v, %v", r.Bonds, j.Bonds)
	}
	// XXZ and DM reach the bonds.
	x := must(Ring(5, ChainParams{Spin: 1.5, G: 2.2, J1: 3, XXZ: true, Jz1: 0, J2: 1, Jz2: -1, DM: [3]float64{0.1, 0, 0.2}}))
	for i, b := range x.Bonds {
		want := Bond{A: i % 5, B: (i + 1) % 5, J: 3, Jz: 0, DM: [3]float64{0.1, 0, 0.2}}
		if i >= 5 {
			want = Bond{A: i % 5, B: (i + 2) % 5, J: 1, Jz: -1}
		}
		if b != want {
			t.Errorf("bond %d = %+v, want %+v", i, b, want)
		}
	}
	if s := x.Sites[3]; s.TwoS != 3 || s.G != IsotropicG(2.2) {
		t.Errorf("site %+v", s)
	}
}

// KagomeDefect on a single open cell with two layers is the heptamer of
// DefectMultimer: the same spins, g values and couplings, bond for bond,
// under the relabelling tu0_0, tv0_0, tw0_0 -> t1, t2, t3 (and b) (common
// practice, no source: the doc's claim, checked).
func TestKagomeDefectIsTheHeptamer(t *testing.T) {
	p := KagomeDefectParams{HostSpin: 1, CentreSpin: 1.5, GHost: 2.1, GCentre: 2.3, J: 190, DM: 15, JDefect: 20, Layers: 2, Open: true}
	k := must(KagomeDefect(1, 1, p))
	h := DefectMultimer(MultimerParams{CentreSpin: 1.5, HostSpin: 1, GHost: 2.1, GCentre: 2.3, JPlanar: 190, DMPlanar: 15, JDefect: 20})
	rename := map[string]string{"c": "c", "tu0_0": "t1", "tv0_0": "t2", "tw0_0": "t3", "bu0_0": "b1", "bv0_0": "b2", "bw0_0": "b3"}
	if len(k.Sites) != 7 || len(k.Bonds) != 12 {
		t.Fatalf("%d sites, %d bonds", len(k.Sites), len(k.Bonds))
	}
	for i, s := range k.Sites {
		j, ok := h.Index(rename[s.Label])
		if !ok {
			t.Fatalf("site %s has no counterpart", s.Label)
		}
		u := h.Sites[j]
		if s.TwoS != u.TwoS || s.G != u.G || s.SingleIon != u.SingleIon {
			t.Errorf("site %d %s: %+v, heptamer %+v", i, s.Label, s, u)
		}
	}
	type key struct{ a, b string }
	couplings := map[key][9]float64{}
	for _, b := range h.Bonds {
		couplings[key{h.Sites[b.A].Label, h.Sites[b.B].Label}] = b.Coupling()
	}
	for _, b := range k.Bonds {
		a, bb := rename[k.Sites[b.A].Label], rename[k.Sites[b.B].Label]
		if got, ok := couplings[key{a, bb}]; !ok || got != b.Coupling() {
			t.Errorf("bond %s -> %s (%s -> %s): coupling %v, heptamer %v (found %v)", k.Sites[b.A].Label, k.Sites[b.B].Label, a, bb, b.Coupling(), got, ok)
		}
	}
	checkValid(t, k, []string{"C3", "Rz"})
	if got := strings.Join(k.Groups(), ","); got != "host,impurity" {
		t.Errorf("groups %s", got)
	}
}

// Site and bond counts of KagomeDefect (derivation: 1 + 3 L1 L2 layers
// sites; the bonds of the layers plus 3 per layer to the defect), and its
// declared symmetries as documented.
func TestKagomeDefect(t *testing.T) {
	for _, tc := range []struct {
		l1, l2 int
		p      KagomeDefectParams
		bonds  int
		syms   []string
	}{
		{2, 2, KagomeDefectParams{J: 1, JDefect: 0.2}, 24 + 3, []string{"C3", "R"}},
		{3, 3, KagomeDefectParams{J: 1, JDefect: 0.2, Layers: 2}, 2*54 + 6, []string{"C3", "R", "Rz"}},
		{3, 3, KagomeDefectParams{J: 1, JDefect: 0.2, Layers: 2, DM: 0.1}, 2*54 + 6, []string{"C3", "Rz"}},
		{2, 3, KagomeDefectParams{J: 1, JDefect: 0.2}, 36 + 3, nil},
		{2, 2, KagomeDefectParams{J: 1, JDefect: 0.2, Open: true}, 12 + 2 + 2 + 1 + 3, []string{"R"}},
		{1, 1, KagomeDefectParams{J: 1, JDefect: 0.2, Open: true}, 3 + 3, []string{"C3", "R"}},
	} {
		m, err := KagomeDefect(tc.l1, tc.l2, tc.p)
		if err != nil {
			t.Fatal(err)
		}
		layers := max(tc.p.Layers, 1)
		if len(m.Sites) != 1+3*tc.l1*tc.l2*layers || len(m.Bonds) != tc.bonds {
			t.Errorf("%s: %d sites, %d bonds; want %d and %d", m.Name, len(m.Sites), len(m.Bonds), 1+3*tc.l1*tc.l2*layers, tc.bonds)
		}
		checkValid(t, m, tc.syms)
		c := m.Sites[0]
		if c.Label != "c" || c.Group != "impurity" || !slices.Equal(c.Position, []float64{0, 0, 0}) {
			t.Errorf("%s: site 0 is %+v", m.Name, c)
		}
		z, _ := coordination(m)
		if z[0] != 3*layers {
			t.Errorf("%s: the defect has %d bonds, want %d", m.Name, z[0], 3*layers)
		}
		// Periodic layers: every host site keeps its four kagome bonds,
		// and the defect's corners one more.
		if !tc.p.Open {
			for i, s := range m.Sites[1:] {
				want := 4
				if (i % (3 * tc.l1 * tc.l2)) < 3 {
					want = 5
				}
				if z[i+1] != want || s.Group != "host" {
					t.Errorf("%s: site %s has %d bonds (want %d), group %q", m.Name, s.Label, z[i+1], want, s.Group)
				}
			}
		}
	}
}

// Every bad parameter is refused with a ParamError that names it (common
// practice, no source).
func TestLatticeParamErrors(t *testing.T) {
	for _, tc := range []struct {
		name   string
		err    error
		param  string
		reason string
	}{
		{"ring n=2", second(Ring(2, ChainParams{J1: 1})), "n", "needs n >= 3"},
		{"ring n=4 with J2", second(Ring(4, ChainParams{J1: 1, J2: 0.5})), "n", "needs n >= 5"},
		{"ring spin", second(Ring(5, ChainParams{Spin: 0.7, J1: 1})), "Spin", "not a positive multiple of 1/2"},
		{"ring NaN", second(Ring(5, ChainParams{J1: math.NaN()})), "J1", "not a finite number"},
		{"ring Jz without XXZ", second(Ring(5, ChainParams{J1: 1, Jz1: 2})), "XXZ", "set XXZ"},
		{"ring Inf g", second(Ring(5, ChainParams{J1: 1, G: math.Inf(-1)})), "G", "not a finite number"},
		{"ring too large", second(Ring(63, ChainParams{J1: 1})), "n", "more than the limit of 2^62"},
		{"ladder legs", second(Ladder(1, 4, LadderParams{JLeg: 1}, false)), "legs", "needs legs >= 2"},
		{"ladder rungs", second(Ladder(2, 0, LadderParams{JLeg: 1}, false)), "rungs", "needs rungs >= 1"},
		{"periodic ladder rungs", second(Ladder(2, 2, LadderParams{JLeg: 1}, true)), "rungs", "needs rungs >= 3"},
		{"ladder spin", second(Ladder(2, 3, LadderParams{Spin: -1}, true)), "Spin", "not a positive multiple"},
		{"ladder too large", second(Ladder(4, 16, LadderParams{Spin: 1}, true)), "legs, rungs", "2^101.4"},
		{"triangular L1=2", second(Triangular(2, 3, LatticeParams{J: 1}, true)), "L1", "needs L1 >= 3, not 2 (periodic images would bond two sites twice)"},
		{"triangular L2=1", second(Triangular(3, 1, LatticeParams{J: 1}, true)), "L2", "bonded to its own periodic image"},
		{"triangular open 1x1", second(Triangular(1, 1, LatticeParams{J: 1}, false)), "L1, L2", "single site"},
		{"triangular open L2=0", second(Triangular(3, 0, LatticeParams{J: 1}, false)), "L2", "needs L2 >= 1"},
		{"triangular DM", second(Triangular(3, 3, LatticeParams{J: 1, DM: 0.1}, true)), "DM", "inversion centre"},
		{"triangular Jz", second(Triangular(3, 3, LatticeParams{J: 1, Jz: 0.1}, true)), "XXZ", "set XXZ"},
		{"triangular too large", second(Triangular(8, 8, LatticeParams{J: 1}, true)), "L1, L2", "64 spins 1/2"},
		{"kagome L1=1", second(Kagome(1, 3, LatticeParams{J: 1}, true)), "L1", "a periodic kagome patch needs L1 >= 2"},
		{"kagome L2=1", second(Kagome(3, 1, LatticeParams{J: 1}, true)), "L2", "needs L2 >= 2"},
		{"kagome open L1=0", second(Kagome(0, 3, LatticeParams{J: 1}, false)), "L1", "needs L1 >= 1"},
		{"kagome too large", second(Kagome(4, 6, LatticeParams{J: 1}, true)), "L1, L2", "72 spins 1/2"},
		{"kagome NaN DM", second(Kagome(2, 2, LatticeParams{J: 1, DM: math.NaN()}, true)), "DM", "not a finite number"},
		{"defect layers", second(KagomeDefect(2, 2, KagomeDefectParams{J: 1, Layers: 3})), "Layers", "give 1"},
		{"defect centre spin", second(KagomeDefect(2, 2, KagomeDefectParams{J: 1, CentreSpin: 0.25})), "CentreSpin", "not a positive multiple"},
		{"defect host g", second(KagomeDefect(2, 2, KagomeDefectParams{J: 1, GHost: math.NaN()})), "GHost", "not a finite number"},
		{"defect JDefect", second(KagomeDefect(2, 2, KagomeDefectParams{J: 1, JDefect: math.Inf(1)})), "JDefect", "not a finite number"},
		{"defect L1", second(KagomeDefect(1, 2, KagomeDefectParams{J: 1})), "L1", "a periodic kagome patch needs L1 >= 2"},
		{"defect too large", second(KagomeDefect(3, 4, KagomeDefectParams{J: 1, Layers: 2})), "L1, L2", "72 host spins 1/2"},
	} {
		var pe *ParamError
		if !errors.As(tc.err, &pe) {
			t.Errorf("%s: %v, want a ParamError", tc.name, tc.err)
			continue
		}
		if pe.Param != tc.param || !strings.Contains(pe.Reason, tc.reason) {
			t.Errorf("%s: %v, want %s: ...%s...", tc.name, pe, tc.param, tc.reason)
		}
		if !strings.HasPrefix(tc.err.Error(), tc.param+": ") {
			t.Errorf("%s: %q does not start with the parameter", tc.name, tc.err)
		}
	}
}

func second(_ *Model, err error) error { return err }

// lowestEnergies diagonalizes a spin-1/2 model with J and Jz couplings in
// the sectors of total S^z given by twoSz (every sector when there are none)
// and returns the lowest level of each, indexed by 2 S^z. A test helper
// only, independent of the engine: the product basis of a fixed number of
// up spins and gonum's dense symmetric solver.
func lowestEnergies(t *testing.T, m *Model, twoSz ...int) map[int]float64 {
	t.Helper()
	n := len(m.Sites)
	for _, s := range m.Sites {
		if s.TwoS != 1 {
			t.Fatalf("%s: lowestEnergies takes spins 1/2", m.Name)
		}
	}
	for _, b := range m.Bonds {
		if b.DM != [3]float64{} || b.Tensor != [9]float64{} {
			t.Fatalf("%s: lowestEnergies takes J and Jz only", m.Name)
		}
	}
	out := map[int]float64{}
	for up := 0; up <= n; up++ {
		if len(twoSz) > 0 && !slices.Contains(twoSz, 2*up-n) {
			continue
		}
		var states []uint
		index := map[uint]int{}
		for s := uint(0); s < 1<<n; s++ {
			if bits.OnesCount(s) == up {
				index[s] = len(states)
				states = append(states, s)
			}
		}
		h := mat.NewSymDense(len(states), nil)
		for k, s := range states {
			for _, b := range m.Bonds {
				ua, ub := s>>b.A&1, s>>b.B&1
				if ua == ub {
					h.SetSym(k, k, h.At(k, k)+b.Jz/4)
					continue
				}
				h.SetSym(k, k, h.At(k, k)-b.Jz/4)
				flipped := s ^ (1 << b.A) ^ (1 << b.B)
				if l := index[flipped]; l > k {
					h.SetSym(k, l, h.At(k, l)+b.J/2)
				}
			}
		}
		var eig mat.EigenSym
		if !eig.Factorize(h, false) {
			t.Fatalf("%s: no eigenvalues", m.Name)
		}
		out[2*up-n] = eig.Values(nil)[0]

	}
	return out
}

func minimum(levels map[int]float64) float64 {
	e := math.Inf(1)
	for _, x := range levels {
		e = min(e, x)
	}
	return e
}

// End-to-end checks of the couplings the builders write, against closed
// forms, with a small dense diagonalization in the test (no engine).
func TestLatticeSpectra(t *testing.T) {
	// Heisenberg ring of 6: E0 = -(2 + sqrt(13))/2 (PHYSICS.md, EXACT).
	e := minimum(lowestEnergies(t, must(Ring(6, ChainParams{J1: 1}))))
	if want := -(2 + math.Sqrt(13)) / 2; math.Abs(e-want) > 1e-10 {
		t.Errorf("Heisenberg ring of 6: E0 = %.10f, want %.10f", e, want)
	}
	// Majumdar and Ghosh, J. Math. Phys. 10, 1388 (1969): J2 = J1/2, even
	// N, periodic: E0 = -3 J1 N / 8.
	e = minimum(lowestEnergies(t, must(Ring(8, ChainParams{J1: 2, J2: 1}))))
	if want := -3.0 * 2 * 8 / 8; math.Abs(e-want) > 1e-10 {
		t.Errorf("Majumdar-Ghosh ring of 8: E0 = %.10f, want %.10f", e, want)
	}
	// Lieb, Schultz and Mattis, Ann. Phys. 16, 407 (1961): the XX ring of
	// even N has E0 = -J / sin(pi/N).
	for _, n := range []int{6, 8} {
		e = minimum(lowestEnergies(t, must(Ring(n, ChainParams{J1: 1.5, XXZ: true}))))
		if want := -1.5 / math.Sin(math.Pi/float64(n)); math.Abs(e-want) > 1e-10 {
			t.Errorf("XX ring of %d: E0 = %.10f, want %.10f", n, e, want)
		}
	}
}

// Lieb and Mattis, J. Math. Phys. 3, 749 (1962): on a connected bipartite
// cluster with antiferromagnetic bonds between the sublattices A and B, the
// ground state has S = |N_A s_A - N_B s_B|. The ladders are bipartite by the
// colour (r + l) mod 2; the test finds the sublattices by a breadth-first
// colouring of the bond graph, and the ground-state spin S from the
// sectors: by SU(2) the lowest level of all lies in the sector of smallest
// |S^z| (S^z = S - floor(S)), it is reached in S^z = S, and the sector
// S^z = S + 1 is strictly higher.
func TestLadderLiebMattis(t *testing.T) {
	for _, tc := range []struct {
		m *Model
		s int // 2S expected from the sublattices
	}{
		{must(Ladder(3, 3, LadderParams{JLeg: 1, JRung: 0.6}, false)), 1},
		{must(Ladder(2, 4, LadderParams{JLeg: 1, JRung: 1.7}, true)), 0},
		{must(Ladder(2, 5, LadderParams{JLeg: 0.8, JRung: 1}, false)), 0},
	} {
		m := tc.m
		n := len(m.Sites)
		colour := make([]int, n)
		for i := range colour {
			colour[i] = -1
		}
		colour[0] = 0
		queue := []int{0}
		for len(queue) > 0 {
			a := queue[0]
			queue = queue[1:]
			for _, b := range m.Bonds {
				for _, e := range [][2]int{{b.A, b.B}, {b.B, b.A}} {
					if e[0] != a {
						continue
					}
					switch colour[e[1]] {
					case -1:
						colour[e[1]] = 1 - colour[a]
						queue = append(queue, e[1])
					case colour[a]:
						t.Fatalf("%s: not bipartite at %s-%s", m.Name, m.Sites[a].Label, m.Sites[e[1]].Label)
					}
				}
			}
		}
		nA := 0
		for i, c := range colour {
			if c < 0 {
				t.Fatalf("%s: not connected at %s", m.Name, m.Sites[i].Label)
			}
			nA += 1 - c
		}
		twoS := nA - (n - nA)
		if twoS < 0 {
			twoS = -twoS
		}
		if twoS != tc.s {
			t.Errorf("%s: sublattices %d and %d, want 2S = %d", m.Name, nA, n-nA, tc.s)
		}
		levels := lowestEnergies(t, m, n%2, twoS, twoS+2)
		e0 := levels[n%2]
		if got := levels[twoS]; math.Abs(got-e0) > 1e-9 {
			t.Errorf("%s: lowest level %.10f, but %.10f in 2S^z = %d", m.Name, e0, got, twoS)
		}
		if above := levels[twoS+2]; above-e0 < 1e-6 {
			t.Errorf("%s: the sector 2S^z = %d reaches %.10f, the ground state %.10f", m.Name, twoS+2, above, e0)
		}
	}
}
