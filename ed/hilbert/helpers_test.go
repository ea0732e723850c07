package hilbert_test

import (
	"context"
	"fmt"
	"math"
	"math/cmplx"
	"sort"
	"testing"

	"gonum.org/v1/gonum/mat"

	"frustum/ed/eigen"
	"frustum/ed/hilbert"
)

// model is a spin cluster written the way FORMAT.md states the Hamiltonian:
// bonds sum_{mu,nu} S_a^mu K^{mu nu} S_b^nu, site fields v . S_i and
// single-ion terms A (S_i^z)^2. The tests build its full matrix from the
// textbook Cartesian spin matrices (denseFull), independently of the
// ladder form and of the package's kernels, and its Hamiltonian with the
// package's builders (hamiltonian).
type model struct {
	twoS   []int
	bonds  []bond
	fields map[int][3]float64
	ions   map[int]float64
}

type bond struct {
	a, b int
	K    [9]float64
}

func heis(J, Jz float64) [9]float64 { return [9]float64{J, 0, 0, 0, J, 0, 0, 0, Jz} }

func dmz(J, D float64) [9]float64 { // J S.S + D (Sa x Sb)^z
	return [9]float64{J, D, 0, -D, J, 0, 0, 0, J}
}

func (m *model) hamiltonian() *hilbert.Hamiltonian {
	h := &hilbert.Hamiltonian{TwoS: m.twoS}
	for _, b := range m.bonds {
		h.AddExchange(b.a, b.b, b.K)
	}
	for _, i := range sortedInts(m.fields) {
		h.AddField(i, m.fields[i])
	}
	for _, i := range sortedInts(m.ions) {
		h.AddSingleIon(i, m.ions[i])
	}
	return h
}

func sortedInts[V any](m map[int]V) []int {
	var k []int
	for i := range m {
		k = append(k, i)
	}
	sort.Ints(k)
	return k
}

// ring returns N spins 1/2 on a ring with nearest-neighbour XXZ (J, Jz) and
// next-nearest Heisenberg J2 bonds.
func ring(N int, J, Jz, J2 float64) *model {
	m := &model{twoS: fill(N, 1)}
	for i := 0; i < N; i++ {
		m.bonds = append(m.bonds, bond{i, (i + 1) % N, heis(J, Jz)})
	}
	if J2 != 0 {
		for i := 0; i < N; i++ {
			m.bonds = append(m.bonds, bond{i, (i + 2) % N, heis(J2, J2)})
		}
	}
	return m
}

func fill(n, v int) []int {
	s := make([]int, n)
	for i := range s {
		s[i] = v
	}
	return s
}

// translation returns i -> i + d mod N.
func translation(N, d int) []int {
	p := make([]int, N)
	for i := range p {
		p[i] = ((i+d)%N + N) % N
	}
	return p
}

// reflection returns i -> c - i mod N.
func reflection(N, c int) []int {
	p := make([]int, N)
	for i := range p {
		p[i] = ((c-i)%N + N) % N
	}
	return p
}

// spinMatrices returns the textbook S^x, S^y, S^z of spin twoS/2 in the
// basis k = 0..2S, m = S - k: S^z = diag(m), <m+1|S^+|m> = sqrt(S(S+1) - m(m+1)).
func spinMatrices(twoS int) [3][][]complex128 {
	d := twoS + 1
	S := float64(twoS) / 2
	var out [3][][]complex128
	for mu := range out {
		out[mu] = make([][]complex128, d)
		for i := range out[mu] {
			out[mu][i] = make([]complex128, d)
		}
	}
	for k := 0; k < d; k++ {
		m := S - float64(k)
		out[2][k][k] = complex(m, 0)
		if k > 0 { // S^+ |k> = c |k-1>
			c := math.Sqrt(S*(S+1) - m*(m+1))
			// S^x = (S^+ + S^-)/2, S^y = (S^+ - S^-)/(2i)
			out[0][k-1][k] += complex(c/2, 0)
			out[0][k][k-1] += complex(c/2, 0)
			out[1][k-1][k] += complex(0, -c/2)
			out[1][k][k-1] += complex(0, c/2)
		}
	}
	return out
}

// fullDim is the product dimension, stride the mixed-radix strides.
func (m *model) strides() (int, []int) {
	st := make([]int, len(m.twoS))
	d := 1
	for i, t := range m.twoS {
		st[i] = d
		d *= t + 1
	}
	return d, st
}

func (m *model) digits(x int) []int {
	k := make([]int, len(m.twoS))
	for i, t := range m.twoS {
		k[i] = x % (t + 1)
		x /= t + 1
	}
	return k
}

