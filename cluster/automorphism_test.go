package cluster

import (
	"errors"
	"math/big"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"testing"
)

// checkGroup checks what Automorphisms promises of its result: every
// element passes CheckPermutation, the elements are distinct, sorted, the
// first is the identity "E", and the set is closed under composition.
func checkGroup(t *testing.T, m *Model, group []Symmetry) {
	t.Helper()
	seen := map[string]bool{}
	for i, s := range group {
		if err := m.CheckPermutation(s.Perm); err != nil {
			t.Errorf("%s: element %s: %v", m.Name, s.Name, err)
		}
		k := Permutation(s.Perm).key()
		if seen[k] {
			t.Errorf("%s: element %s repeated", m.Name, s.Name)
		}
		seen[k] = true
		if i > 0 && slices.Compare(group[i-1].Perm, s.Perm) >= 0 {
			t.Errorf("%s: elements %d and %d out of order", m.Name, i-1, i)
		}
	}
	if len(group) == 0 || !Permutation(group[0].Perm).IsIdentity() || group[0].Name != "E" {
		t.Errorf("%s: the first element is not the identity E", m.Name)
	}
	if len(group) > 500 {
		return // closure checked on the smaller groups
	}
	for _, a := range group {
		for _, b := range group {
			if !seen[Permutation(a.Perm).Compose(b.Perm).key()] {
				t.Fatalf("%s: %s %s is not in the group", m.Name, a.Name, b.Name)
			}
		}
	}
}

func automorphismOrder(t *testing.T, m *Model) int {
	t.Helper()
	group, err := Automorphisms(m, 0)
	if err != nil {
		t.Fatalf("%s: %v", m.Name, err)
	}
	checkGroup(t, m, group)
	_, order, err := AutomorphismGenerators(m, false)
	if err != nil || order.Cmp(big.NewInt(int64(len(group)))) != 0 {
		t.Errorf("%s: AutomorphismGenerators gives order %v (%v), Automorphisms %d elements", m.Name, order, err, len(group))
	}
	return len(group)
}

