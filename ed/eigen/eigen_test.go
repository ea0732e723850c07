package eigen

import (
	"context"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/lapack"
	lapackgonum "gonum.org/v1/gonum/lapack/gonum"
	"gonum.org/v1/gonum/mat"
)

// ---- helpers ---------------------------------------------------------------

// randSym returns a full (both triangles) random symmetric matrix, N(0,1)
// entries, from a fixed seed.
func randSym(n int, seed uint64) []float64 {
	r := rand.New(rand.NewPCG(seed, 0x5eed))
	a := make([]float64, n*n)
	for i := 0; i < n; i++ {
		for j := 0; j <= i; j++ {
			x := r.NormFloat64()
			a[i*n+j], a[j*n+i] = x, x
		}
	}
	return a
}

// randHerm returns a full random Hermitian matrix (complex N(0,1) entries
// off the diagonal, real N(0,1) on it) from a fixed seed.
func randHerm(n int, seed uint64) []complex128 {
	r := rand.New(rand.NewPCG(seed, 0xbeef))
	a := make([]complex128, n*n)
	for i := 0; i < n; i++ {
		for j := 0; j < i; j++ {
			x := complex(r.NormFloat64(), r.NormFloat64())
			a[i*n+j], a[j*n+i] = x, cmplx.Conj(x)
		}
		a[i*n+i] = complex(r.NormFloat64(), 0)
	}
	return a
}

// randTridiag draws a random symmetric tridiagonal (d, e) of order n from r,
// the diagonal first: standard normal entries; for trial 1 the
// off-diagonal entries i with i%splitMod == splitAt are zero (T splits); for
// trial 2 the diagonal is graded, d_i times 10^(i%grade - grade/2).
func randTridiag(r *rand.Rand, n, trial, grade, splitMod, splitAt int) (d, e []float64) {
	d = make([]float64, n)
	e = make([]float64, max(n-1, 0))
	for i := range d {
		d[i] = r.NormFloat64()
		if trial == 2 {
			d[i] *= math.Pow(10, float64(i%grade-grade/2))
		}
	}
	for i := range e {
		e[i] = r.NormFloat64()
		if trial == 1 && i%splitMod == splitAt {
			e[i] = 0
		}
	}
	return d, e
}

// lowerOnly returns a copy of a with the strict upper triangle poisoned
// (NaN), so a solver that reads it fails the checks.
func lowerOnly(a []float64, n int) []float64 {
	b := slices.Clone(a)
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			b[i*n+j] = math.NaN()
		}
	}
	return b
}

// lowerOnlyC poisons the strict upper triangle with NaN and the imaginary
// part of the diagonal with garbage (the API says it is ignored).
func lowerOnlyC(a []complex128, n int) []complex128 {
	b := slices.Clone(a)
	for i := 0; i < n; i++ {
		b[i*n+i] = complex(real(b[i*n+i]), 1e3*float64(i+1))
		for j := i + 1; j < n; j++ {
			b[i*n+j] = cmplx.NaN()
		}
	}
	return b
}

func frobenius(a []float64) float64 {
	s := 0.0
	for _, x := range a {
		s += x * x
	}
	return math.Sqrt(s)
}

func frobeniusC(a []complex128) float64 {
	s := 0.0
	for _, x := range a {
		s += real(x)*real(x) + imag(x)*imag(x)
	}
	return math.Sqrt(s)
}

// checkSymmetric checks the eigen-decomposition of the full symmetric a0:
// ascending values, residuals ||A v_k - lambda_k v_k|| <= tol ||A||_F and
// orthonormality |V^T V - I| <= 1e-12 (source: the definition of a
// symmetric eigen-decomposition, A = V diag(lambda) V^T with V orthogonal).
func checkSymmetric(t *testing.T, name string, a0 []float64, n int, vals, vecs []float64, tol float64) {
	t.Helper()
	if len(vals) != n || len(vecs) != n*n {
		t.Fatalf("%s: len(values) = %d, len(vecs) = %d for n = %d", name, len(vals), len(vecs), n)
	}
	if !slices.IsSorted(vals) {
		t.Errorf("%s: values not ascending", name)
	}
	norm := math.Max(frobenius(a0), 1)
	col := make([]float64, n)
	worst := 0.0
	for k := 0; k < n; k++ {
		for i := 0; i < n; i++ {
			col[i] = vecs[i*n+k]
		}
		r := 0.0
		for i := 0; i < n; i++ {
			s := -vals[k] * col[i]
			for j, x := range a0[i*n : i*n+n] {
				s += x * col[j]
			}
			r += s * s
		}
		worst = math.Max(worst, math.Sqrt(r)/norm)
	}
	if worst > tol {
		t.Errorf("%s: residual %.3g ||A|| > %.1g ||A||", name, worst, tol)
	}
	orth := 0.0
	for k := 0; k < n; k++ {
		for l := k; l < n; l++ {
			s := 0.0
			for i := 0; i < n; i++ {
				s += vecs[i*n+k] * vecs[i*n+l]
			}
			if k == l {
				s--
			}
			orth = math.Max(orth, math.Abs(s))
		}
	}
	if orth > 1e-12 {
		t.Errorf("%s: |V^T V - I| = %.3g", name, orth)
	}
}

