package eigen

import (
	"context"
	"fmt"
)

// A Job says what one dense solve computes. The zero value asks for every
// eigenvalue and no eigenvector.
type Job struct {
	// Vectors asks for the eigenvectors of the eigenvalues returned.
	Vectors bool
	// Lowest > 0 asks for the Lowest smallest eigenvalues only (every one
	// when Lowest >= n), with their eigenvectors when Vectors is set; 0
	// asks for all. Negative panics.
	Lowest int
	// VectorsFor, when set together with Vectors, chooses how many
	// eigenvectors to compute once the eigenvalues are known: it is called
	// once, with the eigenvalues the job returns (ascending; it must not
	// keep or change the slice), and returns m, clamped to [0, len(values)];
	// the solve then returns every one of those eigenvalues but only the
	// eigenvectors of the lowest m, vecs being n x m. The engine uses it to
	// skip the eigenvectors of states whose Boltzmann weight is negligible
	// at every temperature asked for: the cost is then that of the
	// eigenvalues (the tridiagonal reduction) plus O(n^2 m) instead of the
	// O(n^3) of every eigenvector. nil computes them all.
	VectorsFor func(values []float64) int
}

// vectorCount returns the number of eigenvectors a job computes for the k
// eigenvalues values: 0 without Vectors, k without VectorsFor, else
// VectorsFor(values) clamped to [0, k].
func (j Job) vectorCount(values []float64) int {
	switch {
	case !j.Vectors:
		return 0
	case j.VectorsFor == nil:
		return len(values)
	}
	return max(0, min(len(values), j.VectorsFor(values)))
}

// count returns the number of eigenvalues a job returns for order n.
func (j Job) count(n int) int {
	if j.Lowest < 0 {
		panic(fmt.Sprintf("eigen: Job.Lowest = %d is negative", j.Lowest))
	}
	if j.Lowest == 0 || j.Lowest > n {
		return n
	}
	return j.Lowest
}

// A Backend diagonalizes dense real symmetric and complex Hermitian
// matrices. Two exist: PureGo, always compiled, and LAPACK, compiled with
// the build tag lapack; Default returns the one the build selected.
//
// Symmetric diagonalizes the real symmetric n x n matrix a: row-major,
// len(a) = n*n, only the lower triangle a[i*n+j], j <= i, is read, and a is
// destroyed. Hermitian does the same for the complex Hermitian a, of which
// it also ignores the imaginary part of the diagonal. With k =
// job.count(n) (n, or job.Lowest when that is smaller), both return the
// k smallest eigenvalues ascending and, when job.Vectors is set, the
// eigenvectors of the lowest m of them (m = k, or what job.VectorsFor
// chose) as the columns of a row-major n x m matrix, vecs[i*m+j] the i-th
// component of the eigenvector of values[j]:
//
//	A vecs[:,j] = values[j] vecs[:,j],   vecs^H vecs = I (m x m).
//
// vecs is nil without job.Vectors; vecs may share a's storage (the LAPACK
// backend returns the eigenvectors in a's place), never ws's. ws holds
// scratch memory that a sequence of solves reuses (nil: allocate it for
// this call); a Workspace must not serve two calls at once.
//
// Costs, in real flops: the reduction to tridiagonal form, 4n^3/3 (real)
// or 16n^3/3 (complex), dominates without vectors; the eigenvectors add
// about 2n^3 (real) or 8n^3 (complex) for the back-transformation, plus the
// tridiagonal eigenvectors (PureGo's QL: about 6n^3; LAPACK's divide and
// conquer less, its MRRR O(n^2)); LAPACK's lowest k take 2n^2 k (real) or
// 8n^2 k (complex) instead of the back-transformation. Memory beyond a:
// O(n) without vectors, one or two n x n matrices with them (see the
// package documentation). Measured times are in the README.
//
// A context that is already done returns ctx.Err() before a is read. One
// done during the solve: PureGo returns ctx.Err() within milliseconds;
// LAPACK cannot leave the library call, and returns its complete result
// when the call ends (see the package documentation). A failed iteration,
// or a non-finite entry in the lower triangle, returns an error wrapping
// ErrNoConvergence. Both panic if n < 0, len(a) != n*n or job.Lowest < 0.
// No goroutine they start outlives the call.
type Backend interface {
	// Name says what the backend is and which routines it calls; the engine
	// reports it as Report.Solver.
	Name() string
	Symmetric(ctx context.Context, a []float64, n int, job Job, ws *Workspace) (values, vecs []float64, err error)
	Hermitian(ctx context.Context, a []complex128, n int, job Job, ws *Workspace) (values []float64, vecs []complex128, err error)
}

// PureGo is the pure-Go backend: this package's Householder reductions,
// QL/QR iterations and, for a subset of the eigenvectors, inverse iteration
// (see the package documentation). It polls ctx every few milliseconds of
// work.
var PureGo Backend = pureGo{}