// The orders of the symmetry groups of the lattice builders, each with its
// source.
func TestAutomorphismOrders(t *testing.T) {
	for _, tc := range []struct {
		m      *Model
		order  int
		source string
	}{
		// The ring of N sites: the dihedral group D_N of order 2N (textbook).
		{must(Ring(3, ChainParams{J1: 1})), 6, "D_3"},
		{must(Ring(4, ChainParams{J1: 1})), 8, "D_4"},
		{must(Ring(9, ChainParams{J1: 1})), 18, "D_9"},
		{must(Ring(16, ChainParams{J1: 1, J2: 0.3})), 32, "D_16 (J1-J2)"},
		// With J2 = J1 on 5 sites every pair is bonded equally: the complete
		// graph K_5, symmetric group S_5 of order 5! = 120 (derivation).
		{must(Ring(5, ChainParams{J1: 1, J2: 1})), 120, "S_5"},
		// DM with the same circulation on every bond: a reflection reverses
		// every bond, so it would need -D (derivation), leaving the N
		// translations.
		{must(Ring(3, ChainParams{J1: 1, DM: [3]float64{0, 0, 0.2}})), 3, "C_3 (DM)"},
		{must(Ring(10, ChainParams{J1: 1, DM: [3]float64{0, 0, 0.2}})), 10, "C_10 (DM)"},
		{must(Ring(7, ChainParams{J1: 1, DM: [3]float64{0.3, 0, 0}})), 7, "C_7 (in-plane DM)"},
		// p6mm on an L x L torus: L^2 translations times the point group 6mm
		// of order 12 (International Tables for Crystallography, vol. A).
		{must(Triangular(4, 4, LatticeParams{J: 1}, true)), 12 * 16, "p6mm, L = 4"},
		{must(Triangular(5, 5, LatticeParams{J: 1}, true)), 12 * 25, "p6mm, L = 5"},
		{must(Triangular(6, 6, LatticeParams{J: 1}, true)), 12 * 36, "p6mm, L = 6"},
		{must(Kagome(2, 2, LatticeParams{J: 1}, true)), 12 * 4, "p6mm, L = 2"},
		{must(Kagome(4, 4, LatticeParams{J: 1}, true)), 12 * 16, "p6mm, L = 4"},
		// The 3 x 3 triangular torus is K_{3,3,3} (see TestLatticeTriangles):
		// any permutation within each of the three parts and of the parts,
		// S_3 wr S_3, of order 6^3 * 6 = 1296 (derivation), 12 times p6mm.
		{must(Triangular(3, 3, LatticeParams{J: 1}, true)), 1296, "K_{3,3,3}"},
		// The kagome lattice is the line graph of the honeycomb lattice, and
		// by Whitney's theorem (H. Whitney, Amer. J. Math. 54, 150 (1932)) a
		// connected graph other than K_3 and K_{1,3} has the automorphism
		// group of its line graph. The 3 x 3 honeycomb torus is the Pappus
		// graph, whose group has order 216 (MEM: graph tables; Coxeter, Bull.
		// Amer. Math. Soc. 56, 413 (1950)); TestKagomeIsLineGraph computes
		// the honeycomb's own. Twice p6mm.
		{must(Kagome(3, 3, LatticeParams{J: 1}, true)), 216, "Pappus graph"},
		// DM keeps the rotations only, 6 L^2 (derivation in Kagome's doc).
		{must(Kagome(2, 2, LatticeParams{J: 1, DM: 0.1}, true)), 6 * 4, "p6, L = 2"},
		{must(Kagome(3, 3, LatticeParams{J: 1, DM: 0.1}, true)), 6 * 9, "p6, L = 3"},
		{must(Kagome(4, 4, LatticeParams{J: 1, DM: 0.1}, true)), 6 * 16, "p6, L = 4"},
		// A two-leg ladder with JLeg != JRung: D_L for the legs times the
		// swap of the legs, 4L; with JLeg = JRung and 4 rungs the ladder is
		// the cube graph Q_3, of order 2^3 3! = 48 (textbook).
		{must(Ladder(2, 5, LadderParams{JLeg: 1, JRung: 0.5}, true)), 20, "D_5 x Z_2"},
		{must(Ladder(2, 4, LadderParams{JLeg: 1, JRung: 1}, true)), 48, "Q_3"},
		// The defect fixes one triangle of the kagome layer: its stabilizer
		// in p6mm is the site group 3m of order 6 (International Tables:
		// Wyckoff position of the triangle centres in p6mm).
		{must(KagomeDefect(2, 2, KagomeDefectParams{J: 1, JDefect: 0.3})), 6, "3m"},
		{must(KagomeDefect(4, 4, KagomeDefectParams{J: 1, JDefect: 0.3})), 6, "3m"},
		// Two layers meet only at the defect, so each can be turned and
		// mirrored on its own: (3m x 3m) x| Z_2, 6 * 6 * 2 = 72 (derivation).
		{must(KagomeDefect(2, 2, KagomeDefectParams{J: 1, JDefect: 0.3, Layers: 2})), 72, "(3m x 3m) x| Z_2"},
		// An open rhombus of 3 x 3 kagome cells: the mirror R, and the swap
		// of the two corners of the "ear" triangle of the far cell, whose
		// sites v2_2 and w2_2 are bonded only to each other and to u2_2:
		// 2 * 2 = 4 (derivation).
		{must(Kagome(3, 3, LatticeParams{J: 1}, false)), 4, "R x ear"},
		// Two dimers (an open chain of 4 whose middle bond is zero, which
		// counts as no bond): swap within each and swap the two, Z_2 wr Z_2,
		// of order 8 (derivation).
		{zeroMiddleBond(), 8, "Z_2 wr Z_2"},
	} {
		if got := automorphismOrder(t, tc.m); got != tc.order {
			t.Errorf("%s: %d automorphisms, want %d (%s)", tc.m.Name, got, tc.order, tc.source)
		}
	}
}

func zeroMiddleBond() *Model {
	m := Chain(4, 0.5, 1, false)
	m.Bonds[1].J, m.Bonds[1].Jz = 0, 0
	m.Name = "two dimers"
	return m
}

