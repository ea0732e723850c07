//go:build lapack && cgo

package eigen

/*
#cgo LDFLAGS: -llapacke -lopenblas
#include <lapacke.h>

// From OpenBLAS (libopenblas-dev's cblas.h declares them too; declared here
// so that no include path beyond lapacke.h is needed).
void openblas_set_num_threads(int num_threads);
int openblas_get_num_threads(void);
char *openblas_get_config(void);
*/
import "C"

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"strings"
	"sync"
	"unsafe"
)

// LAPACK is the backend that calls LAPACK through LAPACKE (column-major
// *_work entry points, with this package's work arrays) over OpenBLAS, by
// cgo; it exists in builds with the tag lapack. Routines (chooseRoutine):
//
//	every eigenvalue             dsyevd / zheevd, jobz = N (tridiagonal
//	                             reduction dsytrd / zhetrd, then dsterf)
//	every eigenvector, real      dsyevd, jobz = V (divide and conquer)
//	every eigenvector, complex   zheevr, range = A (MRRR)
//	the lowest k (Job.Lowest),   dsyevr / zheevr, range = I, il = 1,
//	  k <= n/10 (values) or        iu = k (bisection, and inverse
//	  k <= n/6 (vectors)           iteration for the vectors)
//	vectors chosen by VectorsFor dsytrd / zhetrd, dsterf, dstemr (il = 1,
//	                             iu = m), dormtr / zunmtr (lapack_subset.go)
//
// A larger subset is cut from the whole spectrum. The row-major lower
// triangle that the API takes is, read column-major, the upper triangle of
// A^T = conj(A), so it is passed as is with uplo = U and the eigenvectors
// (of conj(A): conj(v)) are conjugated back while they are transposed to
// the API's layout, in place in a (dsyevd, zheevd) or from LAPACK's Z into
// a's storage (dsyevr, zheevr). Work arrays come from the Workspace: with
// vectors dsyevd needs 1 + 6n + 2n^2 reals, zheevr the n x k complex Z and
// O(n), besides a.
//
// A call runs to its end once LAPACK is entered: ctx is checked before.
// OpenBLAS threads: a call of order n >= threadedOrder runs alone on
// min(GOMAXPROCS, OpenBLAS's own count) threads, smaller ones side by side
// on one each (blasThreads), so that results are reproducible bit for bit.
var LAPACK Backend = lapackBackend{}

type lapackBackend struct{}

// lapackName is LAPACK's Name, built once (zero values: ready before any
// package-level initializer runs, such as that of Solver).
var lapackName struct {
	once sync.Once
	s    string
}

func (lapackBackend) Name() string {
	lapackName.once.Do(func() {
		cfg := strings.TrimSpace(C.GoString(C.openblas_get_config()))
		lapackName.s = "LAPACK through cgo (LAPACKE over " + cfg + "): dsyevd/zheevd for every eigenvalue (jobz N), dsyevd (divide and conquer) / zheevr (MRRR) for every eigenvector, dsyevr/zheevr (il..iu) for the lowest k; dsytrd/zhetrd, dsterf, dstemr and dormtr/zunmtr for eigenvectors chosen from the eigenvalues; OpenBLAS threads: min(GOMAXPROCS, its own) for n >= 256, one at a time, 1 below, side by side; cancellable between calls only"
	})
	return lapackName.s
}

// LAPACK's integers are 32-bit: the largest orders whose work arrays
// (1 + 6n + 2n^2 reals for dsyevd with vectors) and matrices (n^2 entries)
// they index.
const (
	lapackMaxVectorOrder = 32766
	lapackMaxOrder       = 46340
)

// A routine is the LAPACK driver of a solve.
type routine int

const (
	routineAuto routine = iota // the backend's choice (chooseRoutine)
	routineD                   // dsyevd / zheevd: every eigenvalue (divide and conquer for vectors)
	routineR                   // dsyevr / zheevr, range A: every eigenvalue (MRRR for vectors)
	routineRI                  // dsyevr / zheevr, range I: the lowest k (bisection, inverse iteration)
)

