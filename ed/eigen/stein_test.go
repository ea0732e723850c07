package eigen

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"testing"
	"time"
)

// The bounds of this file are scaled residuals in the form of LAPACK's
// test ratios (common practice; LAPACK's test programs divide by n ulp and
// the norm):
//
//	max_j ||A v_j - lambda_j v_j||_2 <= subsetC n ulp ||A||_2,
//	max_jl |(V^H V - I)_jl|        <= subsetC n ulp,
//
// with ||A||_2 = max |lambda| from the values-only solve. subsetC = 2 is
// chosen from measurement (the ratios measured here are at most 1: random
// matrices up to n = 600 by either route gave residual ratios 0.01..0.4 and
// orthogonality ratios 0.002..0.3), not from a source.
const subsetC = 2

// withRoute runs f with the crossover steinMaxPairs set to pairs (+Inf:
// always inverse iteration; -1: always the QL iteration) and restores it.
func withRoute(pairs float64, f func()) {
	old := steinMaxPairs
	steinMaxPairs = pairs
	defer func() { steinMaxPairs = old }()
	f()
}

// routes are the crossover settings the tests run: the default, forced
// inverse iteration, forced QL.
var routes = []struct {
	name  string
	pairs float64
}{{"auto", steinMaxPairs}, {"stein", math.Inf(1)}, {"ql", -1}}

// pairErrors returns max_j ||A v_j - lambda_j v_j||_2 and max |V^H V - I|
// for the full Hermitian a0 (n x n), the m = len(vals) values and the
// row-major n x m vecs.
func pairErrors(a0 []complex128, n int, vals []float64, vecs []complex128) (resid, orth float64) {
	m := len(vals)
	col := make([]complex128, n)
	for j := 0; j < m; j++ {
		for i := 0; i < n; i++ {
			col[i] = vecs[i*m+j]
		}
		r := 0.0
		for i := 0; i < n; i++ {
			s := -complex(vals[j], 0) * col[i]
			for l, x := range a0[i*n : i*n+n] {
				s += x * col[l]
			}
			r += real2(s)
		}
		resid = math.Max(resid, math.Sqrt(r))
		for l := j; l < m; l++ {
			var s complex128
			for i := 0; i < n; i++ {
				s += cmplx.Conj(vecs[i*m+j]) * vecs[i*m+l]
			}
			if j == l {
				s--
			}
			orth = math.Max(orth, cmplx.Abs(s))
		}
	}
	return resid, orth
}

// checkSubsetPairs checks the m eigenpairs (vals, row-major n x m vecs) of
// the full a0 against the bounds of this file, anorm being ||A||_2.
func checkSubsetPairs(t *testing.T, name string, a0 []complex128, n int, vals []float64, vecs []complex128, anorm float64) {
	t.Helper()
	m := len(vals)
	if len(vecs) != n*m {
		t.Fatalf("%s: len(vecs) = %d, want n m = %d", name, len(vecs), n*m)
	}
	resid, orth := pairErrors(a0, n, vals, vecs)
	tol := subsetC * float64(max(n, 1)) * ulp
	if resid > tol*math.Max(anorm, safeMin) {
		t.Errorf("%s: residual %.3g = %.3g n ulp ||A||, want <= %d", name, resid, resid/(float64(n)*ulp*anorm), subsetC)
	}
	if orth > tol {
		t.Errorf("%s: |V^H V - I| = %.3g = %.3g n ulp, want <= %d", name, orth, orth/(float64(n)*ulp), subsetC)
	}
}

// subsetSolve runs PureGo on a copy of the lower triangle of the full a0
// (real when isReal: a0's real part) with the job and returns the values,
// the vectors as complex, and ||A||_2 and the whole spectrum from the
// values-only solve of the same matrix.
func subsetSolve(t *testing.T, ctx context.Context, isReal bool, a0 []complex128, n int, job Job) (vals []float64, vecs []complex128, anorm float64, all []float64, err error) {
	t.Helper()
	if isReal {
		ar := make([]float64, n*n)
		for i := range ar {
			ar[i] = real(a0[i])
		}
		all, _, err0 := PureGo.Symmetric(context.Background(), lowerOnly(ar, n), n, Job{}, nil)
		if err0 != nil {
			t.Fatal(err0)
		}
		var rv []float64
		vals, rv, err = PureGo.Symmetric(ctx, lowerOnly(ar, n), n, job, nil)
		if rv != nil {
			vecs = toComplex(rv)
		}
		return vals, vecs, specNorm(all), all, err
	}
	all, _, err0 := PureGo.Hermitian(context.Background(), lowerOnlyC(a0, n), n, Job{}, nil)
	if err0 != nil {
		t.Fatal(err0)
	}
	vals, vecs, err = PureGo.Hermitian(ctx, lowerOnlyC(a0, n), n, job, nil)
	return vals, vecs, specNorm(all), all, err
}

// specNorm returns max |lambda| of an ascending spectrum (0 for none).
func specNorm(w []float64) float64 {
	if len(w) == 0 {
		return 0
	}
	return math.Max(math.Abs(w[0]), math.Abs(w[len(w)-1]))
}

// kindName names the real or complex case.
func kindName(isReal bool) string {
	if isReal {
		return "real"
	}
	return "complex"
}