// column calls f(y, <y|H|x>) for the matrix elements of column x (y may
// repeat), from the Cartesian spin matrices.
func (m *model) column(mats [][3][][]complex128, x int, f func(y int, amp complex128)) {
	_, st := m.strides()
	k := m.digits(x)
	for _, b := range m.bonds {
		for mu := 0; mu < 3; mu++ {
			for nu := 0; nu < 3; nu++ {
				c := b.K[3*mu+nu]
				if c == 0 {
					continue
				}
				for ka := 0; ka <= m.twoS[b.a]; ka++ {
					for kb := 0; kb <= m.twoS[b.b]; kb++ {
						amp := mats[b.a][mu][ka][k[b.a]] * mats[b.b][nu][kb][k[b.b]]
						if amp != 0 {
							f(x+(ka-k[b.a])*st[b.a]+(kb-k[b.b])*st[b.b], complex(c, 0)*amp)
						}
					}
				}
			}
		}
	}
	for i, v := range m.fields {
		for mu := 0; mu < 3; mu++ {
			for ki := 0; ki <= m.twoS[i]; ki++ {
				if amp := mats[i][mu][ki][k[i]]; amp != 0 && v[mu] != 0 {
					f(x+(ki-k[i])*st[i], complex(v[mu], 0)*amp)
				}
			}
		}
	}
	for i, A := range m.ions {
		mz := real(mats[i][2][k[i]][k[i]])
		f(x, complex(A*mz*mz, 0))
	}
}

func (m *model) spinMats() [][3][][]complex128 {
	mats := make([][3][][]complex128, len(m.twoS))
	for i, t := range m.twoS {
		mats[i] = spinMatrices(t)
	}
	return mats
}

// denseFull returns the full matrix H[y][x] = <y|H|x>, row-major.
func (m *model) denseFull() (int, []complex128) {
	D, _ := m.strides()
	H := make([]complex128, D*D)
	mats := m.spinMats()
	for x := 0; x < D; x++ {
		m.column(mats, x, func(y int, amp complex128) { H[y*D+x] += amp })
	}
	return D, H
}

// applyFull returns H v on the full space (as denseFull, without storing
// the matrix).
func (m *model) applyFull(v []complex128) []complex128 {
	D, _ := m.strides()
	out := make([]complex128, D)
	mats := m.spinMats()
	for x := 0; x < D; x++ {
		if v[x] != 0 {
			m.column(mats, x, func(y int, amp complex128) { out[y] += amp * v[x] })
		}
	}
	return out
}

// twoSzOf returns 2 S^z of product state x.
func (m *model) twoSzOf(x int) int {
	t := 0
	for i, k := range m.digits(x) {
		t += m.twoS[i] - 2*k
	}
	return t
}

// szBlocks returns the full matrix split by 2 S^z, and fails the test if
// any element couples two blocks (then H does not conserve S^z).
func (m *model) szBlocks(t *testing.T) map[int][]int {
	D, H := m.denseFull()
	blocks := map[int][]int{}
	for x := 0; x < D; x++ {
		blocks[m.twoSzOf(x)] = append(blocks[m.twoSzOf(x)], x)
	}
	for y := 0; y < D; y++ {
		for x := 0; x < D; x++ {
			if H[y*D+x] != 0 && m.twoSzOf(x) != m.twoSzOf(y) {
				t.Fatalf("H couples 2Sz = %d and %d", m.twoSzOf(x), m.twoSzOf(y))
			}
		}
	}
	return blocks
}

// blockSpectrum returns the eigenvalues of the full matrix restricted to
// the states xs: gonum's EigenSym for a real block, gonum's EigenSym of
// the real 2n embedding [[X, -Y], [Y, X]] (each eigenvalue twice) for a
// complex one.
func blockSpectrum(t *testing.T, D int, H []complex128, xs []int) []float64 {
	n := len(xs)
	isReal := true
	for _, y := range xs {
		for _, x := range xs {
			if imag(H[y*D+x]) != 0 {
				isReal = false
			}
		}
	}
	if isReal {
		a := mat.NewSymDense(n, nil)
		for i, y := range xs {
			for j, x := range xs {
				a.SetSym(i, j, real(H[y*D+x]))
			}
		}
		return symEigen(t, a)
	}
	a := mat.NewSymDense(2*n, nil)
	for i, y := range xs {
		for j, x := range xs {
			v := H[y*D+x]
			a.SetSym(i, j, real(v))
			a.SetSym(n+i, n+j, real(v))
			a.SetSym(n+i, j, imag(v))
		}
	}
	ev := symEigen(t, a)
	out := make([]float64, n)
	for i := range out {
		out[i] = ev[2*i]
	}
	return out
}

func symEigen(t *testing.T, a *mat.SymDense) []float64 {
	var es mat.EigenSym
	if !es.Factorize(a, false) {
		t.Fatal("gonum EigenSym failed")
	}
	return es.Values(nil)
}