// chooseRoutine returns the fastest routine measured (package documentation)
// for k of the n eigenvalues of a real or complex matrix: range I when k is
// small enough (k <= n/10 values only, k <= n/6 with vectors; beyond, the
// bisection and the inverse iteration cost more than the whole spectrum),
// otherwise the whole spectrum (cut to k) by divide and conquer, but by
// MRRR for complex eigenvectors (zheevd is twice as slow as zheevr here at
// n = 2000).
func chooseRoutine(complexMatrix bool, n, k int, vectors bool) routine {
	switch {
	case k < n && !vectors && 10*k <= n, k < n && vectors && 6*k <= n:
		return routineRI
	case vectors && complexMatrix:
		return routineR
	}
	return routineD
}

func (lapackBackend) Symmetric(ctx context.Context, a []float64, n int, job Job, ws *Workspace) ([]float64, []float64, error) {
	return symmetricLAPACK(ctx, a, n, job, ws, routineAuto)
}

func (lapackBackend) Hermitian(ctx context.Context, a []complex128, n int, job Job, ws *Workspace) ([]float64, []complex128, error) {
	return hermitianLAPACK(ctx, a, n, job, ws, routineAuto)
}

// lapackInfo turns LAPACK's info into an error: > 0 is a failed iteration;
// < 0 an illegal argument, a bug of this file.
func lapackInfo(name string, info C.lapack_int) error {
	switch {
	case info < 0:
		panic(fmt.Sprintf("eigen: %s: illegal value of argument %d", name, -info))
	case info > 0:
		return fmt.Errorf("%w: LAPACK %s info = %d", ErrNoConvergence, name, info)
	}
	return nil
}

func jobz(vectors bool) C.char {
	if vectors {
		return 'V'
	}
	return 'N'
}

// lapackFront does what both backends' paths share before LAPACK is
// called: the argument checks, ctx, n = 0, the order limit and the scan of
// the lower triangle for non-finite entries (LAPACK would return garbage for
// them). done is true when the result is already known.
func lapackFront(ctx context.Context, fn string, la, n int, job Job, nonFinite func() bool) (k int, done bool, err error) {
	checkArgs(fn, la, n)
	k = job.count(n)
	if err := ctx.Err(); err != nil {
		return k, true, err
	}
	if n == 0 {
		return 0, true, nil
	}
	limit := lapackMaxOrder
	if job.Vectors {
		limit = lapackMaxVectorOrder
	}
	if n > limit {
		return k, true, fmt.Errorf("eigen: %s: order %d is beyond 32-bit LAPACK (at most %d, vectors=%v)", fn, n, limit, job.Vectors)
	}
	if nonFinite() {
		return k, true, fmt.Errorf("%w: non-finite matrix entry", ErrNoConvergence)
	}
	return k, false, nil
}

// emptyResult is the result for n = 0.
func emptyResult[T float64 | complex128](vectors bool) ([]float64, []T, error) {
	var vecs []T
	if vectors {
		vecs = []T{}
	}
	return []float64{}, vecs, nil
}

// keepLowest cuts the m computed eigenpairs (row-major n x m vectors in v,
// nil without vectors) to the lowest k, in place.
func keepLowest[T float64 | complex128](w []float64, v []T, n, m, k int) ([]float64, []T) {
	w = w[:k:k]
	if v == nil {
		return w, nil
	}
	if k < m {
		for i := 1; i < n; i++ {
			copy(v[i*k:(i+1)*k], v[i*m:i*m+k])
		}
	}
	return w, v[: n*k : n*k]
}