// Source: the definition of an eigenpair and of an orthonormal set, with the
// bounds of this file; the contract of Job.VectorsFor (called once with the
// k eigenvalues returned; every eigenvalue and the vectors of the lowest m
// returned, n x m); the eigenvalues bitwise those of the values-only solve
// (the Backend contract of this change: both are sterf's on the same T).
// Seeded random real symmetric and complex Hermitian matrices, every route
// (auto, inverse iteration, QL), m from 1 to n.
func TestSubsetRandom(t *testing.T) {
	sizes := []int{1, 2, 3, 50, 200, 600}
	if testing.Short() {
		sizes = sizes[:5]
	}
	for _, n := range sizes {
		ms := []int{1, 2, n / 8, n/4 + 1, n / 2, n}
		if n == 600 {
			ms = []int{1, 40, 151, n}
		}
		ms = slices.Compact(slices.Sorted(slices.Values(ms)))
		for _, isReal := range []bool{true, false} {
			var a0 []complex128
			if isReal {
				a0 = toComplex(randSym(n, 700+uint64(n)))
			} else {
				a0 = randHerm(n, 700+uint64(n))
			}
			for _, m := range ms {
				if m < 1 || m > n {
					continue
				}
				for _, rt := range routes {
					if n == 600 && rt.name == "auto" {
						continue // auto is stein here (few pairs)
					}
					name := fmt.Sprintf("%s n=%d m=%d route=%s", kindName(isReal), n, m, rt.name)
					calls := 0
					job := Job{Vectors: true, VectorsFor: func(v []float64) int {
						calls++
						if len(v) != n || !slices.IsSorted(v) {
							t.Errorf("%s: VectorsFor got %d values (ascending %v)", name, len(v), slices.IsSorted(v))
						}
						return m
					}}
					var vals, all []float64
					var vecs []complex128
					var anorm float64
					var err error
					withRoute(rt.pairs, func() {
						vals, vecs, anorm, all, err = subsetSolve(t, context.Background(), isReal, a0, n, job)
					})
					if err != nil {
						t.Fatalf("%s: %v", name, err)
					}
					if calls != 1 {
						t.Errorf("%s: VectorsFor called %d times", name, calls)
					}
					if !slices.Equal(vals, all) {
						t.Errorf("%s: the eigenvalues differ from the values-only solve's", name)
					}
					checkSubsetPairs(t, name, a0, n, vals[:m], vecs, anorm)
				}
			}
		}
	}
}

// Source: perturbation theory of the symmetric eigenproblem (the sin-theta
// theorem: Davis and Kahan, The rotation of eigenvectors by a perturbation
// III, SIAM J. Numer. Anal. 7, 1970): the eigenvector of a simple eigenvalue with
// gap delta to the rest of the spectrum is determined up to a phase to
// O(ulp ||A|| / delta), so for delta >= 1e-4 ||A|| the subset vectors and
// the full path's (QL, every vector) agree, |<v_sub, v_full>| = 1 to 1e-10.
// Eigenvalues with a smaller gap are skipped (none in these spectra: the
// test fails if fewer than m-1 are compared).
func TestSubsetAgainstFull(t *testing.T) {
	const n = 200
	for _, isReal := range []bool{true, false} {
		var a0 []complex128
		if isReal {
			a0 = toComplex(randSym(n, 41))
		} else {
			a0 = randHerm(n, 41)
		}
		full, fvecs, anorm, _, err := subsetSolve(t, context.Background(), isReal, a0, n, Job{Vectors: true})
		if err != nil {
			t.Fatal(err)
		}
		for _, m := range []int{1, 30, 120} {
			for _, rt := range routes[1:] {
				name := fmt.Sprintf("%s m=%d route=%s", kindName(isReal), m, rt.name)
				var vecs []complex128
				withRoute(rt.pairs, func() {
					_, vecs, _, _, err = subsetSolve(t, context.Background(), isReal, a0, n, Job{Vectors: true, VectorsFor: func([]float64) int { return m }})
				})
				if err != nil {
					t.Fatalf("%s: %v", name, err)
				}
				compared := 0
				for j := 0; j < m; j++ {
					gap := math.Inf(1)
					if j > 0 {
						gap = full[j] - full[j-1]
					}
					gap = math.Min(gap, full[j+1]-full[j])
					if gap < 1e-4*anorm {
						continue
					}
					var dot complex128
					for i := 0; i < n; i++ {
						dot += cmplx.Conj(vecs[i*m+j]) * fvecs[i*n+j]
					}
					if d := math.Abs(cmplx.Abs(dot) - 1); d > 1e-10 {
						t.Errorf("%s: vector %d: |<v_sub, v_full>| - 1 = %.3g (gap %.3g)", name, j, d, gap)
					}
					compared++
				}
				if compared < m-1 {
					t.Errorf("%s: only %d of %d vectors compared", name, compared, m)
				}
			}
		}
	}
}