// Whitney's theorem (see TestAutomorphismOrders): the 3 x 3 honeycomb torus
// and the 3 x 3 kagome torus, its line graph, have groups of the same order.
func TestKagomeIsLineGraph(t *testing.T) {
	const L = 3
	hc := &Model{Name: "honeycomb 3 x 3 torus"}
	for i := range 2 * L * L {
		hc.Sites = append(hc.Sites, Site{Label: chainLabel(i), TwoS: 1, G: IsotropicG(2)})
	}
	a := func(i, j int) int { return 2 * (mod(i, L) + L*mod(j, L)) }
	for j := range L {
		for i := range L {
			for _, b := range []int{a(i, j) + 1, a(i-1, j) + 1, a(i, j-1) + 1} {
				hc.Bonds = append(hc.Bonds, Bond{A: a(i, j), B: b, J: 1, Jz: 1})
			}
		}
	}
	if _, err := FromProto(hc.ToProto()); err != nil {
		t.Fatal(err)
	}
	k := must(Kagome(L, L, LatticeParams{J: 1}, true))
	if h, g := automorphismOrder(t, hc), automorphismOrder(t, k); h != 216 || g != 216 {
		t.Errorf("honeycomb %d, kagome %d automorphisms; want 216 both", h, g)
	}
}

// The heptamers of testdata. Without DM (testdata/demo-multimer.json) the
// triangles are complete graphs K_3, each bonded to the centre by equal
// couplings and not to each other, so any permutation of each triangle and
// the swap of the two are symmetries: (S_3 x S_3) x| Z_2, of order
// 6 * 6 * 2 = 72 (derivation), which holds the D_3h of the geometry (C3,
// the mirrors; order 12) as a subgroup. With DM of one circulation on both
// triangles (cluster/testdata/heptamer.json), only the rotations of each
// triangle keep it: (C_3 x C_3) x| Z_2, of order 18 (derivation). Keeping
// the groups "top" and "bottom" loses the swap: 36 and 9.
func TestAutomorphismsHeptamer(t *testing.T) {
	for _, tc := range []struct {
		path               string
		order, keepsGroups int
		declared           []string
	}{
		{filepath.Join("..", "testdata", "demo-multimer.json"), 72, 36, []string{"C3", "mirror-h", "mirror-v"}},
		{filepath.Join("testdata", "heptamer.json"), 18, 9, []string{"C3", "mirror-h"}},
	} {
		m, err := LoadFile(tc.path)
		if err != nil {
			t.Fatal(err)
		}
		if got := automorphismOrder(t, m); got != tc.order {
			t.Errorf("%s: %d automorphisms, want %d", tc.path, got, tc.order)
		}
		group, err := Automorphisms(m, 0)
		if err != nil {
			t.Fatal(err)
		}
		var names []string
		for _, s := range group {
			if slices.Contains(tc.declared, s.Name) {
				names = append(names, s.Name)
			}
		}
		slices.Sort(names)
		want := slices.Clone(tc.declared)
		slices.Sort(want)
		if !slices.Equal(names, want) {
			t.Errorf("%s: the group holds the declared %v, want %v", tc.path, names, want)
		}
		kept, err := AutomorphismsKeepingGroups(m, 0)
		if err != nil || len(kept) != tc.keepsGroups {
			t.Errorf("%s: %d automorphisms keeping the groups (%v), want %d", tc.path, len(kept), err, tc.keepsGroups)
		}
		for _, s := range kept {
			for i, p := range s.Perm {
				if m.Sites[i].Group != m.Sites[p].Group {
					t.Errorf("%s: %s maps %s to another group", tc.path, s.Name, m.Sites[i].Label)
				}
			}
		}
		// The same for DefectMultimer and for KagomeDefect on one open
		// cell, which TestKagomeDefectIsTheHeptamer shows is the heptamer.
		dm := 0.0
		if tc.order == 18 {
			dm = 15
		}
		for _, b := range []*Model{
			DefectMultimer(MultimerParams{JPlanar: 180, JDefect: 12, DMPlanar: dm}),
			must(KagomeDefect(1, 1, KagomeDefectParams{J: 180, JDefect: 12, DM: dm, Layers: 2, Open: true})),
		} {
			if got := automorphismOrder(t, b); got != tc.order {
				t.Errorf("%s: %d automorphisms, want %d", b.Name, got, tc.order)
			}
		}
	}
}

