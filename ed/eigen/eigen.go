package eigen

import (
	"context"
	"fmt"
	"math"
)

// pureGoName is the Name of PureGo.
const pureGoName = "pure Go (blocked row-wise Householder tridiagonalization, real and complex Hermitian; root-free QL/QR (dsterf) for values; implicit QL/QR with row-wise deferred rotations for eigenvectors; inverse iteration for a subset of them; cancellable)"

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

// symmetricPureGo is PureGo's Symmetric for the job, k = job.count(n)
// eigenvalues: sytrd (T = Q^T A Q), then
//
//   - values only: sterf on T;
//   - every eigenvector (Vectors, no VectorsFor, k = n): formQ (the
//     explicit Q) and tridiagQL rotating Q into the eigenvectors, the
//     eigenvalues tridiagQL's;
//   - a subset of the eigenvectors (VectorsFor set, or k < n):
//     symmetricSubset, the eigenvalues sterf's, those of the values-only
//     path.
//
// vecs is freshly allocated (it never shares a's storage, nor ws's).
func symmetricPureGo(ctx context.Context, a []float64, n int, job Job, k int, ws *Workspace) (values []float64, vecs []float64, err error) {
	if probeEnabled {
		probe()
		defer probe()
	}
	if err := ctx.Err(); err != nil {
		return nil, nil, err
	}
	if n == 0 {
		values = []float64{}
		if job.Vectors {
			job.vectorCount(values)
			vecs = []float64{}
		}
		return values, vecs, nil
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
		values = []float64{a[0]}
		if job.Vectors {
			vecs = []float64{1}[:job.vectorCount(values)]
		}
		return values, vecs, nil
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
	if err := sytrd(a, n, d, e, tau, s); err != nil {
		return nil, nil, solveErr(ctx, err)
	}
	if job.Vectors && (job.VectorsFor != nil || k < n) {
		values, vecs, err = symmetricSubset(a, n, d, e, tau, job, k, sigma, ws, s)
		if err != nil {
			return nil, nil, stageErr(ctx, err)
		}
		return values, vecs, nil
	}
	if job.Vectors {
		vecs, err = formQ(a, n, tau, s)
		if err == nil {
			err = tridiagQL(d, e, vecs, n, n, s)
		}
	} else {
		err = tridiagValues(d, e, s)
	}
	if err != nil {
		return nil, nil, solveErr(ctx, err)
	}
	if sigma != 1 {
		for i := range d {
			d[i] /= sigma
		}
	}
	return d[:k:k], vecs, nil
}

// hermitianPureGo is PureGo's Hermitian for the job, k = job.count(n):
// hetrd reduces A to a real tridiagonal T = Q^H A Q; values only, sterf on
// T; every eigenvector, tridiagQL on T from Z = I (Z in ws), then V = Q Z by
// backTransform; a subset of the eigenvectors (VectorsFor set, or k < n),
// hermitianSubset. No real 2n x 2n embedding is formed. vecs is freshly
// allocated.
func hermitianPureGo(ctx context.Context, a []complex128, n int, job Job, k int, ws *Workspace) (values []float64, vecs []complex128, err error) {
	if probeEnabled {
		probe()
		defer probe()
	}
	if err := ctx.Err(); err != nil {
		return nil, nil, err
	}
	if n == 0 {
		values = []float64{}
		if job.Vectors {
			job.vectorCount(values)
			vecs = []complex128{}
		}
		return values, vecs, nil
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
		values = []float64{real(a[0])}
		if job.Vectors {
			vecs = []complex128{1}[:job.vectorCount(values)]
		}
		return values, vecs, nil
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
	if err := hetrd(a, n, d, e, tau, s); err != nil {
		return nil, nil, solveErr(ctx, err)
	}
	if job.Vectors && (job.VectorsFor != nil || k < n) {
		values, vecs, err = hermitianSubset(a, n, d, e, tau, job, k, sigma, ws, s)
		if err != nil {
			return nil, nil, stageErr(ctx, err)
		}
		return values, vecs, nil
	}
	if job.Vectors {
		var z []float64
		z, err = identityInto(ws.floats(n*n), n, s)
		if err == nil {
			err = tridiagQL(d, e, z, n, n, s)
		}
		if err == nil {
			vecs, err = backTransform(a, n, tau, z, s)
		}
	} else {
		err = tridiagValues(d, e, s)
	}
	if err != nil {
		return nil, nil, solveErr(ctx, err)
	}
	if sigma != 1 {
		for i := range d {
			d[i] /= sigma
		}
	}
	return d[:k:k], vecs, nil
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