// symmetricLAPACK is LAPACK.Symmetric with the routine r (routineAuto: the
// backend's choice; the tests and benchmarks force the others).
func symmetricLAPACK(ctx context.Context, a []float64, n int, job Job, ws *Workspace, r routine) ([]float64, []float64, error) {
	k, done, err := lapackFront(ctx, "Symmetric", len(a), n, job, func() bool {
		for i := 0; i < n; i++ {
			for _, x := range a[i*n : i*n+i+1] {
				if math.IsNaN(x) || math.IsInf(x, 0) {
					return true
				}
			}
		}
		return false
	})
	if done {
		if err != nil || n > 0 {
			return nil, nil, err
		}
		return emptyResult[float64](job.Vectors)
	}
	if job.Vectors && job.VectorsFor != nil && n < subsetMinOrder {
		w, vecs, err := symmetricLAPACK(ctx, a, n, Job{Vectors: true, Lowest: job.Lowest}, ws, r)
		if err != nil {
			return nil, nil, err
		}
		return w, leadingColumns(vecs, n, len(w), job.vectorCount(w)), nil
	}
	if r == routineAuto {
		r = chooseRoutine(false, n, k, job.Vectors)
	}
	defer blasThreads.enter(n)()
	if job.Vectors && job.VectorsFor != nil {
		return symmetricSubsetLAPACK(a, n, k, job, ws)
	}
	N := C.lapack_int(n)
	pa := (*C.double)(unsafe.Pointer(&a[0]))
	w := make([]float64, n)
	pw := (*C.double)(unsafe.Pointer(&w[0]))
	var qf C.double
	var qi C.lapack_int
	if r == routineD {
		info := C.LAPACKE_dsyevd_work(C.LAPACK_COL_MAJOR, jobz(job.Vectors), 'U', N, pa, N, pw, &qf, -1, &qi, -1)
		if err := lapackInfo("dsyevd", info); err != nil {
			return nil, nil, err
		}
		lw, li := int(qf), int(qi)
		work, iwork := ws.floats(lw), ws.ints(li)
		info = C.LAPACKE_dsyevd_work(C.LAPACK_COL_MAJOR, jobz(job.Vectors), 'U', N, pa, N, pw,
			(*C.double)(unsafe.Pointer(&work[0])), C.lapack_int(lw), (*C.lapack_int)(unsafe.Pointer(&iwork[0])), C.lapack_int(li))
		if err := lapackInfo("dsyevd", info); err != nil {
			return nil, nil, err
		}
		var vecs []float64
		if job.Vectors {
			transposeSquare(a, n)
			vecs = a
		}
		w, vecs = keepLowest(w, vecs, n, n, k)
		return w, vecs, nil
	}
	// dsyevr: range A (routineR), or I with il = 1, iu = k (routineRI).
	rng, m := C.char('A'), n
	if r == routineRI {
		rng, m = 'I', k
	}
	zlen := 1
	if job.Vectors {
		zlen = n * m
	}
	var found C.lapack_int
	var dummy C.double
	isuppz := make([]int32, 2*m)
	psupp := (*C.lapack_int)(unsafe.Pointer(&isuppz[0]))
	info := C.LAPACKE_dsyevr_work(C.LAPACK_COL_MAJOR, jobz(job.Vectors), rng, 'U', N, pa, N, 0, 0, 1, C.lapack_int(m), 0,
		&found, pw, &dummy, N, psupp, &qf, -1, &qi, -1)
	if err := lapackInfo("dsyevr", info); err != nil {
		return nil, nil, err
	}
	lw, li := int(qf), int(qi)
	buf, iwork := ws.floats(lw+zlen), ws.ints(li)
	work, z := buf[:lw], buf[lw:]
	info = C.LAPACKE_dsyevr_work(C.LAPACK_COL_MAJOR, jobz(job.Vectors), rng, 'U', N, pa, N, 0, 0, 1, C.lapack_int(m), 0,
		&found, pw, (*C.double)(unsafe.Pointer(&z[0])), N, psupp,
		(*C.double)(unsafe.Pointer(&work[0])), C.lapack_int(lw), (*C.lapack_int)(unsafe.Pointer(&iwork[0])), C.lapack_int(li))
	if err := lapackInfo("dsyevr", info); err != nil {
		return nil, nil, err
	}
	if int(found) != m {
		return nil, nil, fmt.Errorf("%w: LAPACK dsyevr found %d of %d eigenvalues", ErrNoConvergence, found, m)
	}
	var vecs []float64
	if job.Vectors {
		vecs = a[: n*m : n*m]
		transposeInto(vecs, z, n, m)
	}
	w, vecs = keepLowest(w, vecs, n, m, k)
	return w, vecs, nil
}

