package hilbert_test

import (
	"context"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"frustum/ed/hilbert"
)

func binomial(n, k int) int64 {
	r := int64(1)
	for i := 1; i <= k; i++ {
		r = r * int64(n-k+i) / int64(i)
	}
	return r
}

// Source: combinatorics (derivation). A ring of N spins 1/2 has C(N, N/2 -
// S^z) states with S^z; summed over all irreps of a group, the sector
// dimensions add up to exactly that (every state counted once), for rings
// of 8 to 14 sites, with translations, reflections and the spin inversion;
// and each equals the character formula Dimension.
func TestDimensionsAddUp(t *testing.T) {
	type grp struct {
		gens []hilbert.Generator
		flip bool
	}
	for _, N := range []int{8, 9, 10, 12, 13, 14} {
		m := ring(N, 1, 1, 0.2)
		h := m.hamiltonian()
		for _, gr := range []grp{
			{[]hilbert.Generator{{Perm: translation(N, 1)}}, true},
			{[]hilbert.Generator{{Perm: reflection(N, 0)}, {Perm: reflection(N, N/2)}}, true},
			{[]hilbert.Generator{{Perm: translation(N, 2)}}, false},
		} {
			for sz := -N; sz <= N; sz += 2 {
				flip := gr.flip && sz == 0
				g, err := hilbert.NewGroup(m.twoS, gr.gens, flip)
				if err != nil {
					if N%2 == 1 && len(gr.gens) == 2 {
						continue // R_0 and R_{N/2} do not commute on odd rings
					}
					t.Fatal(err)
				}
				want, err := hilbert.SzDimension(m.twoS, sz)
				if err != nil {
					t.Fatal(err)
				}
				if b := binomial(N, (N-sz)/2); want != b {
					t.Fatalf("SzDimension(%d, %d) = %d, want C = %d", N, sz, want, b)
				}
				total := int64(0)
				for _, ir := range g.Irreps() {
					s, err := hilbert.NewSector(h, sz, g, ir, hilbert.SectorOptions{})
					if err != nil {
						t.Fatalf("N=%d 2Sz=%d %s: %v", N, sz, ir.Label, err)
					}
					d, _ := hilbert.Dimension(m.twoS, sz, ir)
					if d != int64(s.Dim()) {
						t.Fatalf("N=%d 2Sz=%d %s: Dim %d, Dimension %d", N, sz, ir.Label, s.Dim(), d)
					}
					total += d
				}
				if total != want {
					t.Fatalf("N=%d 2Sz=%d order %d: sum of dimensions %d, want %d", N, sz, g.Order(), total, want)
				}
			}
		}
	}
	// mixed spins: the coefficients of prod_i (t^{-2S_i} + ... + t^{2S_i})
	m := mixedChain(4, 1, 0.3, 0)
	g, _ := hilbert.NewGroup(m.twoS, []hilbert.Generator{{Perm: translation(8, 2)}}, true)
	total := int64(0)
	for _, ir := range g.Irreps() {
		s, err := hilbert.NewSector(m.hamiltonian(), 0, g, ir, hilbert.SectorOptions{})
		if err != nil {
			t.Fatal(err)
		}
		total += int64(s.Dim())
	}
	// (t^-2 + 1 + t^2)^4 (t^-1 + t)^4 at t^0: sum over j of the counts
	want := int64(0)
	for a := 0; a <= 4; a++ { // spin-1 sites with m = +1 and m = -1 counts
		for b := 0; a+b <= 4; b++ {
			for u := 0; u <= 4; u++ { // spins 1/2 up
				if 2*(a-b)+(u-(4-u)) == 0 {
					want += binomial(4, a) * binomial(4-a, b) * binomial(4, u)
				}
			}
		}
	}
	if total != want {
		t.Errorf("mixed chain 2Sz=0: %d states, want %d", total, want)
	}
}