// checkHermitian is checkSymmetric for complex Hermitian a0 (V^H V = I).
func checkHermitian(t *testing.T, name string, a0 []complex128, n int, vals []float64, vecs []complex128, tol float64) {
	t.Helper()
	if len(vals) != n || len(vecs) != n*n {
		t.Fatalf("%s: len(values) = %d, len(vecs) = %d for n = %d", name, len(vals), len(vecs), n)
	}
	if !slices.IsSorted(vals) {
		t.Errorf("%s: values not ascending", name)
	}
	norm := math.Max(frobeniusC(a0), 1)
	col := make([]complex128, n)
	worst := 0.0
	for k := 0; k < n; k++ {
		for i := 0; i < n; i++ {
			col[i] = vecs[i*n+k]
		}
		r := 0.0
		for i := 0; i < n; i++ {
			s := -complex(vals[k], 0) * col[i]
			for j, x := range a0[i*n : i*n+n] {
				s += x * col[j]
			}
			r += real(s)*real(s) + imag(s)*imag(s)
		}
		worst = math.Max(worst, math.Sqrt(r)/norm)
	}
	if worst > tol {
		t.Errorf("%s: residual %.3g ||A|| > %.1g ||A||", name, worst, tol)
	}
	orth := 0.0
	for k := 0; k < n; k++ {
		for l := k; l < n; l++ {
			var s complex128
			for i := 0; i < n; i++ {
				s += cmplx.Conj(vecs[i*n+k]) * vecs[i*n+l]
			}
			if k == l {
				s--
			}
			orth = math.Max(orth, cmplx.Abs(s))
		}
	}
	if orth > 1e-12 {
		t.Errorf("%s: |V^H V - I| = %.3g", name, orth)
	}
}

// ---- invariants on random matrices ------------------------------------------

var invariantSizes = []int{1, 2, 3, 10, 57, 200}

// Source: invariants of the symmetric eigenproblem (A v = lambda v, V^T V = I,
// ascending order) and agreement of the values-only path with the
// with-vectors path, on seeded random matrices of which only the lower
// triangle is readable.
func TestSymmetricInvariants(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		for _, n := range invariantSizes {
			a0 := randSym(n, uint64(n))
			vals, vecs, ok := symmetric(be, lowerOnly(a0, n), n, true)
			if !ok {
				t.Fatalf("n=%d: not ok", n)
			}
			checkSymmetric(t, "Symmetric", a0, n, vals, vecs, 1e-12)
			only, nov, ok := symmetric(be, lowerOnly(a0, n), n, false)
			if !ok || nov != nil {
				t.Fatalf("n=%d values only: ok=%v vecs=%v", n, ok, nov != nil)
			}
			norm := frobenius(a0)
			for k := range only {
				if math.Abs(only[k]-vals[k]) > 1e-12*norm {
					t.Errorf("n=%d: values-only[%d] = %v, with vectors %v", n, k, only[k], vals[k])
				}
			}
		}
	})
}

// Source: as TestSymmetricInvariants, for the complex Hermitian solver
// (A v = lambda v, V^H V = I), with NaN in the upper triangle and garbage in
// the imaginary part of the diagonal, both of which must be ignored. n = 600
// also exercises the multi-goroutine Hermitian matrix-vector product.
func TestHermitianInvariants(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		sizes := invariantSizes
		if !testing.Short() {
			sizes = append(slices.Clone(sizes), 600)
		}
		for _, n := range sizes {
			a0 := randHerm(n, uint64(n))
			vals, vecs, ok := hermitian(be, lowerOnlyC(a0, n), n, true)
			if !ok {
				t.Fatalf("n=%d: not ok", n)
			}
			checkHermitian(t, "Hermitian", a0, n, vals, vecs, 1e-12)
			only, nov, ok := hermitian(be, lowerOnlyC(a0, n), n, false)
			if !ok || nov != nil {
				t.Fatalf("n=%d values only: ok=%v vecs=%v", n, ok, nov != nil)
			}
			norm := frobeniusC(a0)
			for k := range only {
				if math.Abs(only[k]-vals[k]) > 1e-12*norm {
					t.Errorf("n=%d: values-only[%d] = %v, with vectors %v", n, k, only[k], vals[k])
				}
			}
		}
	})
}

// ---- reference library ------------------------------------------------------

