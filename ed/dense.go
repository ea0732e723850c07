package ed

import (
	"context"
	"fmt"
	"runtime"
	"runtime/debug"
	"sort"
	"sync"

	"frustum/ed/eigen"
)

// sectorSpectrum is the dense diagonalization of one sector: eigenvalues
// ascending (K) and, when asked for, the eigenvectors of the lowest nvec of
// them as the columns of a row-major dim x nvec matrix (real or complex).
type sectorSpectrum struct {
	sector *sectorBasis
	values []float64
	vecsR  []float64
	vecsC  []complex128
	nvec   int
}

// denseReal fills the real symmetric matrix of op in the sector (row-major;
// <y|op|x> at row index(y), column index(x)). op must be real and must not
// leave the sector.
func denseReal(sys *spinSystem, bs *basisSet, sec *sectorBasis, op *operator) []float64 {
	n := sec.dim()
	a := make([]float64, n*n)
	k := make([]int, sys.n)
	for c, x := range sec.states {
		sys.digits(x, k)
		a[c*n+c] += op.diagonal(sys, k)
		op.apply(sys, x, k, func(y int64, amp complex128) {
			a[bs.index(y)*n+c] += real(amp)
		})
	}
	return a
}

// denseComplex fills the complex Hermitian matrix of op in the sector.
func denseComplex(sys *spinSystem, bs *basisSet, sec *sectorBasis, op *operator) []complex128 {
	n := sec.dim()
	a := make([]complex128, n*n)
	k := make([]int, sys.n)
	for c, x := range sec.states {
		sys.digits(x, k)
		a[c*n+c] += complex(op.diagonal(sys, k), 0)
		op.apply(sys, x, k, func(y int64, amp complex128) {
			a[bs.index(y)*n+c] += amp
		})
	}
	return a
}

// diagonalize builds op in sec and diagonalizes it densely with the build's
// backend (eigen.Default: pure Go, or LAPACK with -tags lapack), every
// eigenvalue and, when vectors, every eigenvector; it stops early with
// ctx.Err() when ctx is done (also inside the pure-Go solver; with LAPACK
// before the library call, which then runs to its end). The solver's
// scratch memory (LAPACK's work
// arrays, with vectors as large as the matrix or twice that) comes from
// denseWorkspaces, so the sectors and field points that the workers
// diagonalize one after another reuse it instead of allocating it per call.
//
// keep, when not nil with vectors, chooses from the eigenvalues how many of
// the lowest get their eigenvectors (eigen.Job.VectorsFor; see
// boltzmannVectors): the others cost nothing beyond the eigenvalues.
func diagonalize(ctx context.Context, sys *spinSystem, bs *basisSet, sec *sectorBasis, op *operator, real, vectors bool, keep func([]float64) int) (*sectorSpectrum, error) {
	n := sec.dim()
	out := &sectorSpectrum{sector: sec}
	ws := denseWorkspaces.Get().(*eigen.Workspace)
	defer denseWorkspaces.Put(ws)
	job := eigen.Job{Vectors: vectors}
	if vectors {
		job.VectorsFor = keep
	}
	var err error
	if real {
		out.values, out.vecsR, err = eigen.Default().Symmetric(ctx, denseReal(sys, bs, sec, op), n, job, ws)
	} else {
		out.values, out.vecsC, err = eigen.Default().Hermitian(ctx, denseComplex(sys, bs, sec, op), n, job, ws)
	}
	if vectors && n > 0 {
		out.nvec = (len(out.vecsR) + len(out.vecsC)) / n
	}
	switch {
	case err == nil:
		return out, nil
	case ctx.Err() != nil:
		return nil, ctx.Err()
	}
	return nil, &NumericalError{Sector: sec.label, Detail: err.Error()}
}

// denseWorkspaces holds the dense solvers' scratch memory between calls: one
// workspace per call in flight at most, grown to the largest block it
// served. Idle ones are freed by the garbage collector (sync.Pool), so a
// finished task keeps none for long.
var denseWorkspaces = sync.Pool{New: func() any { return new(eigen.Workspace) }}

