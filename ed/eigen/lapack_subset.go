//go:build lapack && cgo

package eigen

/*
#include <lapacke.h>
*/
import "C"

import (
	"fmt"
	"unsafe"
)

// The LAPACK path of a job with VectorsFor: the eigenvectors are chosen
// after the eigenvalues are known, so the driver routines (which fix the
// subset in advance) cannot serve it, and their stages are called one by
// one:
//
//	dsytrd / zhetrd   A = Q T Q^H, T real tridiagonal          4n^3/3 / 16n^3/3 flops
//	dsterf            every eigenvalue of T (on a copy)       O(n^2)
//	VectorsFor        m, from the eigenvalues
//	dstemr            the eigenvectors of the lowest m of T   O(n m) (MRRR, il = 1, iu = m;
//	                  where it fails, dstebz and dstein: bisection and inverse iteration)
//	dormtr / zunmtr   V = Q Z                                  2n^2 m / 8n^2 m flops
//
// which costs the eigenvalues (dsyevd/zheevd with jobz = N run the same
// first two stages) plus O(n^2 m), against the O(n^3) of all eigenvectors.
// The eigenvalues returned are dsterf's, for every one of the k the job
// asks for, as the values-only route returns them.
//
// Blocks of order below subsetMinOrder take every eigenvector instead (and
// keep m): the saving is nil there, and dstemr's closed form for n = 2
// returned a wrong real eigenvector with il = iu = 1 (TestVectorsFor).
const subsetMinOrder = 16

// subsetTridiagonal runs dsterf on copies of (d, e), calls VectorsFor and,
// for m > 0, dstemr for the eigenvectors of the lowest m. It returns the k
// lowest eigenvalues, m, and Z (column-major n x m, ldz = n) in a slice of
// ws (nil when m = 0); d and e (len n, e[n-1] unused) are destroyed.
func subsetTridiagonal(d, e []float64, n, k int, job Job, ws *Workspace) (values []float64, m int, z []float64, err error) {
	w := make([]float64, n)
	copy(w, d)
	ee := make([]float64, n)
	copy(ee, e[:n-1])
	if info := C.LAPACKE_dsterf_work(C.lapack_int(n), (*C.double)(unsafe.Pointer(&w[0])), (*C.double)(unsafe.Pointer(&ee[0]))); info != 0 {
		return nil, 0, nil, lapackInfo("dsterf", info)
	}
	values = w[:k:k]
	m = job.vectorCount(values)
	if m == 0 {
		return values, 0, nil, nil
	}
	dd, ed := make([]float64, n), make([]float64, n)
	copy(dd, d)
	copy(ed, e)
	if !forceBisection {
		if z, err := subsetMRRR(d, e, n, m, ws); err == nil {
			return values, m, z, nil
		}
	}
	// dstemr gave up (info 2x, its eigenvector stage, on the 12-site
	// kagome benchmark's block at zero field): bisection and inverse
	// iteration, as dsyevr does for a subset.
	z, err = subsetBisection(dd, ed, n, m, ws)
	if err != nil {
		return nil, 0, nil, err
	}
	return values, m, z, nil
}

// forceBisection, when set (tests), skips dstemr for dstebz and dstein.
var forceBisection bool