// Source: construction. A = U diag(lambda) U^H (U random unitary, or real
// orthogonal) has exactly the spectrum lambda: here the lowest level -2 is
// five-fold (and 0.5 three-fold), and the vectors of a cut inside or at the
// end of a multiplet must still be orthonormal eigenvectors (any basis of
// the eigenspace), to the bounds of this file, by every route; the values
// must be the spectrum to 1e-13. A = diag(B, B) (B random) doubles every
// eigenvalue with eigenvectors on either copy: the Householder reduction
// keeps the block structure, so T splits exactly (checked) and the copies'
// vectors come from different blocks. c I (every vector an eigenvector)
// gives a T of 1 x 1 blocks.
func TestSubsetDegenerate(t *testing.T) {
	spec := []float64{0.5, -2, 3, -2, 0.5, 1, -2, 7, -2, 0.5, 2, -2, 4, 1.5, -1, 5, 6, 2.5, 3.5, 8}
	n := len(spec)
	want := slices.Sorted(slices.Values(spec))
	for _, isReal := range []bool{true, false} {
		a0 := fromSpectrum(randUnitary(n, 13, isReal), spec)
		for _, m := range []int{1, 3, 5, 6, 8, 9, n} {
			for _, rt := range routes {
				name := fmt.Sprintf("multiplet %s m=%d route=%s", kindName(isReal), m, rt.name)
				var vals []float64
				var vecs []complex128
				var err error
				withRoute(rt.pairs, func() {
					vals, vecs, _, _, err = subsetSolve(t, context.Background(), isReal, a0, n, Job{Vectors: true, VectorsFor: func([]float64) int { return m }})
				})
				if err != nil {
					t.Fatalf("%s: %v", name, err)
				}
				for j := range want {
					if math.Abs(vals[j]-want[j]) > 1e-13 {
						t.Errorf("%s: value %d = %.16g, want %v", name, j, vals[j], want[j])
					}
				}
				checkSubsetPairs(t, name, a0, n, vals[:m], vecs, 8)
			}
		}
	}

	const nb = 40
	for _, isReal := range []bool{true, false} {
		var b []complex128
		if isReal {
			b = toComplex(randSym(nb, 17))
		} else {
			b = randHerm(nb, 17)
		}
		n := 2 * nb
		a0 := make([]complex128, n*n)
		for i := 0; i < nb; i++ {
			for j := 0; j < nb; j++ {
				a0[i*n+j] = b[i*nb+j]
				a0[(nb+i)*n+nb+j] = b[i*nb+j]
			}
		}
		// The tridiagonal of diag(B, B) splits.
		d, e := make([]float64, n), make([]float64, n-1)
		if isReal {
			ar := make([]float64, n*n)
			for i := range ar {
				ar[i] = real(a0[i])
			}
			if err := sytrd(ar, n, d, e, make([]float64, n), nil); err != nil {
				t.Fatal(err)
			}
		} else if err := hetrd(slices.Clone(a0), n, d, e, make([]complex128, n), nil); err != nil {
			t.Fatal(err)
		}
		if blocks := splitTridiag(d, e); len(blocks) < 2 {
			t.Errorf("diag(B, B) %s: T does not split (%d block)", kindName(isReal), len(blocks))
		}
		for _, m := range []int{1, 2, 3, 10, n} {
			for _, rt := range routes {
				name := fmt.Sprintf("diag(B,B) %s m=%d route=%s", kindName(isReal), m, rt.name)
				var vals []float64
				var vecs []complex128
				var anorm float64
				var err error
				withRoute(rt.pairs, func() {
					vals, vecs, anorm, _, err = subsetSolve(t, context.Background(), isReal, a0, n, Job{Vectors: true, VectorsFor: func([]float64) int { return m }})
				})
				if err != nil {
					t.Fatalf("%s: %v", name, err)
				}
				for j := 0; j+1 < n; j += 2 {
					if math.Abs(vals[j]-vals[j+1]) > 1e-13*anorm {
						t.Errorf("%s: values %d, %d = %.16g, %.16g are not a pair", name, j, j+1, vals[j], vals[j+1])
					}
				}
				checkSubsetPairs(t, name, a0, n, vals[:m], vecs, anorm)
			}
		}
	}

	const nc = 30
	a0 := make([]complex128, nc*nc)
	for i := 0; i < nc; i++ {
		a0[i*nc+i] = 2.5
	}
	for _, isReal := range []bool{true, false} {
		vals, vecs, _, _, err := subsetSolve(t, context.Background(), isReal, a0, nc, Job{Vectors: true, VectorsFor: func([]float64) int { return 7 }})
		if err != nil {
			t.Fatal(err)
		}
		for _, v := range vals {
			if v != 2.5 {
				t.Errorf("2.5 I %s: value %v", kindName(isReal), v)
			}
		}
		checkSubsetPairs(t, "2.5 I "+kindName(isReal), a0, nc, vals[:7], vecs, 2.5)
	}
}

// wilkinsonPlus returns Wilkinson's W_{2h+1}^+ (The Algebraic Eigenvalue
// Problem, 1965): d_i = |h - i|, e_i = 1, i = 0..2h. Its
// largest eigenvalues come in pairs that agree to many digits (W21+, h =
// 10: the top pair to about 1e-14 relative).
func wilkinsonPlus(h int) (d, e []float64) {
	n := 2*h + 1
	d, e = make([]float64, n), make([]float64, n-1)
	for i := range d {
		d[i] = math.Abs(float64(h - i))
	}
	for i := range e {
		e[i] = 1
	}
	return d, e
}

// tridiagPairErrors returns max_j ||T z_j - lambda_j z_j||_2 and
// max |Z^T Z - I| for the column-major n x m z.
func tridiagPairErrors(d, e, vals, z []float64) (resid, orth float64) {
	n, m := len(d), len(vals)
	for j := 0; j < m; j++ {
		zj := z[j*n : j*n+n]
		r := 0.0
		for i := 0; i < n; i++ {
			s := (d[i] - vals[j]) * zj[i]
			if i > 0 {
				s += e[i-1] * zj[i-1]
			}
			if i < n-1 {
				s += e[i] * zj[i+1]
			}
			r += s * s
		}
		resid = math.Max(resid, math.Sqrt(r))
		for l := j; l < m; l++ {
			s := ddot(zj, z[l*n:l*n+n])
			if j == l {
				s--
			}
			orth = math.Max(orth, math.Abs(s))
		}
	}
	return resid, orth
}

