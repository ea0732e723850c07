package eigen

import (
	"context"
	"fmt"
	"math"
	"math/cmplx"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// testBackends are the backends that the shared tests run against: PureGo,
// and LAPACK in builds with -tags lapack (lapack_test.go adds it), in the
// manner of gonum's lapack/testlapack.
var testBackends = []Backend{PureGo}

// backendName is the subtest name of a backend.
func backendName(be Backend) string {
	if be == PureGo {
		return "PureGo"
	}
	return "LAPACK"
}

// forEachBackend runs f as a subtest for every backend of the build.
func forEachBackend(t *testing.T, f func(t *testing.T, be Backend)) {
	for _, be := range testBackends {
		t.Run(backendName(be), func(t *testing.T) { f(t, be) })
	}
}

// symmetric and hermitian are Symmetric and Hermitian with the backend be.
func symmetric(be Backend, a []float64, n int, vectors bool) ([]float64, []float64, bool) {
	v, z, err := be.Symmetric(context.Background(), a, n, Job{Vectors: vectors}, nil)
	return v, z, err == nil
}

func hermitian(be Backend, a []complex128, n int, vectors bool) ([]float64, []complex128, bool) {
	v, z, err := be.Hermitian(context.Background(), a, n, Job{Vectors: vectors}, nil)
	return v, z, err == nil
}

// toComplex returns a real matrix as a complex one.
func toComplex(a []float64) []complex128 {
	c := make([]complex128, len(a))
	for i, x := range a {
		c[i] = complex(x, 0)
	}
	return c
}

// checkPairs checks k eigenpairs of the full Hermitian (or real symmetric,
// as complex) a0: k = len(vals) ascending values, vecs row-major n x k,
// ||A v_j - lambda_j v_j|| <= tol ||A||_F and |V^H V - I| <= 1e-12 (source:
// the definition of an eigenpair and of an orthonormal set).
func checkPairs(t *testing.T, name string, a0 []complex128, n int, vals []float64, vecs []complex128, tol float64) {
	t.Helper()
	k := len(vals)
	if len(vecs) != n*k {
		t.Fatalf("%s: len(vecs) = %d, want n k = %d", name, len(vecs), n*k)
	}
	if !slices.IsSorted(vals) {
		t.Errorf("%s: values not ascending", name)
	}
	norm := math.Max(frobeniusC(a0), 1)
	worst, orth := 0.0, 0.0
	for j := 0; j < k; j++ {
		r := 0.0
		for i := 0; i < n; i++ {
			s := -complex(vals[j], 0) * vecs[i*k+j]
			for l, x := range a0[i*n : i*n+n] {
				s += x * vecs[l*k+j]
			}
			r += real2(s)
		}
		worst = math.Max(worst, math.Sqrt(r)/norm)
		for l := j; l < k; l++ {
			var s complex128
			for i := 0; i < n; i++ {
				s += cmplx.Conj(vecs[i*k+j]) * vecs[i*k+l]
			}
			if j == l {
				s--
			}
			orth = math.Max(orth, cmplx.Abs(s))
		}
	}
	if worst > tol {
		t.Errorf("%s: residual %.3g ||A|| > %.1g ||A||", name, worst, tol)
	}
	if orth > 1e-12 {
		t.Errorf("%s: |V^H V - I| = %.3g", name, orth)
	}
}

// Source: gonum's mat.EigenSym (Dsyev) for the real values and the real
// 2n x 2n embedding [[Re A, -Im A], [Im A, Re A]] (each eigenvalue of A
// twice, as in TestHermitianAgainstRealEmbedding) for the complex ones, to
// 1e-10 ||A||_F; the eigenpairs of a subset (Job.Lowest) by checkPairs. The
// spectra: seeded random matrices, and A = U diag(lambda) U^H with
// degenerate lambda (TestDegenerate's), cut by k inside the six-fold -1
// (k = 3), at its end (6) and inside the four-fold 0.5 (7, 9). One Workspace serves every call, of every size.
func TestLowest(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		ctx := context.Background()
		var ws Workspace
		for _, n := range []int{1, 2, 10, 57, 200} {
			a0, c0, ref, cref := referencePair(t, n, 500+uint64(n))
			for _, k := range []int{1, 3, n / 2, n - 1, n, n + 5} {
				if k < 1 {
					continue
				}
				for _, vectors := range []bool{false, true} {
					job := Job{Vectors: vectors, Lowest: k}
					name := fmt.Sprintf("n=%d lowest=%d vectors=%v", n, k, vectors)
					vals, vecs, err := be.Symmetric(ctx, lowerOnly(a0, n), n, job, &ws)
					if err != nil {
						t.Fatalf("real %s: %v", name, err)
					}
					matchValues(t, "real "+name, vals, ref, min(k, n), frobenius(a0))
					cv, cvecs, err := be.Hermitian(ctx, lowerOnlyC(c0, n), n, job, &ws)
					if err != nil {
						t.Fatalf("complex %s: %v", name, err)
					}
					matchValues(t, "complex "+name, cv, cref, min(k, n), frobeniusC(c0))
					if vectors {
						checkPairs(t, "real "+name, toComplex(a0), n, vals, toComplex(vecs), 1e-12)
						checkPairs(t, "complex "+name, c0, n, cv, cvecs, 1e-12)
					} else if vecs != nil || cvecs != nil {
						t.Errorf("%s: vectors without Job.Vectors", name)
					}
				}
			}
		}
		spec := []float64{-1, -1, -1, -1, -1, 0.5, 0.5, 0.5, 2, 2, 2, 2, 2, 2, 2, 3, -1, 0.5, 7, 7}
		n := len(spec)
		want := slices.Sorted(slices.Values(spec))
		for _, isReal := range []bool{true, false} {
			ac := fromSpectrum(randUnitary(n, 6, isReal), spec)
			for _, k := range []int{3, 6, 7, 9} {
				name := fmt.Sprintf("degenerate real=%v lowest=%d", isReal, k)
				vals, vecs := solveAs(t, name, be, ac, n, isReal, Job{Vectors: true, Lowest: k}, &ws)
				matchValues(t, name, vals, want, k, 1e-3)
				checkPairs(t, name, ac, n, vals, vecs, 1e-13)
			}
		}
	})
}