// subsetMRRR returns the eigenvectors of the lowest m eigenvalues of the
// tridiagonal (d, e) by dstemr (MRRR, il = 1, iu = m), column-major n x m
// in ws; d and e are destroyed.
func subsetMRRR(d, e []float64, n, m int, ws *Workspace) ([]float64, error) {
	N := C.lapack_int(n)
	var found, tryrac C.lapack_int
	var qf, dummy C.double
	var qi C.lapack_int
	wm := make([]float64, n)
	isuppz := make([]int32, 2*m)
	pd, pe := (*C.double)(unsafe.Pointer(&d[0])), (*C.double)(unsafe.Pointer(&e[0]))
	pw, psupp := (*C.double)(unsafe.Pointer(&wm[0])), (*C.lapack_int)(unsafe.Pointer(&isuppz[0]))
	info := C.LAPACKE_dstemr_work(C.LAPACK_COL_MAJOR, 'V', 'I', N, pd, pe, 0, 0, 1, C.lapack_int(m),
		&found, pw, &dummy, N, C.lapack_int(m), psupp, &tryrac, &qf, -1, &qi, -1)
	if err := lapackInfo("dstemr", info); err != nil {
		return nil, err
	}
	lw, li := int(qf), int(qi)
	buf, iwork := ws.floats(lw+n*m), ws.ints(li)
	work, z := buf[:lw], buf[lw:]
	tryrac = 0
	info = C.LAPACKE_dstemr_work(C.LAPACK_COL_MAJOR, 'V', 'I', N, pd, pe, 0, 0, 1, C.lapack_int(m),
		&found, pw, (*C.double)(unsafe.Pointer(&z[0])), N, C.lapack_int(m), psupp, &tryrac,
		(*C.double)(unsafe.Pointer(&work[0])), C.lapack_int(lw), (*C.lapack_int)(unsafe.Pointer(&iwork[0])), C.lapack_int(li))
	if err := lapackInfo("dstemr", info); err != nil {
		return nil, err
	}
	if int(found) != m {
		return nil, fmt.Errorf("%w: LAPACK dstemr found %d of %d eigenvectors", ErrNoConvergence, found, m)
	}
	return z, nil
}

// subsetBisection returns what subsetMRRR does by dstebz (bisection of the
// lowest m, to the accuracy 2 safmin that dstein asks for) and dstein
// (inverse iteration, reorthogonalized within clusters).
func subsetBisection(d, e []float64, n, m int, ws *Workspace) ([]float64, error) {
	N := C.lapack_int(n)
	const abstol = 2 * 2.2250738585072014e-308
	var found, nsplit C.lapack_int
	w := make([]float64, n)
	iblock, isplit := make([]int32, n), make([]int32, n)
	work, iwork := make([]float64, 5*n), make([]int32, 3*n)
	pd, pe := (*C.double)(unsafe.Pointer(&d[0])), (*C.double)(unsafe.Pointer(&e[0]))
	pw := (*C.double)(unsafe.Pointer(&w[0]))
	pblock, psplit := (*C.lapack_int)(unsafe.Pointer(&iblock[0])), (*C.lapack_int)(unsafe.Pointer(&isplit[0]))
	info := C.LAPACKE_dstebz_work('I', 'B', N, 0, 0, 1, C.lapack_int(m), abstol, pd, pe, &found, &nsplit, pw, pblock, psplit,
		(*C.double)(unsafe.Pointer(&work[0])), (*C.lapack_int)(unsafe.Pointer(&iwork[0])))
	if err := lapackInfo("dstebz", info); err != nil {
		return nil, err
	}
	if int(found) != m {
		return nil, fmt.Errorf("%w: LAPACK dstebz found %d of %d eigenvalues", ErrNoConvergence, found, m)
	}
	z := ws.floats(n * m)
	ifail := make([]int32, m)
	info = C.LAPACKE_dstein_work(C.LAPACK_COL_MAJOR, N, pd, pe, C.lapack_int(m), pw, pblock, psplit,
		(*C.double)(unsafe.Pointer(&z[0])), N, (*C.double)(unsafe.Pointer(&work[0])), (*C.lapack_int)(unsafe.Pointer(&iwork[0])),
		(*C.lapack_int)(unsafe.Pointer(&ifail[0])))
	if err := lapackInfo("dstein", info); err != nil {
		return nil, err
	}
	return z, nil
}