// Source: gonum's general-purpose symmetric eigensolver (mat.EigenSym) on the
// real 2n x 2n embedding
//
//	[[Re A, -Im A], [Im A, Re A]],
//
// which is similar to diag(A, conj(A)) and so has every eigenvalue of A
// twice. Agreement to 1e-10 relative to ||A||. (The embedding is used only
// here, as an independent reference.)
func TestHermitianAgainstRealEmbedding(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		for _, n := range invariantSizes {
			a0 := randHerm(n, 100+uint64(n))
			emb := make([]float64, 4*n*n)
			m := 2 * n
			for i := 0; i < n; i++ {
				for j := 0; j < n; j++ {
					re, im := real(a0[i*n+j]), imag(a0[i*n+j])
					emb[i*m+j] = re
					emb[i*m+n+j] = -im
					emb[(n+i)*m+j] = im
					emb[(n+i)*m+n+j] = re
				}
			}
			var es mat.EigenSym
			if !es.Factorize(mat.NewSymDense(m, emb), false) {
				t.Fatalf("n=%d: reference failed", n)
			}
			ref := es.Values(nil)
			for _, vectors := range []bool{false, true} {
				vals, _, ok := hermitian(be, slices.Clone(a0), n, vectors)
				if !ok {
					t.Fatalf("n=%d: not ok", n)
				}
				norm := frobeniusC(a0)
				for k := 0; k < n; k++ {
					for _, r := range ref[2*k : 2*k+2] {
						if math.Abs(vals[k]-r) > 1e-10*norm {
							t.Errorf("n=%d vectors=%v: value %d = %.15g, reference %.15g", n, vectors, k, vals[k], r)
						}
					}
				}
			}
		}
	})
}

// Source: gonum's mat.EigenSym (Dsyev) as the reference for the real solver,
// values and vectors (vectors compared up to sign; the spectra of these
// random matrices are simple).
func TestSymmetricAgainstGonum(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		for _, n := range invariantSizes {
			a0 := randSym(n, 200+uint64(n))
			var es mat.EigenSym
			if !es.Factorize(mat.NewSymDense(n, slices.Clone(a0)), true) {
				t.Fatalf("n=%d: reference failed", n)
			}
			ref := es.Values(nil)
			var rv mat.Dense
			es.VectorsTo(&rv)
			vals, vecs, ok := symmetric(be, slices.Clone(a0), n, true)
			if !ok {
				t.Fatalf("n=%d: not ok", n)
			}
			norm := frobenius(a0)
			for k := 0; k < n; k++ {
				if math.Abs(vals[k]-ref[k]) > 1e-12*norm {
					t.Errorf("n=%d: value %d = %.15g, gonum %.15g", n, k, vals[k], ref[k])
				}
				dot := 0.0
				for i := 0; i < n; i++ {
					dot += vecs[i*n+k] * rv.At(i, k)
				}
				if math.Abs(math.Abs(dot)-1) > 1e-9 {
					t.Errorf("n=%d: |<v_%d, gonum v_%d>| = %.15g", n, k, k, math.Abs(dot))
				}
			}
		}
	})
}

// Source: gonum's Dsteqr (implicit QL/QR, rotations applied at once) as the
// reference for this package's tridiagQL (deferred, row-wise rotations), on
// random tridiagonal matrices including ones with exact splits (e_j = 0).
func TestTridiagQLAgainstDsteqr(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 7))
	for _, n := range []int{1, 2, 3, 4, 17, 100, 150} {
		for trial := 0; trial < 3; trial++ {
			d0 := make([]float64, n)
			e0 := make([]float64, max(n-1, 0))
			for i := range d0 {
				d0[i] = r.NormFloat64()
			}
			for i := range e0 {
				e0[i] = r.NormFloat64()
				if trial == 1 && i%7 == 3 {
					e0[i] = 0
				}
				if trial == 2 {
					d0[i] = float64(i % 3) // repeated diagonal blocks
				}
			}
			d, e := slices.Clone(d0), slices.Clone(e0)
			z := make([]float64, n*n)
			for i := 0; i < n; i++ {
				z[i*n+i] = 1
			}
			if tridiagQL(d, e, z, n, n, nil) != nil {
				t.Fatalf("n=%d: tridiagQL failed", n)
			}
			dr, er := slices.Clone(d0), slices.Clone(e0)
			zr := make([]float64, n*n)
			if !(lapackgonum.Implementation{}).Dsteqr(lapack.EVTridiag, n, dr, er, zr, max(n, 1), make([]float64, max(1, 2*n-2))) {
				t.Fatalf("n=%d: Dsteqr failed", n)
			}
			for k := 0; k < n; k++ {
				if math.Abs(d[k]-dr[k]) > 1e-13*math.Max(1, math.Abs(dr[k])) {
					t.Errorf("n=%d trial %d: value %d = %.16g, Dsteqr %.16g", n, trial, k, d[k], dr[k])
				}
			}
			// Vectors: T z_k = d_k z_k and Z^T Z = I (the spectrum may be
			// degenerate in trial 2, so compare residuals, not vectors).
			full := make([]float64, n*n)
			for i := 0; i < n; i++ {
				full[i*n+i] = d0[i]
				if i+1 < n {
					full[i*n+i+1], full[(i+1)*n+i] = e0[i], e0[i]
				}
			}
			checkSymmetric(t, "tridiagQL", full, n, d, z, 1e-13)
		}
	}
}