// checkStein runs stein on (d, e) for the lowest m and checks the bounds
// of this file for T (||T||_2 = max |lambda|), returning the eigenvalues.
func checkStein(t *testing.T, name string, d, e []float64, m int) []float64 {
	t.Helper()
	n := len(d)
	w := slices.Clone(d)
	if err := sterf(w, slices.Clone(e), nil); err != nil {
		t.Fatal(err)
	}
	z := make([]float64, n*m)
	d0, e0 := slices.Clone(d), slices.Clone(e)
	if err := stein(d, e, w, m, z, nil); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	if !slices.Equal(d, d0) || !slices.Equal(e, e0) {
		t.Errorf("%s: stein changed d or e", name)
	}
	resid, orth := tridiagPairErrors(d, e, w[:m], z)
	tol := subsetC * float64(n) * ulp
	if tn := specNorm(w); resid > tol*tn {
		t.Errorf("%s: residual %.3g = %.3g n ulp ||T||, want <= %d", name, resid, resid/(float64(n)*ulp*tn), subsetC)
	}
	if orth > tol {
		t.Errorf("%s: |Z^T Z - I| = %.3g = %.3g n ulp, want <= %d", name, orth, orth/(float64(n)*ulp), subsetC)
	}
	return w
}

// Source: Wilkinson's W21+ (The Algebraic Eigenvalue Problem, 1965), whose
// top eigenvalues agree in pairs to about 1e-14: negated, its lowest pairs
// are clusters that only the re-orthogonalization separates (without it the
// two vectors of a pair come out nearly parallel and |Z^T Z - I| is about
// 1). And glued Wilkinson matrices (Dhillon, Parlett and Vömel, Glued
// matrices and the MRRR algorithm, SIAM J. Sci. Comput. 27, 2005): ten
// copies of -W21+ coupled by 1e-10, an unreduced T whose lowest 20
// eigenvalues lie within about 1e-10 of each other. Bounds of this file;
// the test checks that the pairs are as tight as stated.
func TestSteinWilkinson(t *testing.T) {
	d, e := wilkinsonPlus(10)
	for i := range d {
		d[i] = -d[i]
	}
	for _, m := range []int{1, 2, 4, 6, 21} {
		w := checkStein(t, fmt.Sprintf("-W21+ m=%d", m), d, e, m)
		if m == 2 && w[1]-w[0] > 1e-13 {
			t.Errorf("-W21+: lowest pair %.17g, %.17g not within 1e-13", w[0], w[1])
		}
	}
	const copies = 10
	wd, we := wilkinsonPlus(10)
	var gd, ge []float64
	for c := 0; c < copies; c++ {
		for _, x := range wd {
			gd = append(gd, -x)
		}
		ge = append(ge, we...)
		if c < copies-1 {
			ge = append(ge, 1e-10)
		}
	}
	if blocks := splitTridiag(gd, ge); len(blocks) != 1 {
		t.Fatalf("glued W21+: %d blocks, want an unreduced T", len(blocks))
	}
	for _, m := range []int{1, 10, 20, 21, 25, 80, len(gd)} {
		w := checkStein(t, fmt.Sprintf("glued -W21+ m=%d", m), gd, ge, m)
		if m == 20 && w[19]-w[0] > 1e-9 {
			t.Errorf("glued -W21+: lowest 20 spread over %.3g, want <= 1e-9", w[19]-w[0])
		}
	}
}

// Source: the QL iteration (tridiagQL, checked against gonum's Dsteqr by
// TestTridiagQLAgainstDsteqr) computes the same eigenvectors: for the
// eigenvalues with a gap >= 1e-4 ||T|| (sin-theta theorem, as in
// TestSubsetAgainstFull) |<z_stein, z_ql>| = 1 to 1e-10; the bounds of this
// file for every vector. Random tridiagonals, with zeros in e (splits) and
// with graded diagonals (as TestSterfAgainstDsterf).
func TestSteinAgainstQL(t *testing.T) {
	r := rand.New(rand.NewPCG(19, 19))
	for _, n := range []int{1, 2, 3, 10, 100, 300} {
		for trial := 0; trial < 3; trial++ {
			d, e := randTridiag(r, n, trial, 8, 7, 3)
			name := fmt.Sprintf("n=%d trial %d", n, trial)
			m := max(1, n/2)
			w := checkStein(t, name, d, e, m)
			z := make([]float64, n*m)
			if err := stein(d, e, w, m, z, nil); err != nil {
				t.Fatal(err)
			}
			q := eye(n)
			if err := tridiagQL(slices.Clone(d), slices.Clone(e), q, n, n, nil); err != nil {
				t.Fatal(err)
			}
			tn := specNorm(w)
			for j := 0; j < m; j++ {
				gap := math.Inf(1)
				if j > 0 {
					gap = w[j] - w[j-1]
				}
				if j+1 < n {
					gap = math.Min(gap, w[j+1]-w[j])
				}
				if gap < 1e-4*tn {
					continue
				}
				dot := 0.0
				for i := 0; i < n; i++ {
					dot += z[j*n+i] * q[i*n+j]
				}
				if dd := math.Abs(math.Abs(dot) - 1); dd > 1e-10 {
					t.Errorf("%s: vector %d: |<z_stein, z_ql>| - 1 = %.3g (gap %.3g)", name, j, dd, gap)
				}
			}
		}
	}
}

