package hilbert_test

import (
	"math"
	"math/cmplx"
	"slices"
	"strings"
	"testing"

	"frustum/ed/hilbert"
)

// compose returns the element index of e1 after e2, found by comparing the
// composed permutation with every element.
func compose(g *hilbert.Group, e1, e2 int) int {
	p1, f1 := g.Element(e1)
	p2, f2 := g.Element(e2)
	p := make([]int, len(p1))
	for i, j := range p2 {
		p[i] = p1[j]
	}
	for e := 0; e < g.Order(); e++ {
		q, f := g.Element(e)
		if slices.Equal(p, q) && f == (f1 != f2) {
			return e
		}
	}
	return -1
}

// Source: group theory (derivation). The elements are distinct and closed
// under composition (a group of order prod m_i); every character is a
// homomorphism chi(g h) = chi(g) chi(h); the |G| characters are distinct and
// orthogonal, sum_g chi_a(g) conj(chi_b(g)) = |G| delta_ab (for an abelian
// group there are exactly |G| of them); Real means every value is +-1.
func TestGroupCharacters(t *testing.T) {
	cases := []struct {
		name string
		twoS []int
		gens []hilbert.Generator
		flip bool
		rel  []int
	}{
		{"C8", fill(8, 1), []hilbert.Generator{{Perm: translation(8, 1)}}, false, []int{8}},
		{"C8 x flip", fill(8, 1), []hilbert.Generator{{Name: "T", Perm: translation(8, 1)}}, true, []int{8, 2}},
		{"T^2 then T on 6 sites", fill(6, 1), []hilbert.Generator{{Perm: translation(6, 2)}, {Perm: translation(6, 1)}}, false, []int{3, 2}},
		{"T^3 then T^2 on 12", fill(12, 1), []hilbert.Generator{{Perm: translation(12, 3)}, {Perm: translation(12, 2)}}, false, []int{4, 3}},
		{"T and T^4 on 8 (redundant)", fill(8, 1), []hilbert.Generator{{Perm: translation(8, 1)}, {Perm: translation(8, 4)}}, false, []int{8, 1}},
		{"two reflections of 12", fill(12, 1), []hilbert.Generator{{Perm: reflection(12, 0)}, {Perm: reflection(12, 6)}}, true, []int{2, 2, 2}},
		{"torus Tx Ty", fill(12, 1), []hilbert.Generator{
			{Perm: torusPerm(func(x, y int) (int, int) { return x + 1, y })},
			{Perm: torusPerm(func(x, y int) (int, int) { return x, y + 1 })}}, true, []int{4, 3, 2}},
		{"mixed chain T^2", []int{2, 1, 2, 1, 2, 1}, []hilbert.Generator{{Perm: translation(6, 2)}}, true, []int{3, 2}},
	}
	for _, c := range cases {
		g, err := hilbert.NewGroup(c.twoS, c.gens, c.flip)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if !slices.Equal(g.RelativeOrders(), c.rel) {
			t.Errorf("%s: relative orders %v, want %v", c.name, g.RelativeOrders(), c.rel)
		}
		G := g.Order()
		want := 1
		for _, m := range c.rel {
			want *= m
		}
		if G != want {
			t.Fatalf("%s: order %d, want %d", c.name, G, want)
		}
		mul := make([]int, G*G)
		for a := 0; a < G; a++ {
			for b := 0; b < G; b++ {
				mul[a*G+b] = compose(g, a, b)
				if mul[a*G+b] < 0 {
					t.Fatalf("%s: not closed", c.name)
				}
			}
		}
		irs := g.Irreps()
		if len(irs) != G {
			t.Fatalf("%s: %d irreps, want %d", c.name, len(irs), G)
		}
		labels := map[string]bool{}
		for ai, a := range irs {
			if labels[a.Label] {
				t.Errorf("%s: label %q twice", c.name, a.Label)
			}
			labels[a.Label] = true
			allReal := true
			for e := 0; e < G; e++ {
				if v := a.Character(e); math.Abs(imag(v)) > 1e-15 || math.Abs(math.Abs(real(v))-1) > 1e-15 {
					allReal = false
				}
			}
			if allReal != a.Real {
				t.Errorf("%s %s: Real = %v, values say %v", c.name, a.Label, a.Real, allReal)
			}
			for x := 0; x < G; x++ {
				for y := 0; y < G; y++ {
					if d := cmplx.Abs(a.Character(mul[x*G+y]) - a.Character(x)*a.Character(y)); d > 1e-12 {
						t.Fatalf("%s %s: not a homomorphism at %d, %d", c.name, a.Label, x, y)
					}
				}
			}
			for bi, b := range irs {
				var s complex128
				for e := 0; e < G; e++ {
					s += a.Character(e) * cmplx.Conj(b.Character(e))
				}
				w := 0.0
				if ai == bi {
					w = float64(G)
				}
				if cmplx.Abs(s-complex(w, 0)) > 1e-9 {
					t.Fatalf("%s: <%s, %s> = %v, want %v", c.name, a.Label, b.Label, s, w)
				}
			}
		}
		if irs[0].Label != "trivial" && strings.Contains(irs[0].Label, "-") {
			t.Errorf("%s: first irrep %q is not the trivial one", c.name, irs[0].Label)
		}
	}
}