// Source: the defining property of the complex Householder reflector (as in
// LAPACK's zlarfg): H = I - tau v v^H is unitary, v_last = 1, and
// H^H y = beta e_last with beta real.
func TestReflector(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 3))
	for _, k := range []int{1, 2, 5, 33} {
		for trial := 0; trial < 4; trial++ {
			y := make([]complex128, k)
			for i := range y {
				y[i] = complex(r.NormFloat64(), r.NormFloat64())
				if trial == 1 && i < k-1 {
					y[i] = 0 // only the phase of alpha to remove
				}
			}
			if trial == 2 {
				clear(y)
				y[k-1] = 2.5 // already real: H = I
			}
			if trial == 3 {
				for i := range y {
					y[i] *= 1e-310 // subnormal scale
				}
			}
			y0 := slices.Clone(y)
			beta, tau := reflector(y)
			v := y
			if v[k-1] != 1 {
				t.Fatalf("k=%d: v_last = %v", k, v[k-1])
			}
			// H^H y0 = y0 - conj(tau) v (v^H y0)
			var vy complex128
			for i := range v {
				vy += cmplx.Conj(v[i]) * y0[i]
			}
			scale := 0.0
			for _, x := range y0 {
				scale = math.Max(scale, cmplx.Abs(x))
			}
			for i := range v {
				hy := y0[i] - cmplx.Conj(tau)*v[i]*vy
				want := complex128(0)
				if i == k-1 {
					want = complex(beta, 0)
				}
				if cmplx.Abs(hy-want) > 1e-14*scale+1e-321 {
					t.Errorf("k=%d trial %d: (H^H y)[%d] = %v, want %v", k, trial, i, hy, want)
				}
			}
			// unitarity: |tau|^2 v^H v = 2 Re tau
			vv := 0.0
			for _, x := range v {
				vv += real(x)*real(x) + imag(x)*imag(x)
			}
			if g := real(tau)*real(tau) + imag(tau)*imag(tau); math.Abs(g*vv-2*real(tau)) > 1e-14 {
				t.Errorf("k=%d trial %d: H not unitary: |tau|^2 v^H v = %v, 2 Re tau = %v", k, trial, g*vv, 2*real(tau))
			}
		}
	}
}

// ---- closed forms -----------------------------------------------------------

