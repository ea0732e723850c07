package cluster

import (
	"math/rand/v2"
	"strings"
	"testing"
)

// twoSites returns sites a -> b with one bond of the given coupling.
func twoSites(b Bond) *Model {
	b.A, b.B = 0, 1
	return &Model{
		Sites: []Site{{Label: "a", TwoS: 1, G: IsotropicG(2)}, {Label: "b", TwoS: 1, G: IsotropicG(2)}},
		Bonds: []Bond{b},
	}
}

func TestCheckPermutationMultimerDM(t *testing.T) {
	m := DefectMultimer(MultimerParams{JPlanar: 190, JDefect: 20, DMPlanar: 15, GHost: 2.1, GCentre: 2.2})
	for _, tc := range []struct {
		name   string
		perm   []int
		reason string // "" when it is a symmetry
	}{
		{"identity", []int{0, 1, 2, 3, 4, 5, 6}, ""},
		{"C3", []int{0, 2, 3, 1, 5, 6, 4}, ""},
		{"C3 squared", []int{0, 3, 1, 2, 6, 4, 5}, ""},
		{"mirror-h", []int{0, 4, 5, 6, 1, 2, 3}, ""},
		{"C3 times mirror-h", []int{0, 5, 6, 4, 2, 3, 1}, ""},
		// The vertical mirror reverses the circulation of both triangles, but
		// D^z stays: refused, and the reason names the DM sign.
		{"mirror-v", []int{0, 1, 3, 2, 4, 6, 5}, "a DM vector changes sign"},
		// The centre is a different site (another g).
		{"centre to host", []int{1, 0, 2, 3, 4, 5, 6}, "g tensors differ"},
		// Swapping two sites of one triangle also reverses a DM bond.
		{"swap t1 t2", []int{0, 2, 1, 3, 4, 5, 6}, "a DM vector changes sign"},
	} {
		err := m.CheckPermutation(tc.perm)
		switch {
		case tc.reason == "" && err != nil:
			t.Errorf("%s: refused: %v", tc.name, err)
		case tc.reason != "" && err == nil:
			t.Errorf("%s: accepted, want a refusal", tc.name)
		case tc.reason != "" && !strings.Contains(err.Error(), tc.reason):
			t.Errorf("%s: error %q, want it to contain %q", tc.name, err, tc.reason)
		}
	}
	// Without DM the vertical mirror holds.
	m0 := DefectMultimer(MultimerParams{JPlanar: 190, JDefect: 20})
	if err := m0.CheckPermutation([]int{0, 1, 3, 2, 4, 6, 5}); err != nil {
		t.Errorf("mirror-v without DM refused: %v", err)
	}
}

func TestCheckPermutationChainTranslation(t *testing.T) {
	m := Chain(8, 1, 10, true)
	perm := make([]int, 8)
	for k := 1; k < 8; k++ {
		for i := range perm {
			perm[i] = (i + k) % 8
		}
		if err := m.CheckPermutation(perm); err != nil {
			t.Errorf("translation by %d refused: %v", k, err)
		}
	}
	// An open chain is not translation invariant.
	open := Chain(8, 1, 10, false)
	for i := range perm {
		perm[i] = (i + 1) % 8
	}
	if err := open.CheckPermutation(perm); err == nil || !strings.Contains(err.Error(), "which has no bond") {
		t.Errorf("translation of an open chain: %v, want a missing bond", err)
	}
}