// Source: the definition of the labels (derivation): a cyclic translation
// of order 6 has chi(T) = exp(2 pi i j/6), labelled "T:k=j/6"; Z2 factors
// are "+" and "-".
func TestIrrepLabels(t *testing.T) {
	g, err := hilbert.NewGroup(fill(6, 1), []hilbert.Generator{{Name: "T", Perm: translation(6, 1)}}, true)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, ir := range g.Irreps() {
		got = append(got, ir.Label)
	}
	want := []string{"T:k=0/6,flip:+", "T:k=1/6,flip:+", "T:k=2/6,flip:+", "T:k=3/6,flip:+", "T:k=4/6,flip:+", "T:k=5/6,flip:+",
		"T:k=0/6,flip:-", "T:k=1/6,flip:-", "T:k=2/6,flip:-", "T:k=3/6,flip:-", "T:k=4/6,flip:-", "T:k=5/6,flip:-"}
	if !slices.Equal(got, want) {
		t.Errorf("labels %v\nwant %v", got, want)
	}
	for _, ir := range g.Irreps() {
		j := 0
		if _, err := fmtSscan(ir.Label, &j); err == nil {
			if v, w := ir.Character(1), cmplx.Exp(complex(0, 2*math.Pi*float64(j)/6)); cmplx.Abs(v-w) > 1e-15 {
				t.Errorf("%s: chi(T) = %v, want %v", ir.Label, v, w)
			}
		}
	}
	ir, err := g.Irrep("T:k=3/6,flip:-")
	if err != nil || !ir.Real {
		t.Errorf("k = pi, flip -: err %v, real %v", err, ir.Real)
	}
	triv, _ := hilbert.NewGroup(fill(3, 1), nil, false)
	if l := triv.Irreps()[0].Label; l != "trivial" || triv.Order() != 1 {
		t.Errorf("trivial group: label %q order %d", l, triv.Order())
	}
}

// Source: the API contract of NewGroup: bad permutations are refused.
func TestGroupErrors(t *testing.T) {
	bad := []struct {
		name string
		twoS []int
		gens []hilbert.Generator
	}{
		{"short", fill(4, 1), []hilbert.Generator{{Perm: []int{1, 0, 2}}}},
		{"not a permutation", fill(4, 1), []hilbert.Generator{{Perm: []int{1, 1, 2, 3}}}},
		{"out of range", fill(4, 1), []hilbert.Generator{{Perm: []int{1, 0, 2, 4}}}},
		{"mixes spins", []int{2, 1, 2, 1}, []hilbert.Generator{{Perm: translation(4, 1)}}},
		{"do not commute", fill(5, 1), []hilbert.Generator{{Perm: translation(5, 1)}, {Perm: reflection(5, 0)}}},
	}
	for _, b := range bad {
		if _, err := hilbert.NewGroup(b.twoS, b.gens, false); err == nil {
			t.Errorf("%s: no error", b.name)
		}
	}
}
