// Package eigen holds the dense eigensolvers of the engine: all eigenvalues
// and, optionally, all eigenvectors of a real symmetric or complex Hermitian
// matrix, in pure Go.
//
// Both solvers run three stages. First a unitary reduction to a REAL
// symmetric tridiagonal matrix T,
//
//	T = Q^H A Q,   Q unitary (orthogonal when A is real),
//
// by gonum's LAPACK port (Dsytrd) for real A, and by this package's blocked
// Householder reduction (hetrd) for complex A, whose reflectors are chosen
// so that the subdiagonal comes out real. Second the spectrum of T,
//
//	T = Z diag(lambda) Z^T,   Z orthogonal,
//
// by Dsterf (root-free QL/QR, no vectors) for values only, and by this
// package's implicitly shifted QL/QR iteration (tridiagQL) for vectors, which
// accumulates the plane rotations G of the iteration as Z <- Z G. Third the
// eigenvectors of A,
//
//	A V = V diag(lambda),   V = Q Z,   column k of V for lambda_k.
//
// Real: Z starts as the explicit Q (Dorgtr), so V = Z at the end. Complex: Z
// starts as I and the complex Q is applied to the real Z in blocked WY form.
//
// Costs for n x n, in real flops: reduction 4n^3/3 (real) or 16n^3/3
// (complex), Dsterf O(n^2), QL vectors about 6n^3, Dorgtr 4n^3/3, complex
// back-transformation 8n^3. Memory beyond a, with vectors: the n^2 result
// (real), or the real n^2 Z and the complex n^2 result (complex); values
// only: O(n). The large steps of the complex reduction, of the rotations and
// of the back-transformation run on up to GOMAXPROCS goroutines.
package eigen

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/blas"
	lapackgonum "gonum.org/v1/gonum/lapack/gonum"
)

// Solver names the backend.
const Solver = "pure Go (gonum LAPACK port for real tridiagonalization and Dsterf; Householder tridiagonalization for complex Hermitian; implicit QL/QR with row-wise deferred rotations for eigenvectors)"

// Scaling thresholds: a matrix whose largest entry lies outside
// [scaleMin, scaleMax] is scaled into range first (and the eigenvalues
// scaled back), so that squares of entries neither overflow nor underflow.
var (
	scaleMin = math.Sqrt(safeMin / (2 * unitRoundoff))
	scaleMax = math.Sqrt((2 * unitRoundoff) / safeMin)
)

func checkArgs(fn string, la, n int) {
	if n < 0 {
		panic(fmt.Sprintf("eigen: %s: negative order n = %d", fn, n))
	}
	if la != n*n {
		panic(fmt.Sprintf("eigen: %s: len(a) = %d, want n*n = %d for n = %d", fn, la, n*n, n))
	}
}

// scaleFactor returns sigma such that sigma*anorm is in range (1 if it is).
func scaleFactor(anorm float64) float64 {
	switch {
	case anorm > 0 && anorm < scaleMin:
		return scaleMin / anorm
	case anorm > scaleMax:
		return scaleMax / anorm
	}
	return 1
}