// Source: the API contract (an iteration that fails is reported as an
// error wrapping ErrNoConvergence): a shift that is no eigenvalue (100 for
// a T of norm 3) cannot meet the growth criterion, stein says so, and
// stageErr passes the message on unchanged (solveErr would call it a
// QL/QR failure).
func TestSteinNoConvergence(t *testing.T) {
	d := []float64{1, -1, 0.5, 0}
	e := []float64{1, 0.5, 1}
	z := make([]float64, 4)
	err := stein(d, e, []float64{100, 101, 102, 103}, 1, z, nil)
	if !errors.Is(err, ErrNoConvergence) || !strings.Contains(err.Error(), "inverse iteration") {
		t.Fatalf("stein with a wrong eigenvalue: err %v", err)
	}
	if got := stageErr(context.Background(), err); got != err {
		t.Errorf("stageErr changed the error to %v", got)
	}
	if got := stageErr(context.Background(), ErrNoConvergence); !errors.Is(got, ErrNoConvergence) || got == ErrNoConvergence {
		t.Errorf("stageErr(ErrNoConvergence) = %v, want it wrapped by solveErr", got)
	}
}

// Source: linearity of the back-transformation, Q Z = (Q I) Z: for the real
// Q of sytrd, backTransformReal equals the explicit formQ times Z (formQ is
// checked by TestSytrdFormQ), and for the complex Q of hetrd,
// backTransformCols of an n x m Z equals backTransform of I (checked by the
// complex eigenvector tests) times Z, to 1e-13, for each layout of Z
// (row-major, the leading columns of an n x n matrix, column-major).
func TestBackTransformSubset(t *testing.T) {
	r := rand.New(rand.NewPCG(23, 23))
	for _, n := range []int{1, 2, 3, 40, 300} {
		a := randSym(n, uint64(n)+30)
		d, e, tau := make([]float64, n), make([]float64, max(n-1, 0)), make([]float64, n)
		if err := sytrd(a, n, d, e, tau, nil); err != nil {
			t.Fatal(err)
		}
		q, err := formQ(a, n, tau, nil)
		if err != nil {
			t.Fatal(err)
		}
		c := randHerm(n, uint64(n)+30)
		ctau := make([]complex128, n)
		if err := hetrd(c, n, d, e, ctau, nil); err != nil {
			t.Fatal(err)
		}
		cq, err := backTransform(c, n, ctau, eye(n), nil)
		if err != nil {
			t.Fatal(err)
		}
		for _, m := range []int{1, 7, n} {
			if m > n {
				continue
			}
			zr := make([]float64, n*m) // row-major
			for i := range zr {
				zr[i] = r.NormFloat64()
			}
			zc := make([]float64, n*m) // column-major
			zs := make([]float64, n*n) // the leading m columns
			for i := 0; i < n; i++ {
				for j := 0; j < m; j++ {
					zc[j*n+i] = zr[i*m+j]
					zs[i*n+j] = zr[i*m+j]
				}
			}
			layouts := []struct {
				name   string
				z      []float64
				rs, cs int
			}{{"row-major", zr, m, 1}, {"leading columns", zs, n, 1}, {"column-major", zc, 1, n}}
			for _, l := range layouts {
				name := fmt.Sprintf("n=%d m=%d %s", n, m, l.name)
				v, err := backTransformReal(a, n, tau, l.z, m, l.rs, l.cs, nil)
				if err != nil {
					t.Fatal(err)
				}
				cv, err := backTransformCols(c, n, ctau, l.z, m, l.rs, l.cs, nil)
				if err != nil {
					t.Fatal(err)
				}
				if len(v) != n*m || len(cv) != n*m {
					t.Fatalf("%s: lengths %d, %d", name, len(v), len(cv))
				}
				worst, cworst := 0.0, 0.0
				for i := 0; i < n; i++ {
					for j := 0; j < m; j++ {
						s := 0.0
						var cs complex128
						for k := 0; k < n; k++ {
							s += q[i*n+k] * zr[k*m+j]
							cs += cq[i*n+k] * complex(zr[k*m+j], 0)
						}
						worst = math.Max(worst, math.Abs(v[i*m+j]-s))
						cworst = math.Max(cworst, cmplx.Abs(cv[i*m+j]-cs))
					}
				}
				if worst > 1e-13*math.Sqrt(float64(n)) || cworst > 1e-13*math.Sqrt(float64(n)) {
					t.Errorf("%s: |V - Q Z| = %.3g (real), %.3g (complex)", name, worst, cworst)
				}
			}
		}
	}
}