// A g tensor on one site that no other site has reduces the group to the
// stabilizer of that site (derivation: P must map the site onto itself, and
// every P of the old group that does is still a symmetry); on a
// vertex-transitive patch of N sites that is |G| / N.
func TestAutomorphismsStabilizer(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for _, m := range []*Model{
		must(Kagome(3, 3, LatticeParams{J: 1}, true)),
		must(Triangular(4, 4, LatticeParams{J: 1}, true)),
		must(Ring(8, ChainParams{J1: 1})),
	} {
		full, err := Automorphisms(m, 0)
		if err != nil {
			t.Fatal(err)
		}
		k := rng.IntN(len(m.Sites))
		m.Sites[k].G = [9]float64{2 + rng.Float64(), rng.Float64(), 0, 0, 2, 0, 0, 0, 2.1}
		m.Symmetries = nil
		reduced, err := Automorphisms(m, 0)
		if err != nil {
			t.Fatal(err)
		}
		checkGroup(t, m, reduced)
		var want [][]int
		for _, s := range full {
			if s.Perm[k] == k {
				want = append(want, s.Perm)
			}
		}
		if len(reduced) != len(want) || len(reduced)*len(m.Sites) != len(full) {
			t.Errorf("%s with g changed on %s: %d automorphisms, want the stabilizer's %d = %d / %d",
				m.Name, m.Sites[k].Label, len(reduced), len(want), len(full), len(m.Sites))
		}
		for i, s := range reduced {
			if i < len(want) && !slices.Equal(s.Perm, want[i]) {
				t.Errorf("%s: element %d is %v, want %v", m.Name, i, s.Perm, want[i])
			}
		}
	}
}

// On small random models, Automorphisms finds exactly the permutations
// that pass CheckPermutation among all n! (brute force; common practice,
// no source). Half the models are made symmetric under a random
// permutation sigma, the others are not, so that there are symmetries to
// find and to miss: sites and pairs of one orbit of sigma get the same spin
// and g, and the same coupling, drawn from a few kinds with DM vectors and
// asymmetric tensors among them (symmetric kinds only where sigma reverses
// a pair), and bonds are stored in either order.
func TestAutomorphismsBruteForce(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	kinds := []Bond{
		{J: 1, Jz: 1},
		{J: 0.5, Jz: 0.5},
		{J: 1, Jz: 1, DM: [3]float64{0, 0, 0.2}},
		{Tensor: [9]float64{0, 0.3, 0, 0, 0, 0, 0, 0, 1}},
	}
	nontrivial := 0
	for trial := range 80 {
		n := 3 + rng.IntN(5)
		sigma := Permutation(rng.Perm(n))
		if trial%2 == 1 {
			sigma = Identity(n) // no symmetry built in
		}
		m := &Model{Name: "random"}
		for range n {
			m.Sites = append(m.Sites, Site{TwoS: 1, G: IsotropicG(2)})
		}
		assigned := make([]bool, n)
		for i := range n {
			m.Sites[i].Label = chainLabel(i)
			if assigned[i] {
				continue // set with its orbit
			}
			twoS, g := 1+rng.IntN(2), IsotropicG(2+0.1*float64(rng.IntN(2)))
			for x := i; !assigned[x]; x = sigma[x] {
				assigned[x] = true
				m.Sites[x].TwoS, m.Sites[x].G = twoS, g
			}
		}
		done := map[[2]int]bool{}
		for a := range n {
			for b := a + 1; b < n; b++ {
				if done[[2]int{a, b}] {
					continue
				}
				var orbit [][2]int
				reversed := false
				for x, y := a, b; ; {
					orbit = append(orbit, [2]int{x, y})
					done[[2]int{min(x, y), max(x, y)}] = true
					x, y = sigma[x], sigma[y]
					if x == b && y == a {
						reversed = true
					}
					if x == a && y == b || x == b && y == a {
						break
					}
				}
				if rng.IntN(3) == 0 {
					continue
				}
				kind := kinds[rng.IntN(len(kinds))]
				if reversed {
					kind = kinds[rng.IntN(2)]
				}
				for _, e := range orbit {
					bond := kind
					bond.A, bond.B = e[0], e[1]
					if bond.DM == [3]float64{} && bond.Tensor == [9]float64{} && rng.IntN(2) == 0 {
						bond.A, bond.B = e[1], e[0]
					}
					m.Bonds = append(m.Bonds, bond)
				}
			}
		}
		var want [][]int
		forEachPermutation(n, func(p []int) {
			if m.CheckPermutation(p) == nil {
				want = append(want, slices.Clone(p))
			}
		})
		slices.SortFunc(want, slices.Compare)
		if !slices.ContainsFunc(want, func(p []int) bool { return slices.Equal(p, sigma) }) {
			t.Fatalf("trial %d: the test model is wrong: sigma %v is no symmetry", trial, sigma)
		}
		got, err := Automorphisms(m, 0)
		if err != nil {
			t.Fatal(err)
		}
		if len(got) != len(want) {
			t.Errorf("trial %d: %d automorphisms, brute force %d", trial, len(got), len(want))
			continue
		}
		for i := range got {
			if !slices.Equal(got[i].Perm, want[i]) {
				t.Errorf("trial %d: element %d is %v, brute force %v", trial, i, got[i].Perm, want[i])
			}
		}
		if len(got) > 1 {
			nontrivial++
		}
	}
	t.Logf("%d of 80 random models have symmetries", nontrivial)
	if nontrivial < 30 {
		t.Errorf("only %d of the random models have symmetries: the test is too weak", nontrivial)
	}
}