// sectorDense returns the sector matrix, column j = Apply(e_j).
func sectorDense(t *testing.T, s *hilbert.Sector) []complex128 {
	n := s.Dim()
	A := make([]complex128, n*n)
	x := make([]complex128, n)
	y := make([]complex128, n)
	for j := 0; j < n; j++ {
		clear(x)
		x[j] = 1
		if err := s.Apply(context.Background(), y, x); err != nil {
			t.Fatal(err)
		}
		for i := 0; i < n; i++ {
			A[i*n+j] = y[i]
		}
	}
	return A
}

// sectorSpectrum diagonalizes the sector densely: gonum EigenSym when the
// sector is real (its matrix from ApplyReal), the engine's eigen.Hermitian
// otherwise. It also checks hermiticity to tol.
func sectorSpectrum(t *testing.T, s *hilbert.Sector, tol float64) []float64 {
	n := s.Dim()
	if n == 0 {
		return nil
	}
	A := sectorDense(t, s)
	for i := 0; i < n; i++ {
		for j := 0; j <= i; j++ {
			if d := cmplx.Abs(A[i*n+j] - cmplx.Conj(A[j*n+i])); d > tol {
				t.Fatalf("sector %s: H[%d][%d] = %v, conj H[%d][%d] = %v: not Hermitian", s.Irrep().Label, i, j, A[i*n+j], j, i, cmplx.Conj(A[j*n+i]))
			}
		}
	}
	if s.IsReal() {
		a := mat.NewSymDense(n, nil)
		x := make([]float64, n)
		y := make([]float64, n)
		for j := 0; j < n; j++ {
			clear(x)
			x[j] = 1
			if err := s.ApplyReal(context.Background(), y, x); err != nil {
				t.Fatal(err)
			}
			for i := 0; i < n; i++ {
				if math.Abs(y[i]-real(A[i*n+j])) > tol || imag(A[i*n+j]) != 0 && math.Abs(imag(A[i*n+j])) > tol {
					t.Fatalf("ApplyReal and Apply differ at %d, %d", i, j)
				}
			}
			for i := 0; i <= j; i++ {
				a.SetSym(i, j, y[i])
			}
		}
		return symEigen(t, a)
	}
	vals, _, ok := eigen.Hermitian(A, n, false)
	if !ok {
		t.Fatal("eigen.Hermitian failed")
	}
	return vals
}

func sameSpectrum(t *testing.T, name string, got, want []float64, tol float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d eigenvalues, want %d", name, len(got), len(want))
	}
	g := append([]float64(nil), got...)
	w := append([]float64(nil), want...)
	sort.Float64s(g)
	sort.Float64s(w)
	for i := range g {
		if math.Abs(g[i]-w[i]) > tol {
			t.Fatalf("%s: eigenvalue %d: %.12f, want %.12f", name, i, g[i], w[i])
		}
	}
}

// expand returns the full-space vector of the sector vector c, from the
// definition |r~> = (1/sqrt(N_r)) sum_g conj(chi(g)) g|r>, N_r = |G| |Stab_r|,
// with g applied site by site and |Stab_r| counted here.
func expand(m *model, s *hilbert.Sector, c []complex128) []complex128 {
	D, st := m.strides()
	out := make([]complex128, D)
	g := s.Group()
	G := g.Order()
	n := len(m.twoS)
	for r := 0; r < s.Dim(); r++ {
		x := int(s.Representative(r))
		k := m.digits(x)
		imgs := make([]int, G)
		stab := 0
		for e := 0; e < G; e++ {
			perm, flip := g.Element(e)
			y := 0
			for i := 0; i < n; i++ {
				v := k[i]
				if flip {
					v = m.twoS[i] - v
				}
				y += v * st[perm[i]]
			}
			imgs[e] = y
			if y == x {
				stab++
			}
		}
		norm := math.Sqrt(float64(G * stab))
		for e := 0; e < G; e++ {
			out[imgs[e]] += c[r] * cmplx.Conj(s.Irrep().Character(e)) / complex(norm, 0)
		}
	}
	return out
}

func dot(a, b []complex128) complex128 {
	var s complex128
	for i := range a {
		s += cmplx.Conj(a[i]) * b[i]
	}
	return s
}

// fmtSscan reads j from a label "T:k=j/6,...".
func fmtSscan(label string, j *int) (int, error) {
	return fmt.Sscanf(label, "T:k=%d/", j)
}

// denseEigenReal diagonalizes the real part of a Hermitian sector matrix
// with gonum's EigenSym, returning values and vectors (column k, row-major).
func denseEigenReal(t *testing.T, A []complex128, n int) ([]float64, []float64) {
	a := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			a.SetSym(i, j, real(A[i*n+j]))
		}
	}
	var es mat.EigenSym
	if !es.Factorize(a, true) {
		t.Fatal("EigenSym failed")
	}
	var v mat.Dense
	es.VectorsTo(&v)
	out := make([]float64, n*n)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			out[i*n+j] = v.At(i, j)
		}
	}
	return es.Values(nil), out
}
