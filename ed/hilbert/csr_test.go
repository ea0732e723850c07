package hilbert_test

import (
	"context"
	"errors"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"slices"
	"testing"

	"frustum/ed/hilbert"
)

type sectorCase struct {
	name  string
	m     *model
	gens  []hilbert.Generator
	flip  bool
	sz    int
	label string
}

func sectorCases() []sectorCase {
	T := func(N, d int) []hilbert.Generator { return []hilbert.Generator{{Name: "T", Perm: translation(N, d)}} }
	xf := ring(10, 1, 1, 0.2)
	xf.fields = map[int][3]float64{}
	for i := 0; i < 10; i++ {
		xf.fields[i] = [3]float64{0.3, 0, 0}
	}
	return []sectorCase{
		{"ring 14 k=0 +", ring(14, 1, 1, 0.3), T(14, 1), true, 0, "T:k=0/14,flip:+"},
		{"ring 14 k=3", ring(14, 1, 0.7, 0.3), T(14, 1), false, 2, "T:k=3/14"},
		{"ring 14 no symmetry", ring(14, 1, 1, 0), nil, false, 0, "trivial"},
		{"DM ring 12 k=5", dmRing(12, 1, 0.4), T(12, 1), false, 0, "T:k=5/12"},
		{"DM ring 12 k=0", dmRing(12, 1, 0.4), T(12, 1), false, 2, "T:k=0/12"},
		{"mixed chain 12 k=2/6 -", mixedChain(6, 1, 0.3, 0), T(12, 2), true, 0, "T:k=2/6,flip:-"},
		{"transverse field ring 10, NoSz, k=4", xf, T(10, 1), true, hilbert.NoSz, "T:k=4/10,flip:+"},
	}
}