// forEachPermutation calls f with every permutation of n (Heap's algorithm).
func forEachPermutation(n int, f func([]int)) {
	p := Identity(n)
	c := make([]int, n)
	f(p)
	for i := 0; i < n; {
		if c[i] < i {
			if i%2 == 0 {
				p[0], p[i] = p[i], p[0]
			} else {
				p[c[i]], p[i] = p[i], p[c[i]]
			}
			f(p)
			c[i]++
			i = 0
		} else {
			c[i] = 0
			i++
		}
	}
}

// The group does not depend on how the sites are numbered: relabelling the
// sites by a random permutation Q conjugates the group, P -> Q P Q^-1
// (derivation), so its order is kept and each element maps to one of the
// new group.
func TestAutomorphismsRelabelled(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 10))
	for _, m := range []*Model{
		must(KagomeDefect(3, 3, KagomeDefectParams{J: 1, JDefect: 0.2, Layers: 2})),
		must(Triangular(5, 5, LatticeParams{J: 1}, true)),
		must(Kagome(3, 3, LatticeParams{J: 1, DM: 0.3}, true)),
	} {
		n := len(m.Sites)
		q := Permutation(rng.Perm(n)) // old site i becomes new site q[i]
		r := &Model{Name: m.Name + ", relabelled", Sites: make([]Site, n)}
		for i, s := range m.Sites {
			r.Sites[q[i]] = s
		}
		for _, b := range m.Bonds {
			b.A, b.B = q[b.A], q[b.B]
			r.Bonds = append(r.Bonds, b)
		}
		rng.Shuffle(len(r.Bonds), func(i, j int) { r.Bonds[i], r.Bonds[j] = r.Bonds[j], r.Bonds[i] })
		old, err := Automorphisms(m, 0)
		if err != nil {
			t.Fatal(err)
		}
		relabelled, err := Automorphisms(r, 0)
		if err != nil {
			t.Fatal(err)
		}
		if len(old) != len(relabelled) {
			t.Errorf("%s: %d automorphisms, %d after relabelling", m.Name, len(old), len(relabelled))
			continue
		}
		in := map[string]bool{}
		for _, s := range relabelled {
			in[Permutation(s.Perm).key()] = true
		}
		for _, s := range old {
			if !in[q.Compose(s.Perm).Compose(q.Inverse()).key()] {
				t.Errorf("%s: %s has no image after relabelling", m.Name, s.Name)
				break
			}
		}
	}
}