// Source: textbook closed form of the n x n tridiagonal Toeplitz matrix with
// diagonal a and off-diagonal b: eigenvalues a + 2|b| cos(k pi/(n+1)),
// k = 1..n, eigenvectors (sin(j k pi/(n+1)))_j up to a diagonal phase. For
// complex b = |b| e^{i phi} the diagonal unitary D = diag(e^{i j phi}) maps
// it to the real one, so the spectrum depends on |b| only.
func TestToeplitzClosedForm(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		const a = 0.3
		for _, n := range []int{1, 2, 5, 50, 200} {
			want := make([]float64, n)
			for k := 1; k <= n; k++ {
				want[k-1] = a + 2*1.7*math.Cos(float64(k)*math.Pi/float64(n+1))
			}
			slices.Sort(want)
			// Real, b = -1.7.
			ar := make([]float64, n*n)
			for i := 0; i < n; i++ {
				ar[i*n+i] = a
				if i > 0 {
					ar[i*n+i-1], ar[(i-1)*n+i] = -1.7, -1.7
				}
			}
			vals, vecs, ok := symmetric(be, slices.Clone(ar), n, true)
			if !ok {
				t.Fatalf("n=%d: not ok", n)
			}
			for k := range want {
				if math.Abs(vals[k]-want[k]) > 1e-13*float64(n) {
					t.Errorf("real n=%d: value %d = %.16g, closed form %.16g", n, k, vals[k], want[k])
				}
			}
			checkSymmetric(t, "Toeplitz", ar, n, vals, vecs, 1e-13)
			// For b < 0 the eigenvector of a + 2|b| cos(k pi/(n+1)) is
			// u_j = (-1)^j sin(j k pi/(n+1)), j = 1..n; the spectrum is simple,
			// so the computed vector of that value must be +-u/|u|.
			for k := 1; k <= n; k++ {
				lam := a + 2*1.7*math.Cos(float64(k)*math.Pi/float64(n+1))
				idx := -1
				for q := range vals {
					if math.Abs(vals[q]-lam) < 1e-9 {
						idx = q
					}
				}
				if idx < 0 {
					t.Fatalf("n=%d: value %v not found", n, lam)
				}
				u := make([]float64, n)
				un := 0.0
				for j := 1; j <= n; j++ {
					u[j-1] = math.Sin(float64(j*k) * math.Pi / float64(n+1))
					if j%2 == 0 {
						u[j-1] = -u[j-1]
					}
					un += u[j-1] * u[j-1]
				}
				dot := 0.0
				for i := 0; i < n; i++ {
					dot += u[i] * vecs[i*n+idx]
				}
				if math.Abs(math.Abs(dot)/math.Sqrt(un)-1) > 1e-10 {
					t.Errorf("n=%d k=%d: |<u, v>| = %.15g, want 1", n, k, math.Abs(dot)/math.Sqrt(un))
				}
			}
			// Hermitian, b = 1.7 e^{0.9 i}.
			b := cmplx.Rect(1.7, 0.9)
			ac := make([]complex128, n*n)
			for i := 0; i < n; i++ {
				ac[i*n+i] = a
				if i > 0 {
					ac[i*n+i-1], ac[(i-1)*n+i] = b, cmplx.Conj(b)
				}
			}
			for _, vectors := range []bool{false, true} {
				vals, vecs, ok := hermitian(be, slices.Clone(ac), n, vectors)
				if !ok {
					t.Fatalf("n=%d: not ok", n)
				}
				for k := range want {
					if math.Abs(vals[k]-want[k]) > 1e-13*float64(n) {
						t.Errorf("complex n=%d vectors=%v: value %d = %.16g, closed form %.16g", n, vectors, k, vals[k], want[k])
					}
				}
				if vectors {
					checkHermitian(t, "Toeplitz", ac, n, vals, vecs, 1e-13)
				}
			}
		}
	})
}

// Source: closed form of the 2x2 Hermitian matrix [[a, c], [conj c, d]]:
// eigenvalues (a+d)/2 -+ sqrt(((a-d)/2)^2 + |c|^2).
func TestHermitian2x2ClosedForm(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		r := rand.New(rand.NewPCG(2, 2))
		for trial := 0; trial < 50; trial++ {
			a, d := r.NormFloat64(), r.NormFloat64()
			c := complex(r.NormFloat64(), r.NormFloat64())
			if trial == 0 {
				c = 0
			}
			if trial == 1 {
				d = a
			}
			m := []complex128{complex(a, 0), cmplx.Conj(c), c, complex(d, 0)}
			rad := math.Sqrt((a-d)*(a-d)/4 + real(c)*real(c) + imag(c)*imag(c))
			want := []float64{(a+d)/2 - rad, (a+d)/2 + rad}
			vals, vecs, ok := hermitian(be, slices.Clone(m), 2, true)
			if !ok {
				t.Fatal("not ok")
			}
			for k := range want {
				if math.Abs(vals[k]-want[k]) > 1e-14*(1+rad) {
					t.Errorf("trial %d: value %d = %.16g, closed form %.16g", trial, k, vals[k], want[k])
				}
			}
			checkHermitian(t, "2x2", m, 2, vals, vecs, 1e-14)
			// The real 2x2 [[a, b], [b, d]] with b = |c|.
			b := cmplx.Abs(c)
			rv, rvecs, ok := symmetric(be, []float64{a, b, b, d}, 2, true)
			if !ok {
				t.Fatal("not ok")
			}
			for k := range want {
				if math.Abs(rv[k]-want[k]) > 1e-14*(1+rad) {
					t.Errorf("trial %d: real value %d = %.16g, closed form %.16g", trial, k, rv[k], want[k])
				}
			}
			checkSymmetric(t, "2x2", []float64{a, b, b, d}, 2, rv, rvecs, 1e-14)
		}
	})
}

// randUnitary returns a random n x n unitary matrix (real orthogonal when
// real is true) by modified Gram-Schmidt, applied twice, on random columns.
func randUnitary(n int, seed uint64, real bool) []complex128 {
	r := rand.New(rand.NewPCG(seed, 11))
	u := make([]complex128, n*n)
	for i := range u {
		if real {
			u[i] = complex(r.NormFloat64(), 0)
		} else {
			u[i] = complex(r.NormFloat64(), r.NormFloat64())
		}
	}
	for pass := 0; pass < 2; pass++ {
		for k := 0; k < n; k++ {
			for l := 0; l < k; l++ {
				var s complex128
				for i := 0; i < n; i++ {
					s += cmplx.Conj(u[i*n+l]) * u[i*n+k]
				}
				for i := 0; i < n; i++ {
					u[i*n+k] -= s * u[i*n+l]
				}
			}
			nrm := 0.0
			for i := 0; i < n; i++ {
				nrm += real2(u[i*n+k])
			}
			nrm = math.Sqrt(nrm)
			for i := 0; i < n; i++ {
				u[i*n+k] /= complex(nrm, 0)
			}
		}
	}
	return u
}

