// Package eigen holds the dense eigensolvers of the engine: all eigenvalues
// and, optionally, all eigenvectors of a real symmetric or complex Hermitian
// matrix, in pure Go.
//
// Both solvers run three stages. First a unitary reduction to a REAL
// symmetric tridiagonal matrix T,
//
//	T = Q^H A Q,   Q unitary (orthogonal when A is real),
//
// by this package's blocked, row-oriented Householder reductions: sytrd for
// real A, hetrd for complex A (whose reflectors are chosen so that the
// subdiagonal comes out real). Second the spectrum of T,
//
//	T = Z diag(lambda) Z^T,   Z orthogonal,
//
// by sterf (root-free QL/QR, no vectors; a port of LAPACK's dsterf) for
// values only, and by the implicitly shifted QL/QR iteration tridiagQL for
// vectors, which accumulates the plane rotations G of the iteration as
// Z <- Z G. Third the eigenvectors of A,
//
//	A V = V diag(lambda),   V = Q Z,   column k of V for lambda_k.
//
// Real: Z starts as the explicit Q (formQ, LAPACK's Dorgtr in blocked WY
// form), so V = Z at the end. Complex: Z starts as I and the complex Q is
// applied to the real Z in blocked WY form (backTransform).
//
// Costs for n x n, in real flops: reduction 4n^3/3 (real) or 16n^3/3
// (complex), sterf O(n^2), QL vectors about 6n^3, formQ 4n^3/3, complex
// back-transformation 8n^3. Memory beyond a, with vectors: the n^2 result
// (real), or the real n^2 Z and the complex n^2 result (complex); values
// only: O(n). The large steps of the reductions, of the rotations and of the
// back-transformations run on up to GOMAXPROCS goroutines.
//
// # Cancellation
//
// SymmetricContext and HermitianContext poll a flag that context.AfterFunc
// sets when the context is done (one atomic load per poll; for a context
// that is never done, such as context.Background, a nil compare), in every
// stage and in every goroutine they start: every 16 rows of the scan for
// the largest entry; before each Householder step and every 16 rows of its
// matrix-vector product and of the panel's rank-2k update; before each
// QL/QR sweep (of sterf and of tridiagQL), every four rows while the
// deferred rotations are applied and every 16 rows of the final column
// permutation; before each block of 32 reflectors and every 16 rows of each
// column tile of formQ and backTransform. No gonum routine that runs longer
// than O(n) is called.
//
// The longest stretch between two polls, timed with -tags eigenprobe on one
// core (GOMAXPROCS=1, so no stretch overlaps another) at n = 4000 with
// vectors, is an allocation, not arithmetic: 68 ms for the 256 MB complex
// result that backTransform makes (the runtime zeroes it), 23 ms for the
// 128 MB real Q of formQ; values only, or any stretch of arithmetic, at most
// 5 ms. These grow as n^2 (extrapolated: about 270 ms for the complex
// result at n = 8000).
// From cancel() to return, on the 2-core development machine at n = 4000
// with vectors, cancelled at ten points spread over the call: at most 0.3 ms
// (real, 46 s call) and 1.7 ms (complex, 95 s call).
package eigen

import (
	"context"
	"fmt"
	"math"
)

// Solver names the backend.
const Solver = "pure Go (blocked row-wise Householder tridiagonalization, real and complex Hermitian; root-free QL/QR (dsterf) for values; implicit QL/QR with row-wise deferred rotations for eigenvectors; cancellable)"

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
// It is SymmetricContext with context.Background().
//
// Values only: sytrd (T = Q^T A Q) and sterf. Vectors: sytrd, formQ (the
// explicit Q) and tridiagQL rotating Q into the eigenvectors.
func Symmetric(a []float64, n int, vectors bool) (values []float64, vecs []float64, ok bool) {
	values, vecs, err := SymmetricContext(context.Background(), a, n, vectors)
	return values, vecs, err == nil
}

// Hermitian diagonalizes the complex Hermitian n x n matrix a (row-major, len
// n*n; only the lower triangle need be filled, a[i*n+j] with j<=i; the
// diagonal's imaginary part is ignored; a is destroyed). Same conventions as
// Symmetric: values ascending (real), vecs column k = eigenvector k (complex,
// row-major n x n, vecs[i*n+k]):
//
//	A vecs[:,k] = values[k] vecs[:,k],   vecs^H vecs = I.
//
// It is HermitianContext with context.Background().
//
// The matrix is reduced by hetrd to a real tridiagonal T = Q^H A Q; values
// only: sterf on T; vectors: tridiagQL on T from Z = I, then V = Q Z by
// backTransform. No real 2n x 2n embedding is formed.
func Hermitian(a []complex128, n int, vectors bool) (values []float64, vecs []complex128, ok bool) {
	values, vecs, err := HermitianContext(context.Background(), a, n, vectors)
	return values, vecs, err == nil
}