// symmetricSubsetLAPACK is LAPACK.Symmetric for a job with VectorsFor, after
// lapackFront (k eigenvalues of n >= 1 asked for).
func symmetricSubsetLAPACK(a []float64, n, k int, job Job, ws *Workspace) ([]float64, []float64, error) {
	N := C.lapack_int(n)
	pa := (*C.double)(unsafe.Pointer(&a[0]))
	d, e, tau := make([]float64, n), make([]float64, n), make([]float64, n)
	pd, pe, ptau := (*C.double)(unsafe.Pointer(&d[0])), (*C.double)(unsafe.Pointer(&e[0])), (*C.double)(unsafe.Pointer(&tau[0]))
	var q C.double
	if err := lapackInfo("dsytrd", C.LAPACKE_dsytrd_work(C.LAPACK_COL_MAJOR, 'U', N, pa, N, pd, pe, ptau, &q, -1)); err != nil {
		return nil, nil, err
	}
	work := ws.floats(int(q))
	if err := lapackInfo("dsytrd", C.LAPACKE_dsytrd_work(C.LAPACK_COL_MAJOR, 'U', N, pa, N, pd, pe, ptau,
		(*C.double)(unsafe.Pointer(&work[0])), C.lapack_int(len(work)))); err != nil {
		return nil, nil, err
	}
	values, m, z, err := subsetTridiagonal(d, e, n, k, job, ws)
	if err != nil || m == 0 {
		return values, []float64{}, err
	}
	// z lives in ws.f: dormtr's work goes in a separate slice.
	M := C.lapack_int(m)
	pz := (*C.double)(unsafe.Pointer(&z[0]))
	if err := lapackInfo("dormtr", C.LAPACKE_dormtr_work(C.LAPACK_COL_MAJOR, 'L', 'U', 'N', N, M, pa, N, ptau, pz, N, &q, -1)); err != nil {
		return nil, nil, err
	}
	work = make([]float64, int(q))
	if err := lapackInfo("dormtr", C.LAPACKE_dormtr_work(C.LAPACK_COL_MAJOR, 'L', 'U', 'N', N, M, pa, N, ptau, pz, N,
		(*C.double)(unsafe.Pointer(&work[0])), C.lapack_int(len(work)))); err != nil {
		return nil, nil, err
	}
	vecs := a[: n*m : n*m]
	transposeInto(vecs, z, n, m)
	return values, vecs, nil
}

// hermitianSubsetLAPACK is LAPACK.Hermitian for a job with VectorsFor (see
// symmetricSubsetLAPACK). a holds conj(A) column-major; its eigenvectors are
// conjugated back as they are transposed.
func hermitianSubsetLAPACK(a []complex128, n, k int, job Job, ws *Workspace) ([]float64, []complex128, error) {
	N := C.lapack_int(n)
	pa := (*C.complexdouble)(unsafe.Pointer(&a[0]))
	d, e, tau := make([]float64, n), make([]float64, n), make([]complex128, n)
	pd, pe, ptau := (*C.double)(unsafe.Pointer(&d[0])), (*C.double)(unsafe.Pointer(&e[0])), (*C.complexdouble)(unsafe.Pointer(&tau[0]))
	var q C.complexdouble
	if err := lapackInfo("zhetrd", C.LAPACKE_zhetrd_work(C.LAPACK_COL_MAJOR, 'U', N, pa, N, pd, pe, ptau, &q, -1)); err != nil {
		return nil, nil, err
	}
	work := ws.complexes(int(real(complex128(q))))
	if err := lapackInfo("zhetrd", C.LAPACKE_zhetrd_work(C.LAPACK_COL_MAJOR, 'U', N, pa, N, pd, pe, ptau,
		(*C.complexdouble)(unsafe.Pointer(&work[0])), C.lapack_int(len(work)))); err != nil {
		return nil, nil, err
	}
	values, m, zr, err := subsetTridiagonal(d, e, n, k, job, ws)
	if err != nil || m == 0 {
		return values, []complex128{}, err
	}
	M := C.lapack_int(m)
	var lw int
	{
		var dummy C.complexdouble
		if err := lapackInfo("zunmtr", C.LAPACKE_zunmtr_work(C.LAPACK_COL_MAJOR, 'L', 'U', 'N', N, M, pa, N, ptau, &dummy, N, &q, -1)); err != nil {
			return nil, nil, err
		}
		lw = int(real(complex128(q)))
	}
	cbuf := ws.complexes(lw + n*m)
	work, z := cbuf[:lw], cbuf[lw:]
	for i, x := range zr[:n*m] {
		z[i] = complex(x, 0)
	}
	if err := lapackInfo("zunmtr", C.LAPACKE_zunmtr_work(C.LAPACK_COL_MAJOR, 'L', 'U', 'N', N, M, pa, N, ptau,
		(*C.complexdouble)(unsafe.Pointer(&z[0])), N, (*C.complexdouble)(unsafe.Pointer(&work[0])), C.lapack_int(lw))); err != nil {
		return nil, nil, err
	}
	vecs := a[: n*m : n*m]
	conjTransposeInto(vecs, z, n, m)
	return values, vecs, nil
}