func real2(x complex128) float64 { return real(x)*real(x) + imag(x)*imag(x) }

// Source: construction. A = U diag(lambda) U^H with U random unitary has
// exactly the spectrum lambda; with repeated entries the solver must still
// return orthonormal eigenvectors (any basis of each eigenspace). c I is the
// extreme case (every vector is an eigenvector); a diagonal matrix must come
// back sorted with unit vectors.
func TestDegenerate(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		spec := []float64{-1, -1, -1, -1, -1, 0.5, 0.5, 0.5, 2, 2, 2, 2, 2, 2, 2, 3, -1, 0.5, 7, 7}
		n := len(spec)
		want := slices.Clone(spec)
		slices.Sort(want)
		for _, isReal := range []bool{true, false} {
			u := randUnitary(n, 5, isReal)
			ac := make([]complex128, n*n)
			for i := 0; i < n; i++ {
				for j := 0; j < n; j++ {
					var s complex128
					for k := 0; k < n; k++ {
						s += u[i*n+k] * complex(spec[k], 0) * cmplx.Conj(u[j*n+k])
					}
					ac[i*n+j] = s
				}
			}
			if isReal {
				ar := make([]float64, n*n)
				for i := range ar {
					ar[i] = real(ac[i])
				}
				vals, vecs, ok := symmetric(be, slices.Clone(ar), n, true)
				if !ok {
					t.Fatal("not ok")
				}
				for k := range want {
					if math.Abs(vals[k]-want[k]) > 1e-13 {
						t.Errorf("real: value %d = %.16g, want %v", k, vals[k], want[k])
					}
				}
				checkSymmetric(t, "degenerate real", ar, n, vals, vecs, 1e-13)
			} else {
				vals, vecs, ok := hermitian(be, slices.Clone(ac), n, true)
				if !ok {
					t.Fatal("not ok")
				}
				for k := range want {
					if math.Abs(vals[k]-want[k]) > 1e-13 {
						t.Errorf("complex: value %d = %.16g, want %v", k, vals[k], want[k])
					}
				}
				checkHermitian(t, "degenerate complex", ac, n, vals, vecs, 1e-13)
			}
		}

		// c I, real and complex, and the zero matrix.
		for _, c := range []float64{0, 2.5} {
			const m = 40
			ar := make([]float64, m*m)
			ac := make([]complex128, m*m)
			for i := 0; i < m; i++ {
				ar[i*m+i] = c
				ac[i*m+i] = complex(c, 0)
			}
			vals, vecs, ok := symmetric(be, slices.Clone(ar), m, true)
			if !ok {
				t.Fatal("not ok")
			}
			for _, v := range vals {
				if v != c {
					t.Errorf("%v I: value %v", c, v)
				}
			}
			checkSymmetric(t, "cI real", ar, m, vals, vecs, 1e-15)
			cv, cvecs, ok := hermitian(be, slices.Clone(ac), m, true)
			if !ok {
				t.Fatal("not ok")
			}
			for _, v := range cv {
				if v != c {
					t.Errorf("%v I complex: value %v", c, v)
				}
			}
			checkHermitian(t, "cI complex", ac, m, cv, cvecs, 1e-15)
		}

		// Diagonal, unsorted: values sorted, vectors permuted unit vectors.
		diag := []float64{3, -2, 5, 0, -2, 1}
		m := len(diag)
		ac := make([]complex128, m*m)
		for i, x := range diag {
			ac[i*m+i] = complex(x, 0)
		}
		vals, vecs, ok := hermitian(be, slices.Clone(ac), m, true)
		if !ok {
			t.Fatal("not ok")
		}
		sorted := slices.Clone(diag)
		slices.Sort(sorted)
		if !slices.Equal(vals, sorted) {
			t.Errorf("diagonal: values %v, want %v", vals, sorted)
		}
		checkHermitian(t, "diagonal", ac, m, vals, vecs, 1e-15)
	})
}