// A group over the limit is refused with its order: the star of a spin 1
// and 20 spins 1/2 bonded to it and not to each other has the group S_20 of
// the outer spins, 20! = 2432902008176640000 (textbook), which
// AutomorphismGenerators still handles.
func TestAutomorphismsLimit(t *testing.T) {
	star := &Model{Name: "star", Sites: []Site{{Label: "c", TwoS: 2, G: IsotropicG(2)}}}
	for i := range 20 {
		star.Sites = append(star.Sites, Site{Label: chainLabel(i), TwoS: 1, G: IsotropicG(2)})
		star.Bonds = append(star.Bonds, Bond{A: 0, B: i + 1, J: 1, Jz: 1})
	}
	_, err := Automorphisms(star, 0)
	var tooLarge *GroupTooLargeError
	want, _ := new(big.Int).SetString("2432902008176640000", 10)
	if !errors.As(err, &tooLarge) || tooLarge.Order.Cmp(want) != 0 || tooLarge.Limit != DefaultGroupLimit {
		t.Errorf("star: %v, want a GroupTooLargeError of order 20!", err)
	}
	gens, order, err := AutomorphismGenerators(star, false)
	if err != nil || order.Cmp(want) != 0 {
		t.Errorf("star: order %v (%v), want 20!", order, err)
	}
	var perms []Permutation
	for _, g := range gens {
		if err := star.CheckPermutation(g.Perm); err != nil {
			t.Errorf("star: generator %s: %v", g.Name, err)
		}
		perms = append(perms, g.Perm)
	}
	// The generators generate the whole group: checked on a smaller star,
	// S_6 of order 720 (textbook).
	small := &Model{Name: "small star", Sites: star.Sites[:7], Bonds: star.Bonds[:6]}
	gens, _, _ = AutomorphismGenerators(small, false)
	perms = perms[:0]
	for _, g := range gens {
		perms = append(perms, g.Perm)
	}
	if group, err := Closure(perms, 0); err != nil || len(group) != 720 {
		t.Errorf("small star: the generators generate %d elements (%v), want 720", len(group), err)
	}

	tri := must(Triangular(3, 3, LatticeParams{J: 1}, true))
	_, err = Automorphisms(tri, 1000)
	if !errors.As(err, &tooLarge) || tooLarge.Order.Int64() != 1296 || tooLarge.Limit != 1000 {
		t.Errorf("3 x 3 triangular with limit 1000: %v, want a GroupTooLargeError of order 1296", err)
	}
	// A model with no symmetry at all: the identity alone, and no generators.
	m := Chain(3, 0.5, 1, false)
	m.Bonds[0].J = 2
	if group, err := Automorphisms(m, 0); err != nil || len(group) != 1 {
		t.Errorf("asymmetric chain: %d elements (%v), want 1", len(group), err)
	}
	if gens, order, err := AutomorphismGenerators(m, false); err != nil || len(gens) != 0 || order.Int64() != 1 {
		t.Errorf("asymmetric chain: %d generators, order %v (%v); want none and 1", len(gens), order, err)
	}
}

// checkAbelian checks what AbelianGenerators promises: the generators
// commute, each has the order it reports, their powers g_1^k_1 ... g_r^k_r
// are all different (a direct product, of the product of the orders), every
// one passes CheckPermutation, and no element of group outside the subgroup
// commutes with all of them (maximal). It returns the names and orders.
func checkAbelian(t *testing.T, m *Model, group []Symmetry) []string {
	t.Helper()
	gens, err := AbelianGenerators(m, group)
	if err != nil {
		t.Fatalf("%s: %v", m.Name, err)
	}
	var perms []Permutation
	var out []string
	size := 1
	for _, g := range gens {
		p := Permutation(g.Perm)
		if p.Order() != g.RelativeOrder {
			t.Errorf("%s: %s has order %d, reported %d", m.Name, g.Name, p.Order(), g.RelativeOrder)
		}
		if err := m.CheckPermutation(p); err != nil {
			t.Errorf("%s: %s: %v", m.Name, g.Name, err)
		}
		for _, q := range perms {
			if !p.Commutes(q) {
				t.Errorf("%s: %s does not commute with an earlier generator", m.Name, g.Name)
			}
		}
		perms = append(perms, p)
		size *= g.RelativeOrder
		out = append(out, g.Name+"^"+string(rune('0'+g.RelativeOrder)))
	}
	sub, err := Closure(perms, 0)
	if err != nil || len(sub) != size {
		t.Errorf("%s: the generators give %d elements (%v), the product of their orders is %d", m.Name, len(sub), err, size)
	}
	in := map[string]bool{}
	for _, s := range sub {
		in[s.key()] = true
	}
	for _, s := range group {
		p := Permutation(s.Perm)
		if in[p.key()] {
			continue
		}
		commutes := true
		for _, q := range perms {
			commutes = commutes && p.Commutes(q)
		}
		if commutes {
			t.Errorf("%s: %s commutes with the subgroup but is not in it: not maximal", m.Name, s.Name)
		}
	}
	return out
}

