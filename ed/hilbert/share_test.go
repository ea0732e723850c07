package hilbert_test

import (
	"context"
	"math/rand/v2"
	"slices"
	"testing"

	"frustum/ed/hilbert"
)

// Source: the API contract of WithHamiltonian. A sector of a second
// operator on the basis of a first equals the sector NewSector builds for
// the second operator directly: the same representatives in the same order
// and the same action (bit for bit, since the kernels are the same), for a
// complex translation representation (ring with a uniform field as the
// second operator), a reflection that fixes a defect site (the moment
// sum_i g_i S_i^z with one g different), the DM ring, and a NoSz sector
// of a transverse moment; its CSR matrix acts the same way too.
func TestWithHamiltonianMatchesNewSector(t *testing.T) {
	const N = 10
	uniform := func(m *model, v [3]float64) *hilbert.Hamiltonian {
		h := &hilbert.Hamiltonian{TwoS: m.twoS}
		for i := range m.twoS {
			h.AddField(i, v)
		}
		return h
	}
	defect := &hilbert.Hamiltonian{TwoS: fill(N, 1)}
	for i := range N {
		g := 2.0
		if i == 0 {
			g = 2.6
		}
		defect.AddField(i, [3]float64{0, 0, g})
	}
	T := hilbert.Generator{Name: "T", Perm: translation(N, 1)}
	R := hilbert.Generator{Name: "R0", Perm: reflection(N, 0)}
	for _, c := range []struct {
		name   string
		first  *hilbert.Hamiltonian
		second *hilbert.Hamiltonian
		gens   []hilbert.Generator
		twoSz  int
		label  string
	}{
		{"ring, uniform field, k=3", ring(N, 1, 1, 0.3).hamiltonian(), uniform(ring(N, 1, 1, 0), [3]float64{0, 0, 0.7}), []hilbert.Generator{T}, 2, "T:k=3/10"},
		{"ring, defect moment, R0 odd", ring(N, 1, 1, 0.3).hamiltonian(), defect, []hilbert.Generator{R}, 0, "R0:-"},
		{"DM ring, uniform field, k=1", dmRing(N, 1, 0.4).hamiltonian(), uniform(ring(N, 1, 1, 0), [3]float64{0, 0, 1}), []hilbert.Generator{T}, -2, "T:k=1/10"},
		{"ring NoSz, transverse moment, k=0", ring(N, 1, 1, 0).hamiltonian(), uniform(ring(N, 1, 1, 0), [3]float64{0.5, 0, 0.2}), []hilbert.Generator{T}, hilbert.NoSz, "T:k=0/10"},
	} {
		g, err := hilbert.NewGroup(fill(N, 1), c.gens, false)
		if err != nil {
			t.Fatal(err)
		}
		ir, err := g.Irrep(c.label)
		if err != nil {
			t.Fatalf("%s: %v (irreps %v)", c.name, err, g.Irreps())
		}
		s, err := hilbert.NewSector(c.first, c.twoSz, g, ir, hilbert.SectorOptions{})
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		shared, err := s.WithHamiltonian(c.second)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		fresh, err := hilbert.NewSector(c.second, c.twoSz, g, ir, hilbert.SectorOptions{})
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if shared.Dim() != fresh.Dim() || shared.Dim() != s.Dim() || shared.Dim() == 0 {
			t.Fatalf("%s: dimensions %d, %d, %d", c.name, s.Dim(), shared.Dim(), fresh.Dim())
		}
		for i := range shared.Dim() {
			if shared.Representative(i) != fresh.Representative(i) || shared.OrbitSize(i) != fresh.OrbitSize(i) {
				t.Fatalf("%s: basis state %d differs", c.name, i)
			}
		}
		if shared.IsReal() != fresh.IsReal() || shared.TwoSz() != c.twoSz || shared.Group() != g {
			t.Errorf("%s: real %v, fresh %v; 2Sz %d", c.name, shared.IsReal(), fresh.IsReal(), shared.TwoSz())
		}
		rng := rand.New(rand.NewPCG(7, uint64(len(c.name))))
		x := make([]complex128, s.Dim())
		for i := range x {
			x[i] = complex(rng.NormFloat64(), rng.NormFloat64())
		}
		y1, y2, y3 := make([]complex128, len(x)), make([]complex128, len(x)), make([]complex128, len(x))
		ctx := context.Background()
		if err := shared.Apply(ctx, y1, x); err != nil {
			t.Fatal(err)
		}
		if err := fresh.Apply(ctx, y2, x); err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(y1, y2) {
			t.Errorf("%s: the shared sector acts differently from the fresh one", c.name)
		}
		m, err := shared.Matrix(ctx)
		if err != nil {
			t.Fatal(err)
		}
		if err := m.Apply(ctx, y3, x); err != nil {
			t.Fatal(err)
		}
		for i := range y3 {
			if d := y3[i] - y2[i]; real(d)*real(d)+imag(d)*imag(d) > 1e-24 {
				t.Fatalf("%s: CSR of the shared sector, component %d: %v, want %v", c.name, i, y3[i], y2[i])
			}
		}
		// The first sector is unchanged.
		y0 := make([]complex128, len(x))
		s0, _ := hilbert.NewSector(c.first, c.twoSz, g, ir, hilbert.SectorOptions{})
		if err := s.Apply(ctx, y1, x); err != nil {
			t.Fatal(err)
		}
		if err := s0.Apply(ctx, y0, x); err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(y0, y1) {
			t.Errorf("%s: WithHamiltonian changed the original sector", c.name)
		}
	}
}

// Source: the API contract of WithHamiltonian: an operator that does not
// conserve S^z on an S^z sector, one that a generator of the group does not
// map onto itself, and one on other spins are refused.
func TestWithHamiltonianErrors(t *testing.T) {
	const N = 8
	h := ring(N, 1, 1, 0).hamiltonian()
	g, _ := hilbert.NewGroup(fill(N, 1), []hilbert.Generator{{Name: "T", Perm: translation(N, 1)}}, false)
	s, err := hilbert.NewSector(h, 0, g, g.Irreps()[0], hilbert.SectorOptions{})
	if err != nil {
		t.Fatal(err)
	}
	tr := &hilbert.Hamiltonian{TwoS: fill(N, 1)}
	for i := range N {
		tr.AddField(i, [3]float64{1, 0, 0})
	}
	if _, err := s.WithHamiltonian(tr); err == nil {
		t.Error("a transverse moment on an S^z sector was accepted")
	}
	one := &hilbert.Hamiltonian{TwoS: fill(N, 1)}
	one.AddField(3, [3]float64{0, 0, 1})
	if _, err := s.WithHamiltonian(one); err == nil {
		t.Error("a field on one site was accepted under the translations")
	}
	other := ring(N, 1, 1, 0).hamiltonian()
	other.TwoS = fill(N, 2)
	if _, err := s.WithHamiltonian(other); err == nil {
		t.Error("an operator on spins 1 was accepted on a sector of spins 1/2")
	}
}