// Source: homogeneity, lambda(s A) = s lambda(A): matrices scaled to near
// the underflow and overflow thresholds (where squares of entries leave the
// double range) must give the scaled spectrum.
func TestExtremeScaling(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		const n = 30
		a0 := randHerm(n, 9)
		ref, _, _ := hermitian(be, slices.Clone(a0), n, false)
		r0 := randSym(n, 9)
		rref, _, _ := symmetric(be, slices.Clone(r0), n, false)
		for _, s := range []float64{1e-300, 1e300} {
			a := slices.Clone(a0)
			for i := range a {
				a[i] *= complex(s, 0)
			}
			for _, vectors := range []bool{false, true} {
				vals, vecs, ok := hermitian(be, slices.Clone(a), n, vectors)
				if !ok {
					t.Fatalf("scale %g: not ok", s)
				}
				for k := range ref {
					if math.Abs(vals[k]/s-ref[k]) > 1e-12*math.Abs(ref[n-1]) {
						t.Errorf("scale %g: value %d = %g, want %g", s, k, vals[k]/s, ref[k])
					}
				}
				if vectors {
					checkHermitian(t, "scaled", a0, n, ref, vecs, 1e-12)
				}
			}
			ar := slices.Clone(r0)
			for i := range ar {
				ar[i] *= s
			}
			for _, vectors := range []bool{false, true} {
				vals, vecs, ok := symmetric(be, slices.Clone(ar), n, vectors)
				if !ok {
					t.Fatalf("real scale %g: not ok", s)
				}
				for k := range rref {
					if math.Abs(vals[k]/s-rref[k]) > 1e-12*math.Abs(rref[n-1]) {
						t.Errorf("real scale %g: value %d = %g, want %g", s, k, vals[k]/s, rref[k])
					}
				}
				if vectors {
					checkSymmetric(t, "scaled", r0, n, rref, vecs, 1e-12)
				}
			}
		}
	})
}

// Source: textbook closed form of the tridiagonal Toeplitz matrix (as in
// TestToeplitzClosedForm) at the scale 1e-125, inside the range the solvers
// do not prescale but below the block norm at which sterf rescales (where
// gonum v0.17.0's Dsterf panics, see sterf).
func TestTinyTridiagonal(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		const n, s = 12, 1e-125
		want := make([]float64, n)
		for k := 1; k <= n; k++ {
			want[k-1] = s * (0.3 + 2*math.Cos(float64(k)*math.Pi/float64(n+1)))
		}
		slices.Sort(want)
		ar := make([]float64, n*n)
		ac := make([]complex128, n*n)
		for i := 0; i < n; i++ {
			ar[i*n+i], ac[i*n+i] = 0.3*s, complex(0.3*s, 0)
			if i > 0 {
				ar[i*n+i-1], ac[i*n+i-1] = s, complex(0, s)
			}
		}
		for _, vectors := range []bool{false, true} {
			rv, _, ok := symmetric(be, slices.Clone(ar), n, vectors)
			if !ok {
				t.Fatal("real: not ok")
			}
			cv, _, ok := hermitian(be, slices.Clone(ac), n, vectors)
			if !ok {
				t.Fatal("complex: not ok")
			}
			for k := range want {
				if math.Abs(rv[k]-want[k]) > 1e-13*s || math.Abs(cv[k]-want[k]) > 1e-13*s {
					t.Errorf("vectors=%v: value %d: real %g, complex %g, want %g", vectors, k, rv[k], cv[k], want[k])
				}
			}
		}
	})
}

// Source: the API contract: n = 0 gives empty slices and ok, programmer
// errors panic, non-finite input reports ok = false, and a real Hermitian
// matrix gives the same spectrum through both solvers.
func TestAPIContract(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		v, z, ok := symmetric(be, nil, 0, true)
		if !ok || v == nil || len(v) != 0 || z == nil || len(z) != 0 {
			t.Errorf("Symmetric n=0: %v %v %v", v, z, ok)
		}
		cv, cz, ok := hermitian(be, []complex128{}, 0, true)
		if !ok || cv == nil || len(cv) != 0 || cz == nil || len(cz) != 0 {
			t.Errorf("Hermitian n=0: %v %v %v", cv, cz, ok)
		}
		if _, z, _ := symmetric(be, nil, 0, false); z != nil {
			t.Errorf("Symmetric n=0 values only: vecs = %v", z)
		}
		mustPanic := func(name string, f func()) {
			t.Helper()
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", name)
				}
			}()
			f()
		}
		mustPanic("Symmetric len", func() { symmetric(be, make([]float64, 5), 2, false) })
		mustPanic("Symmetric n<0", func() { symmetric(be, nil, -1, false) })
		mustPanic("Hermitian len", func() { hermitian(be, make([]complex128, 3), 2, true) })
		mustPanic("Hermitian n<0", func() { hermitian(be, nil, -2, true) })

		if _, _, ok := symmetric(be, []float64{1, 0, math.NaN(), 2}, 2, true); ok {
			t.Error("Symmetric with NaN: ok")
		}
		if _, _, ok := hermitian(be, []complex128{1, 0, cmplx.Inf(), 2}, 2, false); ok {
			t.Error("Hermitian with Inf: ok")
		}
		// Upper-triangle NaN is ignored (only the lower triangle is read).
		if _, _, ok := symmetric(be, []float64{1, math.NaN(), 0.5, 2}, 2, true); !ok {
			t.Error("Symmetric with NaN in the upper triangle: not ok")
		}

		const n = 25
		r0 := randSym(n, 12)
		c0 := make([]complex128, n*n)
		for i, x := range r0 {
			c0[i] = complex(x, 0)
		}
		rv, _, _ := symmetric(be, slices.Clone(r0), n, false)
		hv, _, _ := hermitian(be, c0, n, false)
		for k := range rv {
			if math.Abs(rv[k]-hv[k]) > 1e-13*frobenius(r0) {
				t.Errorf("real matrix: Symmetric %v, Hermitian %v", rv[k], hv[k])
			}
		}
		if len(Solver) == 0 {
			t.Error("empty Solver")
		}
	})
}