// Source: the contract of Job.VectorsFor and Job.Lowest (backend.go): the
// answer of VectorsFor is clamped to [0, k] (0, n, n+7 and -3 asked for);
// every eigenvalue is returned, bitwise those of the values-only solve;
// the vectors are n x m (empty for m = 0); Lowest = k with vectors gives
// the k lowest pairs, with VectorsFor too (called with those k values);
// n = 0 and n = 1. Eigenpairs by the bounds of this file.
func TestSubsetCounts(t *testing.T) {
	const n = 60
	for _, isReal := range []bool{true, false} {
		var a0 []complex128
		if isReal {
			a0 = toComplex(randSym(n, 29))
		} else {
			a0 = randHerm(n, 29)
		}
		kind := kindName(isReal)
		for _, c := range []struct{ lowest, ask, k, m int }{
			{0, 0, n, 0}, {0, n, n, n}, {0, n + 7, n, n}, {0, -3, n, 0},
			{10, 0, 10, 0}, {10, 4, 10, 4}, {10, 99, 10, 10}, {n + 5, 3, n, 3},
		} {
			name := fmt.Sprintf("%s lowest=%d VectorsFor=%d", kind, c.lowest, c.ask)
			calls := 0
			job := Job{Vectors: true, Lowest: c.lowest, VectorsFor: func(v []float64) int {
				calls++
				if len(v) != c.k {
					t.Errorf("%s: VectorsFor got %d values, want %d", name, len(v), c.k)
				}
				return c.ask
			}}
			vals, vecs, anorm, all, err := subsetSolve(t, context.Background(), isReal, a0, n, job)
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			if calls != 1 {
				t.Errorf("%s: VectorsFor called %d times", name, calls)
			}
			if !slices.Equal(vals, all[:c.k]) {
				t.Errorf("%s: %d values, not the values-only solve's lowest %d", name, len(vals), c.k)
			}
			if vecs == nil || len(vecs) != n*c.m {
				t.Fatalf("%s: vecs nil %v, len %d, want n x %d", name, vecs == nil, len(vecs), c.m)
			}
			checkSubsetPairs(t, name, a0, n, vals[:c.m], vecs, anorm)
		}
		for _, k := range []int{1, 7, n - 1} {
			name := fmt.Sprintf("%s lowest=%d vectors", kind, k)
			vals, vecs, anorm, all, err := subsetSolve(t, context.Background(), isReal, a0, n, Job{Vectors: true, Lowest: k})
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			if !slices.Equal(vals, all[:k]) {
				t.Errorf("%s: values are not the values-only solve's lowest %d", name, k)
			}
			checkSubsetPairs(t, name, a0, n, vals, vecs, anorm)
		}
	}
	// n = 0 and n = 1.
	for _, ask := range []int{0, 1, 2} {
		calls := 0
		job := Job{Vectors: true, VectorsFor: func([]float64) int { calls++; return ask }}
		v, z, err := PureGo.Symmetric(context.Background(), nil, 0, job, nil)
		if err != nil || len(v) != 0 || z == nil || len(z) != 0 {
			t.Errorf("n=0 ask=%d: %v %v %v", ask, v, z, err)
		}
		cv, cz, err := PureGo.Hermitian(context.Background(), []complex128{complex(3, 9)}, 1, job, nil)
		if err != nil || !slices.Equal(cv, []float64{3}) || len(cz) != min(ask, 1) || len(cz) == 1 && cz[0] != 1 {
			t.Errorf("n=1 ask=%d: %v %v %v", ask, cv, cz, err)
		}
		rv, rz, err := PureGo.Symmetric(context.Background(), []float64{-2}, 1, job, nil)
		if err != nil || !slices.Equal(rv, []float64{-2}) || len(rz) != min(ask, 1) {
			t.Errorf("real n=1 ask=%d: %v %v %v", ask, rv, rz, err)
		}
		if calls != 3 {
			t.Errorf("n=0, 1 ask=%d: VectorsFor called %d times for three solves", ask, calls)
		}
	}
}

// Source: the cancellation contract (backend.go): a context done before the
// call returns ctx.Err() without reading a (nor calling VectorsFor); one
// cancelled inside VectorsFor, between the eigenvalues and the vectors,
// stops the vector stages (inverse iteration or QL, and the
// back-transformation) with context.Canceled; one cancelled at fractions of
// an uncancelled run's time returns context.Canceled or, had it finished,
// the same values; no goroutine outlives the calls. Latencies are logged.
func TestSubsetCancel(t *testing.T) {
	n := 400
	if testing.Short() {
		n = 150
	}
	start := runtime.NumGoroutine()
	for _, isReal := range []bool{true, false} {
		var a0 []complex128
		if isReal {
			a0 = toComplex(randSym(n, 31))
		} else {
			a0 = randHerm(n, 31)
		}
		kind := kindName(isReal)
		canceled, cancel := context.WithCancel(context.Background())
		cancel()
		job := Job{Vectors: true, VectorsFor: func([]float64) int { t.Errorf("%s: VectorsFor called with a done context", kind); return 1 }}
		if isReal {
			a := lowerOnly(real0(a0), n)
			a1 := slices.Clone(a)
			v, z, err := PureGo.Symmetric(canceled, a, n, job, nil)
			if err != context.Canceled || v != nil || z != nil || !nanEqual(a, a1) {
				t.Errorf("%s already done: err %v, values %v, vecs nil %v", kind, err, v != nil, z == nil)
			}
		} else {
			c := lowerOnlyC(a0, n)
			c1 := slices.Clone(c)
			v, z, err := PureGo.Hermitian(canceled, c, n, job, nil)
			if err != context.Canceled || v != nil || z != nil || !cnanEqual(c, c1) {
				t.Errorf("%s already done: err %v, values %v, vecs nil %v", kind, err, v != nil, z == nil)
			}
		}

		for _, rt := range routes[1:] {
			for _, m := range []int{n / 10, n / 2} {
				name := fmt.Sprintf("%s route=%s m=%d", kind, rt.name, m)
				// Cancelled inside VectorsFor. The stopper is set by
				// context.AfterFunc on its own goroutine: wait for it.
				ctx, cancel := context.WithCancel(context.Background())
				job := Job{Vectors: true, VectorsFor: func([]float64) int {
					cancel()
					time.Sleep(50 * time.Millisecond)
					return m
				}}
				var vals []float64
				var vecs []complex128
				var err error
				withRoute(rt.pairs, func() {
					vals, vecs, _, _, err = subsetSolve(t, ctx, isReal, a0, n, job)
				})
				if !errors.Is(err, context.Canceled) || vals != nil || vecs != nil {
					t.Errorf("%s cancelled in VectorsFor: err %v, values %v, vecs %v", name, err, vals != nil, vecs != nil)
				}

				// Cancelled at fractions of the run.
				job = Job{Vectors: true, VectorsFor: func([]float64) int { return m }}
				run := func(ctx context.Context) ([]float64, error) {
					var v []float64
					var err error
					withRoute(rt.pairs, func() {
						if isReal {
							v, _, err = PureGo.Symmetric(ctx, real0(a0), n, job, nil)
						} else {
							v, _, err = PureGo.Hermitian(ctx, slices.Clone(a0), n, job, nil)
						}
					})
					return v, err
				}
				t0 := time.Now()
				ref, err := run(context.Background())
				full := time.Since(t0)
				if err != nil {
					t.Fatal(err)
				}
				var lats []string
				for _, f := range []float64{0.1, 0.5, 0.8, 0.9, 0.97} {
					ctx, cancel := context.WithCancel(context.Background())
					var tc time.Time
					timer := time.AfterFunc(time.Duration(f*float64(full)), func() { tc = time.Now(); cancel() })
					vals, err := run(ctx)
					end := time.Now()
					fired := !timer.Stop()
					cancel()
					switch {
					case err == nil:
						if !slices.Equal(vals, ref) {
							t.Errorf("%s cancel at %.0f%%: finished with other values", name, 100*f)
						}
						lats = append(lats, "finished first")
					case errors.Is(err, context.Canceled) && fired:
						lats = append(lats, end.Sub(tc).Round(10*time.Microsecond).String())
					default:
						t.Errorf("%s cancel at %.0f%%: err %v", name, 100*f, err)
					}
				}
				t.Logf("%s n=%d (full run %v): latency at 10..97%%: %s", name, n, full.Round(time.Millisecond), strings.Join(lats, " "))
			}
		}
	}
	waitGoroutines(t, start)
}