// workerCount returns the number of goroutines for jobs independent units.
func workerCount(opt Options, jobs int) int {
	w := opt.Workers
	if w <= 0 {
		w = runtime.GOMAXPROCS(0)
	}
	if w > jobs {
		w = jobs
	}
	if w < 1 {
		w = 1
	}
	return w
}

// parallel runs do(i) for i in order (largest first when weights are given)
// on the workers, stopping at the first error or when ctx is done. progress
// is called after each finished unit.
func parallel(ctx context.Context, jobs int, weight func(int) int, opt Options, stage string, do func(i int) error) error {
	order := make([]int, jobs)
	for i := range order {
		order[i] = i
	}
	if weight != nil {
		sort.SliceStable(order, func(a, b int) bool { return weight(order[a]) > weight(order[b]) })
	}
	w := workerCount(opt, jobs)
	next := make(chan int)
	var mu sync.Mutex
	var firstErr error
	done := 0
	var wg sync.WaitGroup
	for g := 0; g < w; g++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				err := protect(i, do)
				mu.Lock()
				if err != nil && firstErr == nil {
					firstErr = err
				}
				done++
				d := done
				mu.Unlock()
				if opt.Progress != nil && err == nil {
					opt.Progress(stage, d, jobs)
				}
			}
		}()
	}
feed:
	for _, i := range order {
		mu.Lock()
		failed := firstErr != nil
		mu.Unlock()
		if failed {
			break
		}
		select {
		case <-ctx.Done():
			break feed
		case next <- i:
		}
	}
	close(next)
	wg.Wait()
	if firstErr != nil {
		return firstErr
	}
	return ctx.Err()
}

// PanicError is a panic inside the engine's work, returned as an error so
// that one failing task cannot bring down a process that runs many.
type PanicError struct {
	Value any
	Stack string
}

func (e *PanicError) Error() string { return fmt.Sprintf("engine panic: %v", e.Value) }

// protect runs do(i), turning a panic into a *PanicError.
func protect(i int, do func(int) error) (err error) {
	defer func() {
		if r := recover(); r != nil {
			err = &PanicError{Value: r, Stack: string(debug.Stack())}
		}
	}()
	return do(i)
}

// expectations returns <v_k|op|v_k> for every eigenvector k computed (the
// lowest sp.nvec of the sector).
// op must keep the sector (it conserves S^z when the sector has an Sz).
func expectations(sys *spinSystem, bs *basisSet, sp *sectorSpectrum, op *operator) []float64 {
	sec := sp.sector
	nv := sp.nvec // columns of the row-major eigenvector matrix
	out := make([]float64, nv)
	k := make([]int, sys.n)
	for c, x := range sec.states {
		sys.digits(x, k)
		d := op.diagonal(sys, k)
		if sp.vecsR != nil {
			row := sp.vecsR[c*nv : (c+1)*nv]
			if d != 0 {
				for j, u := range row {
					out[j] += d * u * u
				}
			}
			op.apply(sys, x, k, func(y int64, amp complex128) {
				iy := bs.index(y)
				ry := sp.vecsR[iy*nv : (iy+1)*nv]
				a := real(amp)
				for j, u := range row {
					out[j] += a * ry[j] * u
				}
			})
			continue
		}
		row := sp.vecsC[c*nv : (c+1)*nv]
		if d != 0 {
			for j, u := range row {
				out[j] += d * (real(u)*real(u) + imag(u)*imag(u))
			}
		}
		op.apply(sys, x, k, func(y int64, amp complex128) {
			iy := bs.index(y)
			ry := sp.vecsC[iy*nv : (iy+1)*nv]
			for j, u := range row {
				v := amp * u
				out[j] += real(ry[j])*real(v) + imag(ry[j])*imag(v)
			}
		})
	}
	return out
}