// Symmetric diagonalizes the real symmetric n x n matrix a (row-major, len
// n*n; only the lower triangle, a[i*n+j] with j <= i, need be filled; a is
// overwritten/destroyed). It returns the eigenvalues ascending; when vectors
// is true also the eigenvectors as a row-major n x n slice whose COLUMN k is
// the eigenvector of values[k] (vecs[i*n+k]):
//
//	A vecs[:,k] = values[k] vecs[:,k],   vecs^T vecs = I.
//
// ok=false on numerical failure (no convergence, or a non-finite entry).
// It panics if n < 0 or len(a) != n*n. vecs is nil when vectors is false.
//
// Values only: Dsytrd (T = Q^T A Q) and Dsterf. Vectors: Dsytrd, Dorgtr (the
// explicit Q) and tridiagQL rotating Q into the eigenvectors.
func Symmetric(a []float64, n int, vectors bool) (values []float64, vecs []float64, ok bool) {
	checkArgs("Symmetric", len(a), n)
	if n == 0 {
		if vectors {
			vecs = []float64{}
		}
		return []float64{}, vecs, true
	}
	anorm := 0.0
	for i := 0; i < n; i++ {
		for _, x := range a[i*n : i*n+i+1] {
			anorm = math.Max(anorm, math.Abs(x))
		}
	}
	if math.IsNaN(anorm) || math.IsInf(anorm, 0) {
		return nil, nil, false
	}
	if n == 1 {
		if vectors {
			vecs = []float64{1}
		}
		return []float64{a[0]}, vecs, true
	}
	sigma := scaleFactor(anorm)
	if sigma != 1 {
		for i := 0; i < n; i++ {
			row := a[i*n : i*n+i+1]
			for j := range row {
				row[j] *= sigma
			}
		}
	}

	impl := lapackgonum.Implementation{}
	d := make([]float64, n)
	e := make([]float64, n-1)
	tau := make([]float64, n-1)
	query := []float64{0}
	impl.Dsytrd(blas.Lower, n, a, n, d, e, tau, query, -1)
	lwork := int(query[0])
	if vectors {
		impl.Dorgtr(blas.Lower, n, a, n, tau, query, -1)
		lwork = max(lwork, int(query[0]))
	}
	lwork = max(lwork, 1)
	work := make([]float64, lwork)
	impl.Dsytrd(blas.Lower, n, a, n, d, e, tau, work, lwork)
	if vectors {
		vecs = make([]float64, n*n)
		copy(vecs, a)
		impl.Dorgtr(blas.Lower, n, vecs, n, tau, work, lwork)
		ok = tridiagQL(d, e, vecs, n, n)
	} else {
		ok = tridiagValues(d, e)
	}
	if !ok {
		return nil, nil, false
	}
	if sigma != 1 {
		for i := range d {
			d[i] /= sigma
		}
	}
	return d, vecs, true
}

// Hermitian diagonalizes the complex Hermitian n x n matrix a (row-major, len
// n*n; only the lower triangle need be filled, a[i*n+j] with j<=i; the
// diagonal's imaginary part is ignored; a is destroyed). Same conventions as
// Symmetric: values ascending (real), vecs column k = eigenvector k (complex,
// row-major n x n, vecs[i*n+k]):
//
//	A vecs[:,k] = values[k] vecs[:,k],   vecs^H vecs = I.
//
// The matrix is reduced by hetrd to a real tridiagonal T = Q^H A Q; values
// only: Dsterf on T; vectors: tridiagQL on T from Z = I, then V = Q Z by
// backTransform. No real 2n x 2n embedding is formed.
func Hermitian(a []complex128, n int, vectors bool) (values []float64, vecs []complex128, ok bool) {
	checkArgs("Hermitian", len(a), n)
	if n == 0 {
		if vectors {
			vecs = []complex128{}
		}
		return []float64{}, vecs, true
	}
	anorm := 0.0
	for i := 0; i < n; i++ {
		row := a[i*n : i*n+i+1]
		for _, x := range row[:i] {
			anorm = math.Max(anorm, math.Max(math.Abs(real(x)), math.Abs(imag(x))))
		}
		anorm = math.Max(anorm, math.Abs(real(row[i])))
	}
	if math.IsNaN(anorm) || math.IsInf(anorm, 0) {
		return nil, nil, false
	}
	if n == 1 {
		if vectors {
			vecs = []complex128{1}
		}
		return []float64{real(a[0])}, vecs, true
	}
	sigma := scaleFactor(anorm)
	if sigma != 1 {
		s := complex(sigma, 0)
		for i := 0; i < n; i++ {
			row := a[i*n : i*n+i+1]
			for j := range row {
				row[j] *= s
			}
		}
	}

	d := make([]float64, n)
	e := make([]float64, n-1)
	tau := make([]complex128, n)
	hetrd(a, n, d, e, tau)
	if vectors {
		z := make([]float64, n*n)
		for i := 0; i < n; i++ {
			z[i*n+i] = 1
		}
		ok = tridiagQL(d, e, z, n, n)
		if ok {
			vecs = backTransform(a, n, tau, z)
		}
	} else {
		ok = tridiagValues(d, e)
	}
	if !ok {
		return nil, nil, false
	}
	if sigma != 1 {
		for i := range d {
			d[i] /= sigma
		}
	}
	return d, vecs, true
}