// Source: the definition of the representatives (derivation): every basis
// state is the smallest of its orbit (checked against every element, site
// by site), the states are strictly increasing, Index inverts
// Representative, and every other product state of the sector maps to -1.
func TestRepresentatives(t *testing.T) {
	m := mixedChain(4, 1, 0.2, 0)
	h := m.hamiltonian()
	g, _ := hilbert.NewGroup(m.twoS, []hilbert.Generator{{Perm: translation(8, 2)}}, true)
	D, st := m.strides()
	for _, ir := range g.Irreps() {
		s, err := hilbert.NewSector(h, 0, g, ir, hilbert.SectorOptions{})
		if err != nil {
			t.Fatal(err)
		}
		in := map[int]bool{}
		for i := 0; i < s.Dim(); i++ {
			x := s.Representative(i)
			in[int(x)] = true
			if i > 0 && x <= s.Representative(i-1) {
				t.Fatalf("%s: not increasing at %d", ir.Label, i)
			}
			if s.Index(x) != i {
				t.Fatalf("%s: Index(Representative(%d)) = %d", ir.Label, i, s.Index(x))
			}
			k := m.digits(int(x))
			orbit := map[int]bool{}
			for e := 0; e < g.Order(); e++ {
				perm, flip := g.Element(e)
				y := 0
				for j := range k {
					v := k[j]
					if flip {
						v = m.twoS[j] - v
					}
					y += v * st[perm[j]]
				}
				if y < int(x) {
					t.Fatalf("%s: %d maps to the smaller %d", ir.Label, x, y)
				}
				orbit[y] = true
			}
			if s.OrbitSize(i) != len(orbit) {
				t.Fatalf("%s: orbit of %d: %d, want %d", ir.Label, x, s.OrbitSize(i), len(orbit))
			}
		}
		for x := 0; x < D; x++ {
			if !in[x] && s.Index(uint64(x)) != -1 {
				t.Fatalf("%s: Index(%d) = %d for a non-representative", ir.Label, x, s.Index(uint64(x)))
			}
		}
	}
}

// Source: the definition of the symmetric basis, applied in the test: with
// B the matrix of the expanded basis vectors (|r~> = N_r^{-1/2} sum_g
// conj(chi(g)) g|r>, built site by site), B^H B = 1 and the sector matrix
// equals B^H H B for the full matrix of FORMAT.md, to 1e-12: this checks
// every phase and normalization, also for complex characters and a complex
// H (DM), mixed spins and the spin inversion.
func TestMatrixElementsAgainstProjection(t *testing.T) {
	cases := []struct {
		name string
		m    *model
		gens []hilbert.Generator
		flip bool
		sz   int
	}{
		{"DM ring 8", dmRing(8, 1, 0.45), []hilbert.Generator{{Perm: translation(8, 1)}}, false, 0},
		{"DM ring 8, 2Sz=2", dmRing(8, 1, 0.45), []hilbert.Generator{{Perm: translation(8, 1)}}, false, 2},
		{"J1-J2 ring 10", ring(10, 1, 0.8, 0.3), []hilbert.Generator{{Perm: translation(10, 1)}}, true, 0},
		{"mixed chain", mixedChain(4, 1, 0.5, 0), []hilbert.Generator{{Perm: translation(8, 2)}}, true, 0},
		{"mixed chain, 2Sz=2", mixedChain(4, 1, 0.5, 0), []hilbert.Generator{{Perm: translation(8, 2)}}, false, 2},
		{"torus Tx Ty", torus43(1, 0.2), []hilbert.Generator{
			{Perm: torusPerm(func(x, y int) (int, int) { return x + 1, y })},
			{Perm: torusPerm(func(x, y int) (int, int) { return x, y + 1 })}}, false, 2},
	}
	for _, c := range cases {
		g, err := hilbert.NewGroup(c.m.twoS, c.gens, c.flip)
		if err != nil {
			t.Fatal(err)
		}
		for _, ir := range g.Irreps() {
			s, err := hilbert.NewSector(c.m.hamiltonian(), c.sz, g, ir, hilbert.SectorOptions{})
			if err != nil {
				t.Fatal(err)
			}
			n := s.Dim()
			A := sectorDense(t, s)
			B := make([][]complex128, n)
			HB := make([][]complex128, n)
			for j := 0; j < n; j++ {
				e := make([]complex128, n)
				e[j] = 1
				B[j] = expand(c.m, s, e)
				HB[j] = c.m.applyFull(B[j])
			}
			for i := 0; i < n; i++ {
				for j := 0; j < n; j++ {
					w := 0.0
					if i == j {
						w = 1
					}
					if d := cmplx.Abs(dot(B[i], B[j]) - complex(w, 0)); d > 1e-12 {
						t.Fatalf("%s %s: <%d~|%d~> off by %g", c.name, ir.Label, i, j, d)
					}
					if d := cmplx.Abs(dot(B[i], HB[j]) - A[i*n+j]); d > 1e-12 {
						t.Fatalf("%s %s: H[%d][%d] = %v, projection gives %v", c.name, ir.Label, i, j, A[i*n+j], dot(B[i], HB[j]))
					}
				}
			}
		}
	}
}