// Solver is Default().Name(): the dense backend of this build, as the
// engine reports it.
var Solver = Default().Name()

type pureGo struct{}

func (pureGo) Name() string { return pureGoName }

func (pureGo) Symmetric(ctx context.Context, a []float64, n int, job Job, ws *Workspace) ([]float64, []float64, error) {
	checkArgs("Symmetric", len(a), n)
	return symmetricPureGo(ctx, a, n, job, job.count(n), ws)
}

func (pureGo) Hermitian(ctx context.Context, a []complex128, n int, job Job, ws *Workspace) ([]float64, []complex128, error) {
	checkArgs("Hermitian", len(a), n)
	return hermitianPureGo(ctx, a, n, job, job.count(n), ws)
}

// leadingColumns returns the first k columns of the row-major n x c matrix
// v as a new row-major n x k matrix (nil for nil v).
func leadingColumns[T float64 | complex128](v []T, n, c, k int) []T {
	if v == nil {
		return nil
	}
	out := make([]T, n*k)
	for i := 0; i < n; i++ {
		copy(out[i*k:(i+1)*k], v[i*c:i*c+k])
	}
	return out
}

// A Workspace holds the scratch memory of dense solves, so that the solves
// that one goroutine runs one after the other (the sectors, or the field
// points of a sweep) allocate it once, at the size of the largest. The zero
// value is ready to use; a nil *Workspace allocates per call. The LAPACK
// backend keeps its work arrays here (with vectors about 2n^2 reals, as
// large as the matrix); PureGo keeps the real n x n rotation matrix of the
// complex solver. A Workspace must not be used by two calls at once; results
// never alias it.
type Workspace struct {
	f []float64
	c []complex128
	i []int32
}

// floats returns a slice of n float64 from w (of unspecified content), or a
// new one when w is nil.
func (w *Workspace) floats(n int) []float64 {
	if w == nil {
		return make([]float64, n)
	}
	if cap(w.f) < n {
		w.f = make([]float64, n)
	}
	return w.f[:n]
}

// complexes returns a slice of n complex128 from w, or a new one.
func (w *Workspace) complexes(n int) []complex128 {
	if w == nil {
		return make([]complex128, n)
	}
	if cap(w.c) < n {
		w.c = make([]complex128, n)
	}
	return w.c[:n]
}

// ints returns a slice of n int32 from w, or a new one.
func (w *Workspace) ints(n int) []int32 {
	if w == nil {
		return make([]int32, n)
	}
	if cap(w.i) < n {
		w.i = make([]int32, n)
	}
	return w.i[:n]
}

// Symmetric diagonalizes the real symmetric n x n matrix a (row-major, len
// n*n; only the lower triangle, a[i*n+j] with j <= i, need be filled; a is
// overwritten/destroyed) with the Default backend. It returns the
// eigenvalues ascending; when vectors is true also the eigenvectors as a
// row-major n x n slice whose COLUMN k is the eigenvector of values[k]
// (vecs[i*n+k]):
//
//	A vecs[:,k] = values[k] vecs[:,k],   vecs^T vecs = I.
//
// ok=false on numerical failure (no convergence, or a non-finite entry).
// It panics if n < 0 or len(a) != n*n. vecs is nil when vectors is false
// and may share a's storage. It is SymmetricContext with
// context.Background().
func Symmetric(a []float64, n int, vectors bool) (values []float64, vecs []float64, ok bool) {
	values, vecs, err := SymmetricContext(context.Background(), a, n, vectors)
	return values, vecs, err == nil
}

// Hermitian diagonalizes the complex Hermitian n x n matrix a (row-major, len
// n*n; only the lower triangle need be filled, a[i*n+j] with j<=i; the
// diagonal's imaginary part is ignored; a is destroyed) with the Default
// backend. Same conventions as Symmetric: values ascending (real), vecs
// column k = eigenvector k (complex, row-major n x n, vecs[i*n+k]):
//
//	A vecs[:,k] = values[k] vecs[:,k],   vecs^H vecs = I.
//
// It is HermitianContext with context.Background(). No real 2n x 2n
// embedding is formed by either backend.
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
// nothing. They are Default().Symmetric and Default().Hermitian with every
// eigenvalue and no workspace; see Backend, and the package documentation
// for how promptly each backend stops (PureGo within milliseconds; LAPACK
// only before its library call, which then runs to its end). No goroutine
// the call started outlives it.
func SymmetricContext(ctx context.Context, a []float64, n int, vectors bool) (values []float64, vecs []float64, err error) {
	return Default().Symmetric(ctx, a, n, Job{Vectors: vectors}, nil)
}

// HermitianContext: see SymmetricContext.
func HermitianContext(ctx context.Context, a []complex128, n int, vectors bool) (values []float64, vecs []complex128, err error) {
	return Default().Hermitian(ctx, a, n, Job{Vectors: vectors}, nil)
}