// ---- benchmarks ---------------------------------------------------------------

// The Benchmark{Symmetric,Hermitian}* time PureGo whatever the build tag;
// BenchmarkLAPACK* (lapack_test.go, -tags lapack) time the LAPACK backend.

func benchSymmetric(b *testing.B, n int, vectors bool) {
	a0 := randSym(n, 1)
	a := make([]float64, n*n)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		copy(a, a0)
		b.StartTimer()
		if _, _, err := PureGo.Symmetric(context.Background(), a, n, Job{Vectors: vectors}, nil); err != nil {
			b.Fatal("not ok")
		}
	}
}

func benchHermitian(b *testing.B, n int, vectors bool) {
	a0 := randHerm(n, 1)
	a := make([]complex128, n*n)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		copy(a, a0)
		b.StartTimer()
		if _, _, err := PureGo.Hermitian(context.Background(), a, n, Job{Vectors: vectors}, nil); err != nil {
			b.Fatal("not ok")
		}
	}
}

// benchDsyev times gonum's Dsyev on the same input, a baseline for
// Symmetric (Dsyev: Dsytrd + Dsterf or Dorgtr + Dsteqr; Symmetric: sytrd +
// sterf or formQ + tridiagQL).
func benchDsyev(b *testing.B, n int, vectors bool) {
	a0 := randSym(n, 1)
	a := make([]float64, n*n)
	w := make([]float64, n)
	jobz := lapack.EVNone
	if vectors {
		jobz = lapack.EVCompute
	}
	impl := lapackgonum.Implementation{}
	q := []float64{0}
	impl.Dsyev(jobz, 'L', n, a, n, w, q, -1)
	work := make([]float64, int(q[0]))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		copy(a, a0)
		b.StartTimer()
		if !impl.Dsyev(jobz, 'L', n, a, n, w, work, len(work)) {
			b.Fatal("not ok")
		}
	}
}

func BenchmarkSymmetric100Values(b *testing.B)   { benchSymmetric(b, 100, false) }
func BenchmarkSymmetric100Vectors(b *testing.B)  { benchSymmetric(b, 100, true) }
func BenchmarkSymmetric500Values(b *testing.B)   { benchSymmetric(b, 500, false) }
func BenchmarkSymmetric500Vectors(b *testing.B)  { benchSymmetric(b, 500, true) }
func BenchmarkSymmetric1000Values(b *testing.B)  { benchSymmetric(b, 1000, false) }
func BenchmarkSymmetric1000Vectors(b *testing.B) { benchSymmetric(b, 1000, true) }
func BenchmarkSymmetric2000Values(b *testing.B)  { benchSymmetric(b, 2000, false) }
func BenchmarkSymmetric2000Vectors(b *testing.B) { benchSymmetric(b, 2000, true) }

func BenchmarkHermitian100Values(b *testing.B)   { benchHermitian(b, 100, false) }
func BenchmarkHermitian100Vectors(b *testing.B)  { benchHermitian(b, 100, true) }
func BenchmarkHermitian500Values(b *testing.B)   { benchHermitian(b, 500, false) }
func BenchmarkHermitian500Vectors(b *testing.B)  { benchHermitian(b, 500, true) }
func BenchmarkHermitian1000Values(b *testing.B)  { benchHermitian(b, 1000, false) }
func BenchmarkHermitian1000Vectors(b *testing.B) { benchHermitian(b, 1000, true) }
func BenchmarkHermitian2000Values(b *testing.B)  { benchHermitian(b, 2000, false) }
func BenchmarkHermitian2000Vectors(b *testing.B) { benchHermitian(b, 2000, true) }

func BenchmarkDsyevReference1000Values(b *testing.B)  { benchDsyev(b, 1000, false) }
func BenchmarkDsyevReference1000Vectors(b *testing.B) { benchDsyev(b, 1000, true) }
func BenchmarkDsyevReference2000Vectors(b *testing.B) { benchDsyev(b, 2000, true) }