// Source: the projection identity (derivation): for a random sector vector
// x, Apply(x) expanded to the full space equals H (expanded x) to 1e-10,
// for a 14-site J1-J2 ring at k = 3/14 (complex) and a 12-site DM ring.
func TestApplyAgainstFullSpace(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, c := range []struct {
		m     *model
		label string
	}{{ring(14, 1, 1, 0.45), "k=3/14"}, {dmRing(12, 1, 0.7), "k=5/12"}} {
		N := len(c.m.twoS)
		g, _ := hilbert.NewGroup(c.m.twoS, []hilbert.Generator{{Perm: translation(N, 1)}}, false)
		ir, err := g.Irrep(c.label)
		if err != nil {
			t.Fatal(err)
		}
		s, err := hilbert.NewSector(c.m.hamiltonian(), 0, g, ir, hilbert.SectorOptions{})
		if err != nil {
			t.Fatal(err)
		}
		x := make([]complex128, s.Dim())
		for i := range x {
			x[i] = complex(rng.NormFloat64(), rng.NormFloat64())
		}
		y := make([]complex128, s.Dim())
		if err := s.Apply(context.Background(), y, x); err != nil {
			t.Fatal(err)
		}
		got := expand(c.m, s, y)
		// H (expanded x) from the model's own term list, one product state at a time
		want := c.m.applyFull(expand(c.m, s, x))
		for i := range got {
			if cmplx.Abs(got[i]-want[i]) > 1e-10 {
				t.Fatalf("%s: component %d: %v, want %v", ir.Label, i, got[i], want[i])
			}
		}
	}
}

// Source: the API contract of NewSector: a symmetry that does not commute
// with H, spin inversion away from S^z = 0, S^z sectors of a Hamiltonian
// that does not conserve S^z, a non-Hermitian H, and impossible S^z values
// are refused.
func TestSectorErrors(t *testing.T) {
	dm := dmRing(8, 1, 0.4)
	h := dm.hamiltonian()
	mk := func(gens []hilbert.Generator, flip bool) (*hilbert.Group, hilbert.Irrep) {
		g, err := hilbert.NewGroup(dm.twoS, gens, flip)
		if err != nil {
			t.Fatal(err)
		}
		return g, g.Irreps()[0]
	}
	g, ir := mk([]hilbert.Generator{{Name: "R", Perm: reflection(8, 0)}}, false)
	if _, err := hilbert.NewSector(h, 0, g, ir, hilbert.SectorOptions{}); err == nil {
		t.Error("DM ring: the reflection was accepted")
	}
	g, ir = mk(nil, true)
	if _, err := hilbert.NewSector(h, 0, g, ir, hilbert.SectorOptions{}); err == nil {
		t.Error("DM ring: the spin inversion was accepted")
	}
	hr := ring(8, 1, 1, 0).hamiltonian()
	if _, err := hilbert.NewSector(hr, 2, g, ir, hilbert.SectorOptions{}); err == nil {
		t.Error("spin inversion at 2Sz = 2 was accepted")
	}
	if _, err := hilbert.NewSector(hr, 1, nil, hilbert.Irrep{}, hilbert.SectorOptions{}); err == nil {
		t.Error("2Sz = 1 on 8 spins 1/2 was accepted")
	}
	hx := ring(8, 1, 1, 0).hamiltonian()
	hx.AddField(3, [3]float64{0.2, 0, 0})
	if _, err := hilbert.NewSector(hx, 0, nil, hilbert.Irrep{}, hilbert.SectorOptions{}); err == nil {
		t.Error("an S^z sector of a transverse-field H was accepted")
	}
	if _, err := hilbert.NewSector(hx, hilbert.NoSz, nil, hilbert.Irrep{}, hilbert.SectorOptions{}); err != nil {
		t.Errorf("NoSz with a transverse field: %v", err)
	}
	hn := ring(4, 1, 1, 0).hamiltonian()
	hn.Terms = append(hn.Terms, hilbert.Term{A: 0, B: 2, PA: hilbert.Raise, PB: hilbert.Lower, Coeff: 0.3})
	if _, err := hilbert.NewSector(hn, 0, nil, hilbert.Irrep{}, hilbert.SectorOptions{}); err == nil {
		t.Error("a non-Hermitian H was accepted")
	}
	// a uniform field along z keeps the spin inversion at S^z = 0 only
	hz := ring(8, 1, 1, 0).hamiltonian()
	for i := 0; i < 8; i++ {
		hz.AddField(i, [3]float64{0, 0, 0.3})
	}
	gf, irf := mk(nil, true)
	if _, err := hilbert.NewSector(hz, 0, gf, irf, hilbert.SectorOptions{}); err != nil {
		t.Errorf("uniform field, S^z = 0, spin inversion: %v", err)
	}
	if _, err := hilbert.NewSector(hz, hilbert.NoSz, gf, irf, hilbert.SectorOptions{}); err == nil {
		t.Error("uniform field, NoSz, spin inversion was accepted")
	}
}