// hermitianLAPACK is LAPACK.Hermitian with the routine r (see
// symmetricLAPACK).
func hermitianLAPACK(ctx context.Context, a []complex128, n int, job Job, ws *Workspace, r routine) ([]float64, []complex128, error) {
	k, done, err := lapackFront(ctx, "Hermitian", len(a), n, job, func() bool {
		for i := 0; i < n; i++ {
			row := a[i*n : i*n+i+1]
			for _, x := range row[:i] {
				if math.IsNaN(real(x)) || math.IsInf(real(x), 0) || math.IsNaN(imag(x)) || math.IsInf(imag(x), 0) {
					return true
				}
			}
			if x := real(row[i]); math.IsNaN(x) || math.IsInf(x, 0) {
				return true
			}
		}
		return false
	})
	if done {
		if err != nil || n > 0 {
			return nil, nil, err
		}
		return emptyResult[complex128](job.Vectors)
	}
	if job.Vectors && job.VectorsFor != nil && n < subsetMinOrder {
		w, vecs, err := hermitianLAPACK(ctx, a, n, Job{Vectors: true, Lowest: job.Lowest}, ws, r)
		if err != nil {
			return nil, nil, err
		}
		return w, leadingColumns(vecs, n, len(w), job.vectorCount(w)), nil
	}
	if r == routineAuto {
		r = chooseRoutine(true, n, k, job.Vectors)
	}
	// The API ignores the imaginary part of the diagonal; zero it so that
	// nothing depends on LAPACK ignoring it too.
	for i := 0; i < n; i++ {
		a[i*n+i] = complex(real(a[i*n+i]), 0)
	}
	defer blasThreads.enter(n)()
	if job.Vectors && job.VectorsFor != nil {
		return hermitianSubsetLAPACK(a, n, k, job, ws)
	}
	N := C.lapack_int(n)
	pa := (*C.complexdouble)(unsafe.Pointer(&a[0]))
	w := make([]float64, n)
	pw := (*C.double)(unsafe.Pointer(&w[0]))
	var qc C.complexdouble
	var qf C.double
	var qi C.lapack_int
	if r == routineD {
		info := C.LAPACKE_zheevd_work(C.LAPACK_COL_MAJOR, jobz(job.Vectors), 'U', N, pa, N, pw, &qc, -1, &qf, -1, &qi, -1)
		if err := lapackInfo("zheevd", info); err != nil {
			return nil, nil, err
		}
		lw, lr, li := int(real(complex128(qc))), int(qf), int(qi)
		work, rwork, iwork := ws.complexes(lw), ws.floats(lr), ws.ints(li)
		info = C.LAPACKE_zheevd_work(C.LAPACK_COL_MAJOR, jobz(job.Vectors), 'U', N, pa, N, pw,
			(*C.complexdouble)(unsafe.Pointer(&work[0])), C.lapack_int(lw), (*C.double)(unsafe.Pointer(&rwork[0])), C.lapack_int(lr),
			(*C.lapack_int)(unsafe.Pointer(&iwork[0])), C.lapack_int(li))
		if err := lapackInfo("zheevd", info); err != nil {
			return nil, nil, err
		}
		var vecs []complex128
		if job.Vectors {
			conjTransposeSquare(a, n)
			vecs = a
		}
		w, vecs = keepLowest(w, vecs, n, n, k)
		return w, vecs, nil
	}
	// zheevr: range A (routineR), or I with il = 1, iu = k (routineRI).
	rng, m := C.char('A'), n
	if r == routineRI {
		rng, m = 'I', k
	}
	zlen := 1
	if job.Vectors {
		zlen = n * m
	}
	var found C.lapack_int
	var dummy C.complexdouble
	isuppz := make([]int32, 2*m)
	psupp := (*C.lapack_int)(unsafe.Pointer(&isuppz[0]))
	info := C.LAPACKE_zheevr_work(C.LAPACK_COL_MAJOR, jobz(job.Vectors), rng, 'U', N, pa, N, 0, 0, 1, C.lapack_int(m), 0,
		&found, pw, &dummy, N, psupp, &qc, -1, &qf, -1, &qi, -1)
	if err := lapackInfo("zheevr", info); err != nil {
		return nil, nil, err
	}
	lw, lr, li := int(real(complex128(qc))), int(qf), int(qi)
	cbuf, rwork, iwork := ws.complexes(lw+zlen), ws.floats(lr), ws.ints(li)
	work, z := cbuf[:lw], cbuf[lw:]
	info = C.LAPACKE_zheevr_work(C.LAPACK_COL_MAJOR, jobz(job.Vectors), rng, 'U', N, pa, N, 0, 0, 1, C.lapack_int(m), 0,
		&found, pw, (*C.complexdouble)(unsafe.Pointer(&z[0])), N, psupp,
		(*C.complexdouble)(unsafe.Pointer(&work[0])), C.lapack_int(lw), (*C.double)(unsafe.Pointer(&rwork[0])), C.lapack_int(lr),
		(*C.lapack_int)(unsafe.Pointer(&iwork[0])), C.lapack_int(li))
	if err := lapackInfo("zheevr", info); err != nil {
		return nil, nil, err
	}
	if int(found) != m {
		return nil, nil, fmt.Errorf("%w: LAPACK zheevr found %d of %d eigenvalues", ErrNoConvergence, found, m)
	}
	var vecs []complex128
	if job.Vectors {
		vecs = a[: n*m : n*m]
		conjTransposeInto(vecs, z, n, m)
	}
	w, vecs = keepLowest(w, vecs, n, m, k)
	return w, vecs, nil
}