// SymmetricContext and HermitianContext are Symmetric and Hermitian that stop
// early, returning ctx.Err() (and nil slices), when ctx is done before the
// computation is complete; a was then partly overwritten. A ctx that is
// already done returns at once, before a is read. The iteration failing
// (ok = false of Symmetric) is reported as an error wrapping
// ErrNoConvergence. The results with a live ctx are those of Symmetric and
// Hermitian, and a ctx that is never done (context.Background) costs
// nothing. See the package documentation for where ctx is polled (in every
// goroutine, at most every few milliseconds of arithmetic; the longest
// stretch is allocating the n x n result, 68 ms for complex n = 4000) and
// for the measured latencies. No goroutine the call started outlives it.
func SymmetricContext(ctx context.Context, a []float64, n int, vectors bool) (values []float64, vecs []float64, err error) {
	checkArgs("Symmetric", len(a), n)
	if probeEnabled {
		probe()
		defer probe()
	}
	if err := ctx.Err(); err != nil {
		return nil, nil, err
	}
	if n == 0 {
		if vectors {
			vecs = []float64{}
		}
		return []float64{}, vecs, nil
	}
	s, release := watch(ctx)
	defer release()
	anorm := 0.0
	for i := 0; i < n; i++ {
		if i%pollRows == 0 && s.stopped() {
			return nil, nil, ctx.Err()
		}
		for _, x := range a[i*n : i*n+i+1] {
			anorm = math.Max(anorm, math.Abs(x))
		}
	}
	if math.IsNaN(anorm) || math.IsInf(anorm, 0) {
		return nil, nil, fmt.Errorf("%w: non-finite matrix entry", ErrNoConvergence)
	}
	if n == 1 {
		if vectors {
			vecs = []float64{1}
		}
		return []float64{a[0]}, vecs, nil
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

	d := make([]float64, n)
	e := make([]float64, n-1)
	tau := make([]float64, n)
	err = sytrd(a, n, d, e, tau, s)
	if err == nil {
		if vectors {
			vecs, err = formQ(a, n, tau, s)
			if err == nil {
				err = tridiagQL(d, e, vecs, n, n, s)
			}
		} else {
			err = tridiagValues(d, e, s)
		}
	}
	if err != nil {
		return nil, nil, solveErr(ctx, err)
	}
	if sigma != 1 {
		for i := range d {
			d[i] /= sigma
		}
	}
	return d, vecs, nil
}

// HermitianContext: see SymmetricContext.
func HermitianContext(ctx context.Context, a []complex128, n int, vectors bool) (values []float64, vecs []complex128, err error) {
	checkArgs("Hermitian", len(a), n)
	if probeEnabled {
		probe()
		defer probe()
	}
	if err := ctx.Err(); err != nil {
		return nil, nil, err
	}
	if n == 0 {
		if vectors {
			vecs = []complex128{}
		}
		return []float64{}, vecs, nil
	}
	s, release := watch(ctx)
	defer release()
	anorm := 0.0
	for i := 0; i < n; i++ {
		if i%pollRows == 0 && s.stopped() {
			return nil, nil, ctx.Err()
		}
		row := a[i*n : i*n+i+1]
		for _, x := range row[:i] {
			anorm = math.Max(anorm, math.Max(math.Abs(real(x)), math.Abs(imag(x))))
		}
		anorm = math.Max(anorm, math.Abs(real(row[i])))
	}
	if math.IsNaN(anorm) || math.IsInf(anorm, 0) {
		return nil, nil, fmt.Errorf("%w: non-finite matrix entry", ErrNoConvergence)
	}
	if n == 1 {
		if vectors {
			vecs = []complex128{1}
		}
		return []float64{real(a[0])}, vecs, nil
	}
	sigma := scaleFactor(anorm)
	if sigma != 1 {
		sc := complex(sigma, 0)
		for i := 0; i < n; i++ {
			row := a[i*n : i*n+i+1]
			for j := range row {
				row[j] *= sc
			}
		}
	}

	d := make([]float64, n)
	e := make([]float64, n-1)
	tau := make([]complex128, n)
	err = hetrd(a, n, d, e, tau, s)
	if err == nil {
		if vectors {
			z := make([]float64, n*n)
			for i := 0; i < n; i++ {
				z[i*n+i] = 1
			}
			err = tridiagQL(d, e, z, n, n, s)
			if err == nil {
				vecs, err = backTransform(a, n, tau, z, s)
			}
		} else {
			err = tridiagValues(d, e, s)
		}
	}
	if err != nil {
		return nil, nil, solveErr(ctx, err)
	}
	if sigma != 1 {
		for i := range d {
			d[i] /= sigma
		}
	}
	return d, vecs, nil
}

// solveErr maps a stage's error to the exported one: errStopped (the stopper
// fired, so ctx is done) becomes ctx.Err(), a failed iteration is wrapped.
func solveErr(ctx context.Context, err error) error {
	if err == errStopped {
		if cerr := ctx.Err(); cerr != nil {
			return cerr
		}
		return context.Canceled // not reached: the stopper fires only once ctx is done
	}
	return fmt.Errorf("%w: the tridiagonal QL/QR iteration exceeded 30n sweeps", err)
}