// Source: the API contract: EstimateMemory's dimension is the sector's, and
// the built matrix fits in its bound.
func TestEstimateMemory(t *testing.T) {
	for _, c := range []struct {
		m     *model
		label string
		sz    int
	}{{ring(14, 1, 1, 0.3), "T:k=0/14,flip:+", 0}, {dmRing(12, 1, 0.5), "T:k=5/12", 2}, {mixedChain(4, 1, 0.2, 0), "T:k=1/4,flip:-", 0}} {
		N := len(c.m.twoS)
		step := 1
		if c.m.twoS[0] != c.m.twoS[1] {
			step = 2
		}
		flip := c.sz == 0 && c.m.twoS[0] == c.m.twoS[1] || c.label[len(c.label)-1] == '-'
		g, err := hilbert.NewGroup(c.m.twoS, []hilbert.Generator{{Name: "T", Perm: translation(N, step)}}, flip)
		if err != nil {
			t.Fatal(err)
		}
		ir, err := g.Irrep(c.label)
		if err != nil {
			t.Fatal(err)
		}
		h := c.m.hamiltonian()
		est, err := hilbert.EstimateMemory(h, c.sz, g, ir)
		if err != nil {
			t.Fatal(err)
		}
		s, err := hilbert.NewSector(h, c.sz, g, ir, hilbert.SectorOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if est.Dim != int64(s.Dim()) || est.Real != s.IsReal() {
			t.Fatalf("%s: estimate dim %d real %v, sector %d %v", c.label, est.Dim, est.Real, s.Dim(), s.IsReal())
		}
		var nnz, bytes int64
		if s.IsReal() {
			m, err := s.MatrixReal(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			nnz, bytes = m.Nonzeros(), m.Bytes()
		} else {
			m, err := s.Matrix(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			nnz, bytes = m.Nonzeros(), m.Bytes()
		}
		if nnz > est.RowBound*est.Dim || bytes > est.Matrix {
			t.Fatalf("%s: %d entries, %d bytes; bounds %d, %d", c.label, nnz, bytes, est.RowBound*est.Dim, est.Matrix)
		}
		if nnz == 0 {
			t.Fatalf("%s: empty matrix", c.label)
		}
	}
	if b := math.Abs(float64(hilbert.MatrixMemory(10, 100, true) - (16*10 + 4*11 + 100*20))); b != 0 {
		t.Errorf("MatrixMemory off by %v", b)
	}
}

// Source: combinatorics (derivation): without spatial symmetry the S^z
// sector of N spins 1/2 is every N-bit string with (N - 2S^z)/2 ones, in
// increasing order, and Index (Lin's rank tables) inverts it; strings with
// another number of ones, or too long, give -1.
func TestRankIndex(t *testing.T) {
	for _, N := range []int{1, 2, 7, 10, 13} {
		m := ring(N, 1, 1, 0)
		if N == 1 {
			m.bonds = nil
		}
		for sz := -N; sz <= N; sz += 2 {
			s, err := hilbert.NewSector(m.hamiltonian(), sz, nil, hilbert.Irrep{}, hilbert.SectorOptions{})
			if err != nil {
				t.Fatal(err)
			}
			ones := (N - sz) / 2
			i := 0
			for x := uint64(0); x < 1<<uint(N+1); x++ {
				want := -1
				if x < 1<<uint(N) && bitsOnes(x) == ones {
					want = i
					if s.Representative(i) != x {
						t.Fatalf("N=%d 2Sz=%d: state %d is %d, want %d", N, sz, i, s.Representative(i), x)
					}
					i++
				}
				if got := s.Index(x); got != want {
					t.Fatalf("N=%d 2Sz=%d: Index(%b) = %d, want %d", N, sz, x, got, want)
				}
			}
			if i != s.Dim() {
				t.Fatalf("N=%d 2Sz=%d: %d states, want %d", N, sz, s.Dim(), i)
			}
		}
	}
}

func bitsOnes(x uint64) int {
	n := 0
	for ; x != 0; x &= x - 1 {
		n++
	}
	return n
}