// eye returns the row-major n x n identity.
func eye(n int) []float64 {
	z := make([]float64, n*n)
	for i := 0; i < n; i++ {
		z[i*n+i] = 1
	}
	return z
}

// real0 returns the real part of a.
func real0(a []complex128) []float64 {
	r := make([]float64, len(a))
	for i, x := range a {
		r[i] = real(x)
	}
	return r
}

// nanEqual and cnanEqual compare slices with NaN equal to NaN (the poisoned
// upper triangles of lowerOnly and lowerOnlyC).
func nanEqual(a, b []float64) bool {
	return slices.EqualFunc(a, b, func(x, y float64) bool { return x == y || math.IsNaN(x) && math.IsNaN(y) })
}

func cnanEqual(a, b []complex128) bool {
	return slices.EqualFunc(a, b, func(x, y complex128) bool { return x == y || cmplx.IsNaN(x) && cmplx.IsNaN(y) })
}

// Source: every stage polls its stopper: with a stopper that has fired,
// inverse iteration (the plan's sterf on the blocks of a split T, and the
// vectors), the identity start of the QL route and both n x m
// back-transformations return errStopped.
func TestSubsetStagesStop(t *testing.T) {
	const n = 300
	fired := new(stopper)
	fired.flag.Store(true)
	a := randSym(n, 37)
	d, e, tau := make([]float64, n), make([]float64, n-1), make([]float64, n)
	if err := sytrd(a, n, d, e, tau, nil); err != nil {
		t.Fatal(err)
	}
	w := slices.Clone(d)
	if err := sterf(w, slices.Clone(e), nil); err != nil {
		t.Fatal(err)
	}
	const m = 20
	z := make([]float64, n*m)
	if err := stein(d, e, w, m, z, fired); err != errStopped {
		t.Errorf("stein: %v", err)
	}
	es := slices.Clone(e)
	es[n/2] = 0 // two blocks: the plan runs sterf on each
	if _, err := newSteinPlan(d, es, w, m, fired); err != errStopped {
		t.Errorf("newSteinPlan on a split T: %v", err)
	}
	if _, err := identityInto(make([]float64, n*n), n, fired); err != errStopped {
		t.Errorf("identityInto: %v", err)
	}
	if _, err := backTransformReal(a, n, tau, z, m, 1, n, fired); err != errStopped {
		t.Errorf("backTransformReal: %v", err)
	}
	c := randHerm(n, 37)
	ctau := make([]complex128, n)
	if err := hetrd(c, n, d, e, ctau, nil); err != nil {
		t.Fatal(err)
	}
	if _, err := backTransformCols(c, n, ctau, z, m, 1, n, fired); err != errStopped {
		t.Errorf("backTransformCols: %v", err)
	}
}

// ---- benchmarks ---------------------------------------------------------------

// BenchmarkSubset times PureGo on seeded random matrices: values only,
// VectorsFor with m = 50, 200 and 1000, and every vector. Each run takes
// seconds to minutes: run it with -benchtime 1x.
//
//	go test -run '^$' -bench 'Subset/' -benchtime 1x ./ed/eigen/
func BenchmarkSubset(b *testing.B) {
	for _, c := range []struct {
		kind string
		n    int
	}{{"complex", 2000}, {"complex", 4000}, {"real", 2000}} {
		for _, mode := range []string{"values", "m=50", "m=200", "m=1000", "all"} {
			b.Run(fmt.Sprintf("%s/n=%d/%s", c.kind, c.n, mode), func(b *testing.B) {
				benchSubset(b, c.kind == "real", c.n, mode, steinMaxPairs)
			})
		}
	}
}

// BenchmarkSubsetRoute times both routes to the vectors of the lowest m
// (inverse iteration and QL) at n = 2000, on a random spectrum, for the
// crossover steinMaxPairs.
func BenchmarkSubsetRoute(b *testing.B) {
	for _, kind := range []string{"real", "complex"} {
		for _, m := range []int{500, 1000, 2000} {
			for _, rt := range routes[1:] {
				b.Run(fmt.Sprintf("%s/n=2000/m=%d/%s", kind, m, rt.name), func(b *testing.B) {
					benchSubset(b, kind == "real", 2000, fmt.Sprintf("m=%d", m), rt.pairs)
				})
			}
		}
	}
}