// threadedOrder is the smallest order that LAPACK solves with several
// OpenBLAS threads (see blasThreads).
const threadedOrder = 256

// blasThreads decides OpenBLAS's (process-wide) thread count so that every
// call runs with a count fixed by its order alone, and the results are
// therefore bitwise reproducible (OpenBLAS's threaded kernels split sums by
// thread, so the rounding depends on the count), whatever else runs:
// a call of order >= threadedOrder holds the lock exclusively and runs on
// p = min(GOMAXPROCS, OpenBLAS's own count) threads, both read at first
// use; a smaller one shares the lock with other small ones and runs on one
// thread. Concurrent large calls thus take turns, each with every core,
// while small ones (the many sectors of a cluster) run side by side, one
// core each: no oversubscription either way.
var blasThreads threadPolicy

type threadPolicy struct {
	once sync.Once
	p    int // threads of a large call
	mu   sync.RWMutex
}

// enter starts a call of order n and returns the function that ends it.
func (tp *threadPolicy) enter(n int) (leave func()) {
	tp.once.Do(func() {
		tp.p = max(1, min(runtime.GOMAXPROCS(0), int(C.openblas_get_num_threads())))
		C.openblas_set_num_threads(1)
	})
	if tp.p == 1 || n < threadedOrder {
		tp.mu.RLock()
		return tp.mu.RUnlock
	}
	tp.mu.Lock()
	C.openblas_set_num_threads(C.int(tp.p))
	return func() {
		C.openblas_set_num_threads(1)
		tp.mu.Unlock()
	}
}

// openblasThreads returns OpenBLAS's current thread count (for the tests).
func openblasThreads() int { return int(C.openblas_get_num_threads()) }