// A permutation that reverses a DM bond holds only if the bond that it lands
// on carries the opposite D: a -> b -> c with D on a -> b and on c -> b is
// mirror symmetric, with D on a -> b and b -> c it is not.
func TestCheckPermutationDMReversal(t *testing.T) {
	sites := []Site{{Label: "a", TwoS: 1, G: IsotropicG(2)}, {Label: "b", TwoS: 1, G: IsotropicG(2)}, {Label: "c", TwoS: 1, G: IsotropicG(2)}}
	d := [3]float64{0.3, -0.2, 1}
	mirror := []int{2, 1, 0}
	flipped := &Model{Sites: sites, Bonds: []Bond{{A: 0, B: 1, J: 5, Jz: 5, DM: d}, {A: 2, B: 1, J: 5, Jz: 5, DM: d}}}
	if err := flipped.CheckPermutation(mirror); err != nil {
		t.Errorf("D on a -> b and c -> b: mirror refused: %v", err)
	}
	same := &Model{Sites: sites, Bonds: []Bond{{A: 0, B: 1, J: 5, Jz: 5, DM: d}, {A: 1, B: 2, J: 5, Jz: 5, DM: d}}}
	if err := same.CheckPermutation(mirror); err == nil || !strings.Contains(err.Error(), "DM vector changes sign") {
		t.Errorf("D on a -> b and b -> c: mirror %v, want a refusal naming the DM sign", err)
	}
	// Storing b -> c as c -> b with -D is the same Hamiltonian, and the same verdict.
	sameReversed := &Model{Sites: sites, Bonds: []Bond{{A: 0, B: 1, J: 5, Jz: 5, DM: d}, {A: 2, B: 1, J: 5, Jz: 5, DM: [3]float64{-d[0], -d[1], -d[2]}}}}
	if err := sameReversed.CheckPermutation(mirror); err == nil {
		t.Error("D on a -> b and -D on c -> b: mirror accepted")
	}

	// The swap of a single DM bond is never a symmetry; of a plain one always.
	if err := twoSites(Bond{DM: [3]float64{0, 0, 1}}).CheckPermutation([]int{1, 0}); err == nil {
		t.Error("swap across a DM bond accepted")
	}
	if err := twoSites(Bond{J: 3, Jz: -1}).CheckPermutation([]int{1, 0}); err != nil {
		t.Errorf("swap across an XXZ bond refused: %v", err)
	}
}

// A reversed bond enters with its tensor transposed: a swap of two sites
// holds for a symmetric tensor and fails for one that is not.
func TestCheckPermutationTensor(t *testing.T) {
	if err := twoSites(Bond{Tensor: [9]float64{0, 1, 0, 1, 0, 0, 0, 0, 2}}).CheckPermutation([]int{1, 0}); err != nil {
		t.Errorf("symmetric tensor: %v", err)
	}
	err := twoSites(Bond{Tensor: [9]float64{0, 1, 0, 0, 0, 0, 0, 0, 0}}).CheckPermutation([]int{1, 0})
	if err == nil || !strings.Contains(err.Error(), "enters transposed") {
		t.Errorf("non-symmetric tensor: %v, want a refusal", err)
	}
	// An antisymmetric tensor is a DM vector in another form: with the
	// opposite DM on the same bond, the bond is plain exchange again.
	k := Bond{J: 1, Jz: 1, DM: [3]float64{0, 0, 0.5}, Tensor: [9]float64{0, -0.5, 0, 0.5, 0, 0, 0, 0, 0}}
	if err := twoSites(k).CheckPermutation([]int{1, 0}); err != nil {
		t.Errorf("DM cancelled by the tensor: %v", err)
	}
}

func TestCheckPermutationSites(t *testing.T) {
	m := &Model{Sites: []Site{
		{Label: "a", TwoS: 2, G: IsotropicG(2)},
		{Label: "b", TwoS: 2, G: [9]float64{2, 0, 0, 0, 2, 0, 0, 0, 2.1}},
		{Label: "c", TwoS: 2, G: IsotropicG(2), SingleIon: -4},
		{Label: "d", TwoS: 2, G: IsotropicG(2)},
		{Label: "e", TwoS: 2, G: [9]float64{2, 0.1, 0, 0, 2, 0, 0, 0, 2}},
		{Label: "f", TwoS: 2, G: [9]float64{2, 0, 0, 0.1, 2, 0, 0, 0, 2}},
	}}
	for _, tc := range []struct {
		perm   []int
		reason string
	}{
		{[]int{3, 1, 2, 0, 4, 5}, ""},
		{[]int{1, 0, 2, 3, 4, 5}, "g tensors differ: g^zz is 2 on a and 2.1 on b"},
		{[]int{2, 1, 0, 3, 4, 5}, "single-ion terms differ: A is 0 K on a and -4 K on c"},
		// A g tensor is not symmetric in general; its transpose is another one.
		{[]int{0, 1, 2, 3, 5, 4}, "g^xy is 0.1 on e and 0 on f"},
	} {
		err := m.CheckPermutation(tc.perm)
		if tc.reason == "" {
			if err != nil {
				t.Errorf("%v: refused: %v", tc.perm, err)
			}
			continue
		}
		if err == nil || !strings.Contains(err.Error(), tc.reason) {
			t.Errorf("%v: %v, want a reason containing %q", tc.perm, err, tc.reason)
		}
	}
}