func (c sectorCase) sector(t testing.TB, opt hilbert.SectorOptions) *hilbert.Sector {
	g, err := hilbert.NewGroup(c.m.twoS, c.gens, c.flip)
	if err != nil {
		t.Fatal(err)
	}
	ir, err := g.Irrep(c.label)
	if err != nil {
		t.Fatal(err)
	}
	s, err := hilbert.NewSector(c.m.hamiltonian(), c.sz, g, ir, opt)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// Source: the definition of the CSR form (derivation): it stores the same
// matrix, so its product equals the matrix-free Apply on seeded random
// vectors to 1e-13 of the result's norm, in both scalar types where the
// sector is real.
func TestCSRAgainstMatrixFree(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	ctx := context.Background()
	for _, c := range sectorCases() {
		s := c.sector(t, hilbert.SectorOptions{})
		n := s.Dim()
		x := make([]complex128, n)
		for i := range x {
			x[i] = complex(rng.NormFloat64(), rng.NormFloat64())
		}
		y1 := make([]complex128, n)
		y2 := make([]complex128, n)
		if err := s.Apply(ctx, y1, x); err != nil {
			t.Fatal(err)
		}
		m, err := s.Matrix(ctx)
		if err != nil {
			t.Fatal(err)
		}
		var op hilbert.Operator[complex128] = m
		if op.Dim() != n {
			t.Fatalf("%s: CSR dim %d", c.name, op.Dim())
		}
		if err := op.Apply(ctx, y2, x); err != nil {
			t.Fatal(err)
		}
		nrm := 0.0
		for i := range y1 {
			nrm = math.Max(nrm, cmplx.Abs(y1[i]))
		}
		for i := range y1 {
			if cmplx.Abs(y1[i]-y2[i]) > 1e-13*nrm {
				t.Fatalf("%s: row %d: CSR %v, matrix-free %v", c.name, i, y2[i], y1[i])
			}
		}
		if !s.IsReal() {
			if _, err := s.MatrixReal(ctx); !errors.Is(err, hilbert.ErrNotReal) {
				t.Errorf("%s: MatrixReal on a complex sector: %v", c.name, err)
			}
			if err := s.ApplyReal(ctx, make([]float64, n), make([]float64, n)); !errors.Is(err, hilbert.ErrNotReal) {
				t.Errorf("%s: ApplyReal on a complex sector: %v", c.name, err)
			}
			continue
		}
		xr := make([]float64, n)
		for i := range xr {
			xr[i] = rng.NormFloat64()
		}
		r1 := make([]float64, n)
		r2 := make([]float64, n)
		op1, err := s.Real()
		if err != nil {
			t.Fatal(err)
		}
		if err := op1.Apply(ctx, r1, xr); err != nil {
			t.Fatal(err)
		}
		mr, err := s.MatrixReal(ctx)
		if err != nil {
			t.Fatal(err)
		}
		var opr hilbert.Operator[float64] = mr
		if err := opr.Apply(ctx, r2, xr); err != nil {
			t.Fatal(err)
		}
		nrm = 0
		for i := range r1 {
			nrm = math.Max(nrm, math.Abs(r1[i]))
		}
		for i := range r1 {
			if math.Abs(r1[i]-r2[i]) > 1e-13*nrm {
				t.Fatalf("%s: real row %d: CSR %v, matrix-free %v", c.name, i, r2[i], r1[i])
			}
		}
		if mr.Bytes() >= m.Bytes() {
			t.Errorf("%s: real CSR %d bytes, complex %d", c.name, mr.Bytes(), m.Bytes())
		}
	}
}

// Source: the API contract: products are deterministic (bitwise equal on
// repetition and for 1 or GOMAXPROCS workers), and a done context returns
// its error.
func TestDeterministicAndCancel(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	c := sectorCases()[2] // 3432 rows: several blocks
	s1 := c.sector(t, hilbert.SectorOptions{Workers: 1})
	s2 := c.sector(t, hilbert.SectorOptions{})
	n := s1.Dim()
	x := make([]complex128, n)
	for i := range x {
		x[i] = complex(rng.NormFloat64(), rng.NormFloat64())
	}
	ctx := context.Background()
	ys := make([][]complex128, 4)
	for i := range ys {
		ys[i] = make([]complex128, n)
	}
	_ = s1.Apply(ctx, ys[0], x)
	_ = s2.Apply(ctx, ys[1], x)
	m1, _ := s1.Matrix(ctx)
	m2, _ := s2.Matrix(ctx)
	_ = m1.Apply(ctx, ys[2], x)
	_ = m2.Apply(ctx, ys[3], x)
	if !slices.Equal(ys[0], ys[1]) || !slices.Equal(ys[2], ys[3]) {
		t.Error("results depend on the number of workers")
	}
	if m1.Nonzeros() != m2.Nonzeros() {
		t.Error("matrices differ")
	}
	done, cancel := context.WithCancel(ctx)
	cancel()
	if err := s2.Apply(done, ys[0], x); !errors.Is(err, context.Canceled) {
		t.Errorf("Apply: %v", err)
	}
	if err := m2.Apply(done, ys[0], x); !errors.Is(err, context.Canceled) {
		t.Errorf("CSR Apply: %v", err)
	}
	if _, err := s2.Matrix(done); !errors.Is(err, context.Canceled) {
		t.Errorf("Matrix: %v", err)
	}
	if _, err := s2.Correlations(done, x); !errors.Is(err, context.Canceled) {
		t.Errorf("Correlations: %v", err)
	}
	g := s2.Group()
	if _, err := hilbert.NewSectorContext(done, c.m.hamiltonian(), c.sz, g, s2.Irrep(), hilbert.SectorOptions{}); !errors.Is(err, context.Canceled) {
		t.Errorf("NewSectorContext: %v", err)
	}
}

// Source: the character theory of the spin inversion F (derivation): at
// S^z = 0, F commutes with the translations, so each momentum sector k
// splits into F = +1 and F = -1; their dimensions add up to the k sector's
// and the union of their spectra is its spectrum (1e-10), for a J1-J2 ring
// of 12 and the mixed spin chain. For spins 1/2, F = i^N exp(-i pi S^x_tot)
// (since exp(-i pi sigma^x/2) = -i sigma^x), and the rotation is 1 on a
// singlet: the singlet ground state of the 12-ring has F = (-1)^6 = +1.
func TestSpinInversionSplits(t *testing.T) {
	for _, c := range []struct {
		m    *model
		step int
	}{{ring(12, 1, 1, 0.2), 1}, {mixedChain(4, 1, 0.4, 0), 2}} {
		N := len(c.m.twoS)
		gens := []hilbert.Generator{{Name: "T", Perm: translation(N, c.step)}}
		g1, _ := hilbert.NewGroup(c.m.twoS, gens, false)
		g2, _ := hilbert.NewGroup(c.m.twoS, gens, true)
		h := c.m.hamiltonian()
		lowest := map[string]float64{}
		for _, ir := range g1.Irreps() {
			s, err := hilbert.NewSector(h, 0, g1, ir, hilbert.SectorOptions{})
			if err != nil {
				t.Fatal(err)
			}
			want := sectorSpectrum(t, s, 1e-12)
			var got []float64
			dim := 0
			for _, f := range []string{"+", "-"} {
				ir2, err := g2.Irrep(ir.Label + ",flip:" + f)
				if err != nil {
					t.Fatal(err)
				}
				s2, err := hilbert.NewSector(h, 0, g2, ir2, hilbert.SectorOptions{})
				if err != nil {
					t.Fatal(err)
				}
				dim += s2.Dim()
				sp := sectorSpectrum(t, s2, 1e-12)
				if len(sp) > 0 {
					lowest[ir2.Label] = sp[0]
				}
				got = append(got, sp...)
			}
			if dim != s.Dim() {
				t.Fatalf("%s: %d + states, want %d", ir.Label, dim, s.Dim())
			}
			sameSpectrum(t, ir.Label, got, want, 1e-10)
		}
		if N == 12 {
			if lowest["T:k=0/12,flip:+"] >= lowest["T:k=0/12,flip:-"] {
				t.Errorf("ring 12: ground state not in the + sector: %v", lowest)
			}
		}
	}
}