// The abelian subgroups: the N translations of a ring (the reflections do
// not commute with them, derivation: R T R = T^-1), the L^2 translations of
// a torus, and C3 x mirror-h of the heptamer (the mirrors through the axis
// do not commute with C3).
func TestAbelianGenerators(t *testing.T) {
	for _, tc := range []struct {
		m    *Model
		want []string
	}{
		{must(Ring(8, ChainParams{J1: 1})), []string{"T1^8"}},
		{must(Ring(6, ChainParams{J1: 1, DM: [3]float64{0, 0, 1}})), []string{"T1^6"}},
		{must(Triangular(4, 4, LatticeParams{J: 1}, true)), []string{"T1^4", "T2^4"}},
		{must(Kagome(3, 3, LatticeParams{J: 1}, true)), []string{"T1^3", "T2^3"}},
		{must(Kagome(2, 3, LatticeParams{J: 1}, true)), []string{"T1^2", "T2^3"}},
		{DefectMultimer(MultimerParams{JPlanar: 1, JDefect: 0.1}), []string{"C3^3", "mirror-h^2"}},
	} {
		group, err := Automorphisms(tc.m, 0)
		if err != nil {
			t.Fatal(err)
		}
		if got := checkAbelian(t, tc.m, group); !slices.Equal(got, tc.want) {
			t.Errorf("%s: %v, want %v", tc.m.Name, got, tc.want)
		}
	}

	// A basis is a direct product: on a ring of 8 with T^4 declared first,
	// T^4 cannot be a factor (Z_8 is not Z_2 x Z_4; derivation), so the
	// basis is T alone. On a ring of 6, T^3 and T^2 are one (Z_6 = Z_2 x
	// Z_3, coprime orders).
	r8 := must(Ring(8, ChainParams{J1: 1}))
	t1 := Permutation(r8.Symmetries[0].Perm)
	r8.Symmetries = append([]Symmetry{{Name: "T4", Perm: t1.Power(4)}}, r8.Symmetries...)
	if got := checkAbelian(t, r8, nil); !slices.Equal(got, []string{"T1^8"}) {
		t.Errorf("ring of 8 with T4 first: %v, want [T1^8]", got)
	}
	r6 := must(Ring(6, ChainParams{J1: 1}))
	t1 = Permutation(r6.Symmetries[0].Perm)
	r6.Symmetries = []Symmetry{{Name: "T3", Perm: t1.Power(3)}, {Name: "T2", Perm: t1.Power(2)}}
	if got := checkAbelian(t, r6, nil); !slices.Equal(got, []string{"T3^2", "T2^3"}) {
		t.Errorf("ring of 6 with T3, T2: %v, want [T3^2 T2^3]", got)
	}

	// Every group of the orders test gives a valid basis.
	for _, m := range []*Model{
		must(Triangular(3, 3, LatticeParams{J: 1}, true)),
		must(KagomeDefect(2, 2, KagomeDefectParams{J: 1, JDefect: 0.3, Layers: 2})),
		must(Ladder(2, 4, LadderParams{JLeg: 1, JRung: 1}, true)),
		must(Kagome(3, 3, LatticeParams{J: 1}, false)),
	} {
		group, err := Automorphisms(m, 0)
		if err != nil {
			t.Fatal(err)
		}
		checkAbelian(t, m, group)
	}

	// No symmetry at all: no generators. A non-symmetry in the list: refused.
	m := Chain(3, 0.5, 1, false)
	m.Bonds[0].J = 2
	m.Symmetries = nil
	if gens, err := AbelianGenerators(m, nil); err != nil || len(gens) != 0 {
		t.Errorf("no symmetry: %v, %v", gens, err)
	}
	if _, err := AbelianGenerators(m, []Symmetry{{Name: "swap", Perm: []int{2, 1, 0}}}); err == nil {
		t.Error("a permutation that is no symmetry accepted")
	}
}

// Benchmarks of the search on the largest patches (no thresholds).
func BenchmarkAutomorphismsKagome36(b *testing.B) {
	benchmarkAutomorphisms(b, must(Kagome(3, 4, LatticeParams{J: 1}, true)))
}

func BenchmarkAutomorphismsKagome48(b *testing.B) {
	benchmarkAutomorphisms(b, must(Kagome(4, 4, LatticeParams{J: 1}, true)))
}

func BenchmarkAutomorphismsTriangular49(b *testing.B) {
	benchmarkAutomorphisms(b, must(Triangular(7, 7, LatticeParams{J: 1}, true)))
}

func BenchmarkAutomorphismsKagomeDefect55(b *testing.B) {
	benchmarkAutomorphisms(b, must(KagomeDefect(3, 3, KagomeDefectParams{J: 1, JDefect: 0.2, Layers: 2})))
}

func benchmarkAutomorphisms(b *testing.B, m *Model) {
	for b.Loop() {
		if _, err := Automorphisms(m, 0); err != nil {
			b.Fatal(err)
		}
	}
}