func TestCheckPermutationNotAPermutation(t *testing.T) {
	m := Triangle(0.5, 1)
	for _, tc := range []struct {
		perm   []int
		reason string
	}{
		{[]int{0, 1}, "has 2 entries, want 3"},
		{[]int{0, 1, 2, 3}, "has 4 entries, want 3"},
		{[]int{0, 1, 3}, "perm[2] = 3 is not a site index"},
		{[]int{-1, 1, 2}, "perm[0] = -1 is not a site index"},
		{[]int{0, 1, 1}, "perm[2] = 1 repeats perm[1]: not a bijection"},
		{nil, "has 0 entries"},
	} {
		if err := m.CheckPermutation(tc.perm); err == nil || !strings.Contains(err.Error(), tc.reason) {
			t.Errorf("%v: %v, want %q", tc.perm, err, tc.reason)
		}
	}
	var nilModel *Model
	if err := nilModel.CheckPermutation(nil); err == nil {
		t.Error("nil model: accepted")
	}
	bad := &Model{Sites: m.Sites, Bonds: []Bond{{A: 0, B: 7, J: 1, Jz: 1}}}
	if err := bad.CheckPermutation([]int{0, 1, 2}); err == nil {
		t.Error("bond to site 7 of 3: accepted")
	}
}

// Couplings are compared with a relative tolerance of SymmetryTolerance of
// the largest coupling: rounding in the last digits passes, a real
// difference does not.
func TestCheckPermutationTolerance(t *testing.T) {
	for _, tc := range []struct {
		scale, rel float64
		ok         bool
	}{
		{1, 1e-14, true},
		{1e4, 1e-14, true},
		{1e-6, 1e-14, true},
		{1, 1e-10, false},
		{1e4, 1e-10, false},
		{1e-6, 1e-10, false},
	} {
		m := Chain(3, 0.5, tc.scale, true)
		m.Bonds[2].J *= 1 + tc.rel
		m.Bonds[2].Jz = m.Bonds[2].J
		err := m.CheckPermutation([]int{1, 2, 0})
		if (err == nil) != tc.ok {
			t.Errorf("J = %g, relative change %g: %v, want ok = %v", tc.scale, tc.rel, err, tc.ok)
		}
	}
}

// Every symmetry of a builder maps H to itself; compositions of symmetries
// are symmetries, and random permutations of a complete graph with distinct
// random couplings, stored in random orders, are not (unless they are the
// identity).
func TestCheckPermutationRandom(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for trial := range 50 {
		n := 3 + rng.IntN(5)
		m := &Model{}
		for i := range n {
			m.Sites = append(m.Sites, Site{Label: chainLabel(i), TwoS: 1, G: IsotropicG(2)})
		}
		for a := range n {
			for b := a + 1; b < n; b++ {
				bond := Bond{A: a, B: b, J: rng.Float64(), Jz: rng.Float64(), DM: [3]float64{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}}
				if rng.IntN(2) == 0 {
					bond.A, bond.B = bond.B, bond.A
				}
				m.Bonds = append(m.Bonds, bond)
			}
		}
		perm := rng.Perm(n)
		identity := true
		for i, p := range perm {
			identity = identity && i == p
		}
		err := m.CheckPermutation(perm)
		if identity != (err == nil) {
			t.Errorf("trial %d: perm %v on random couplings: %v", trial, perm, err)
		}
	}
	for _, m := range builtModels() {
		for _, s := range m.Symmetries {
			for _, u := range m.Symmetries {
				comp := make([]int, len(s.Perm))
				for i := range comp {
					comp[i] = u.Perm[s.Perm[i]]
				}
				if err := m.CheckPermutation(comp); err != nil {
					t.Errorf("%s: %s then %s: %v", m.Name, s.Name, u.Name, err)
				}
			}
		}
	}
}