// BenchmarkSteinClustered times inverse iteration alone on a tridiagonal
// whose spectrum is one chained cluster (e_i = 1 + 1e-3 sin i, d = 0: a
// spacing below 1e-3 ||T|| near the ends, and everywhere for n = 4000),
// against tridiagQL for every vector, for the crossover steinMaxPairs.
func BenchmarkSteinClustered(b *testing.B) {
	for _, n := range []int{2000, 4000} {
		d, e := make([]float64, n), make([]float64, n-1)
		for i := range e {
			e[i] = 1 + 1e-3*math.Sin(float64(i))
		}
		w := slices.Clone(d)
		if err := sterf(w, slices.Clone(e), nil); err != nil {
			b.Fatal(err)
		}
		for _, m := range []int{n / 4, n / 2, n} {
			b.Run(fmt.Sprintf("n=%d/m=%d/stein", n, m), func(b *testing.B) {
				z := make([]float64, n*m)
				for i := 0; i < b.N; i++ {
					p, err := newSteinPlan(d, e, w, m, nil)
					if err == nil {
						err = p.run(d, e, z, nil)
					}
					if err != nil {
						b.Fatal(err)
					}
					b.ReportMetric(float64(p.pairs)/float64(n*n), "pairs/n^2")
				}
			})
		}
		b.Run(fmt.Sprintf("n=%d/ql", n), func(b *testing.B) {
			buf := make([]float64, n*n)
			for i := 0; i < b.N; i++ {
				z, _ := identityInto(buf, n, nil)
				if err := tridiagQL(slices.Clone(d), slices.Clone(e), z, n, n, nil); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// benchSubset times one PureGo solve of the mode ("values", "m=<m>" by
// VectorsFor, "all") with the crossover pairs.
func benchSubset(b *testing.B, isReal bool, n int, mode string, pairs float64) {
	job := Job{Vectors: mode != "values"}
	if m := 0; strings.HasPrefix(mode, "m=") {
		fmt.Sscanf(mode, "m=%d", &m)
		job.VectorsFor = func([]float64) int { return m }
	}
	var a0 []float64
	var c0 []complex128
	if isReal {
		a0 = randSym(n, 1)
	} else {
		c0 = randHerm(n, 1)
	}
	a, c := make([]float64, len(a0)), make([]complex128, len(c0))
	var ws Workspace
	withRoute(pairs, func() {
		b.ResetTimer()
		for i := 0; i < b.N; i++ {
			b.StopTimer()
			copy(a, a0)
			copy(c, c0)
			b.StartTimer()
			var err error
			if isReal {
				_, _, err = PureGo.Symmetric(context.Background(), a, n, job, &ws)
			} else {
				_, _, err = PureGo.Hermitian(context.Background(), c, n, job, &ws)
			}
			if err != nil {
				b.Fatal(err)
			}
		}
	})
}

// BenchmarkSubsetStages times the stages after the reduction alone (the
// reduction, common to every mode and the bulk of the time, is done once
// outside the timer): for m = 50, 200, 1000 the subset stages of the solve
// (sterf on copies, the plan, inverse iteration or QL, the n x m
// back-transformation), and for every vector the QL iteration and the
// n x n back-transformation (complex) or formQ and QL (real).
func BenchmarkSubsetStages(b *testing.B) {
	for _, c := range []struct {
		kind string
		n    int
	}{{"complex", 2000}, {"complex", 4000}, {"real", 2000}} {
		n := c.n
		d, e := make([]float64, n), make([]float64, n-1)
		var ar []float64
		var ac []complex128
		var tau []float64
		var ctau []complex128
		if c.kind == "real" {
			ar, tau = randSym(n, 1), make([]float64, n)
			if err := sytrd(ar, n, d, e, tau, nil); err != nil {
				b.Fatal(err)
			}
		} else {
			ac, ctau = randHerm(n, 1), make([]complex128, n)
			if err := hetrd(ac, n, d, e, ctau, nil); err != nil {
				b.Fatal(err)
			}
		}
		var ws Workspace
		for _, mode := range []string{"m=50", "m=200", "m=1000", "all"} {
			b.Run(fmt.Sprintf("%s/n=%d/%s", c.kind, n, mode), func(b *testing.B) {
				for i := 0; i < b.N; i++ {
					var err error
					switch {
					case mode == "all" && c.kind == "real":
						var q []float64
						q, err = formQ(ar, n, tau, nil)
						if err == nil {
							err = tridiagQL(slices.Clone(d), slices.Clone(e), q, n, n, nil)
						}
					case mode == "all":
						z, _ := identityInto(ws.floats(n*n), n, nil)
						err = tridiagQL(slices.Clone(d), slices.Clone(e), z, n, n, nil)
						if err == nil {
							_, err = backTransform(ac, n, ctau, z, nil)
						}
					default:
						var m int
						fmt.Sscanf(mode, "m=%d", &m)
						job := Job{Vectors: true, VectorsFor: func([]float64) int { return m }}
						if c.kind == "real" {
							_, _, err = symmetricSubset(ar, n, slices.Clone(d), slices.Clone(e), tau, job, n, 1, &ws, nil)
						} else {
							_, _, err = hermitianSubset(ac, n, slices.Clone(d), slices.Clone(e), ctau, job, n, 1, &ws, nil)
						}
					}
					if err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}

// TestSteinFallback forces inverse iteration to fail: the pure-Go subset
// jobs must then take the QL route and still pass TestVectorsFor's checks
// (its sources), counting the retries.
func TestSteinFallback(t *testing.T) {
	steinFail = true
	defer func() { steinFail = false }()
	before := steinFallbacks.Load()
	testVectorsFor(t, PureGo)
	if steinFallbacks.Load() == before {
		t.Error("no fallback to QL was taken")
	}
}