// referencePair returns the seeded random real symmetric a0 and complex
// Hermitian c0 of order n with their reference eigenvalues: gonum's
// mat.EigenSym (Dsyev) for a0, the real 2n x 2n embedding for c0
// (embeddingValues).
func referencePair(t *testing.T, n int, seed uint64) (a0 []float64, c0 []complex128, ref, cref []float64) {
	t.Helper()
	a0, c0 = randSym(n, seed), randHerm(n, seed)
	var es mat.EigenSym
	if !es.Factorize(mat.NewSymDense(n, slices.Clone(a0)), false) {
		t.Fatal("gonum failed")
	}
	return a0, c0, es.Values(nil), embeddingValues(t, c0, n)
}

// solveAs solves the Hermitian ac (real when isReal: then its real part, by
// Symmetric) with job on be, and returns the eigenvectors as complex.
func solveAs(t *testing.T, name string, be Backend, ac []complex128, n int, isReal bool, job Job, ws *Workspace) ([]float64, []complex128) {
	t.Helper()
	ctx := context.Background()
	if !isReal {
		vals, vecs, err := be.Hermitian(ctx, slices.Clone(ac), n, job, ws)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		return vals, vecs
	}
	ar := make([]float64, n*n)
	for i := range ar {
		ar[i] = real(ac[i])
	}
	vals, rv, err := be.Symmetric(ctx, ar, n, job, ws)
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return vals, toComplex(rv)
}

// matchValues checks that got is the lowest k of ref to 1e-10 scale.
func matchValues(t *testing.T, name string, got, ref []float64, k int, scale float64) {
	t.Helper()
	if len(got) != k {
		t.Fatalf("%s: %d values, want %d", name, len(got), k)
	}
	for j := range got {
		if math.Abs(got[j]-ref[j]) > 1e-10*math.Max(scale, 1) {
			t.Errorf("%s: value %d = %.16g, reference %.16g", name, j, got[j], ref[j])
		}
	}
}

// embeddingValues returns the eigenvalues of the Hermitian a0 from gonum's
// EigenSym on its real 2n x 2n embedding (every other one of the doubled
// spectrum).
func embeddingValues(t *testing.T, a0 []complex128, n int) []float64 {
	m := 2 * n
	emb := make([]float64, m*m)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			re, im := real(a0[i*n+j]), imag(a0[i*n+j])
			emb[i*m+j], emb[i*m+n+j] = re, -im
			emb[(n+i)*m+j], emb[(n+i)*m+n+j] = im, re
		}
	}
	var es mat.EigenSym
	if !es.Factorize(mat.NewSymDense(m, emb), false) {
		t.Fatal("gonum failed on the embedding")
	}
	all := es.Values(nil)
	out := make([]float64, n)
	for k := range out {
		out[k] = all[2*k]
	}
	return out
}

// fromSpectrum returns U diag(spec) U^H.
func fromSpectrum(u []complex128, spec []float64) []complex128 {
	n := len(spec)
	a := make([]complex128, n*n)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			var s complex128
			for k := 0; k < n; k++ {
				s += u[i*n+k] * complex(spec[k], 0) * cmplx.Conj(u[j*n+k])
			}
			a[i*n+j] = s
		}
	}
	return a
}
