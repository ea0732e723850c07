package ed

import (
	"fmt"
	"sort"

	"frustum/cluster"
	"frustum/ed/eigen"
)

// workload says what a task will diagonalize, so that its memory can be
// estimated before anything is allocated.
type workload struct {
	dims     []int64 // sector dimensions
	total    int64
	complex  bool
	vectors  bool // eigenvectors are needed
	kubo     bool // full matrix elements of the moment are needed (susceptibility)
	inFlight int  // blocks diagonalized at the same time
	perField bool // each worker holds the largest block (field points in parallel)
}

// memoryEstimate returns the peak bytes of the workload and its largest block:
//
//	basis       12 bytes per state (state list and position table)
//	eigenvalues  8 bytes per state
//	per block   n^2 * e * f, e = 8 (real) or 16 (complex); f = 1.2 for
//	            eigenvalues only, 3 with eigenvectors (matrix, vectors, solver
//	            work: pure Go keeps the matrix and the n^2 vectors, plus the
//	            real n^2 rotations when complex; LAPACK returns the vectors
//	            in the matrix's place and needs 2n^2 reals of work for
//	            dsyevd, or the n^2 complex Z of zheevr), 6 with the
//	            susceptibility's matrix elements
//
// summed over the k blocks that are in flight at once.
func (w workload) memoryEstimate(k int) (need, largest int64) {
	e := 8.0
	if w.complex {
		e = 16
	}
	f := 1.2
	if w.vectors {
		f = 3
	}
	if w.kubo {
		f = 6
	}
	d := append([]int64(nil), w.dims...)
	sort.Slice(d, func(i, j int) bool { return d[i] > d[j] })
	if len(d) > 0 {
		largest = d[0]
	}
	need = 20 * w.total
	if k < 1 {
		k = 1
	}
	for i := 0; i < k; i++ {
		n := largest
		if !w.perField {
			if i >= len(d) {
				break
			}
			n = d[i]
		}
		need += int64(float64(n) * float64(n) * e * f)
	}
	return need, largest
}

// check refuses the workload when even one block at a time exceeds the
// memory limit, and otherwise returns the estimate for one block at a time
// (the figure reported, the same whatever the worker count) and the number
// of workers whose blocks fit in the limit together (at most inFlight).
func (w workload) check(l Limits) (need int64, workers int, err error) {
	limit := l.MaxMemory
	if limit <= 0 {
		limit = DefaultMaxMemory
	}
	need, largest := w.memoryEstimate(1)
	if need > limit {
		return need, 0, &LimitError{Dimension: w.total, LargestSector: largest, Need: need, Limit: limit}
	}
	workers = 1
	for k := 2; k <= w.inFlight; k++ {
		if n, _ := w.memoryEstimate(k); n > limit {
			break
		}
		workers = k
	}
	return need, workers, nil
}

// newWorkload describes diagonalizing every sector of st's basis partition.
func newWorkload(st *setup, opt Options, vectors, kubo, perField bool, fieldPoints int) workload {
	dims := sectorDimensions(st.sys, st.conserveSz)
	w := workload{total: st.sys.total, complex: !st.real, vectors: vectors, kubo: kubo, perField: perField}
	for _, v := range dims {
		w.dims = append(w.dims, v)
	}
	if perField {
		w.inFlight = workerCount(opt, fieldPoints)
	} else {
		w.inFlight = workerCount(opt, len(w.dims))
	}
	return w
}

// checkModel refuses models whose product basis cannot be indexed.
func checkModel(m *cluster.Model) error {
	if m == nil || len(m.Sites) == 0 {
		return &RequestError{Field: "cluster", Reason: "has no sites"}
	}
	d, ok := m.Dimension()
	if !ok || d > 1<<31-1 {
		return &RequestError{Field: "cluster", Reason: fmt.Sprintf("Hilbert space of %d sites is beyond full diagonalization (more than 2^31 states)", len(m.Sites))}
	}
	return nil
}

// report starts the engine report of a workload.
func (w workload) report(st *setup, mem int64) Report {
	r := Report{Method: "full diagonalization", Dimension: w.total, Complex: w.complex, MemoryBytes: mem, Solver: eigen.Solver}
	dims := sectorDimensions(st.sys, st.conserveSz)
	keys := make([]int, 0, len(dims))
	for k := range dims {
		keys = append(keys, k)
	}
	sort.Ints(keys)
	for _, k := range keys {
		if st.conserveSz {
			r.Sectors = append(r.Sectors, Sector{Label: "Sz=" + halfString(k), HasSz: true, Sz: float64(k) / 2, Dimension: int(dims[k])})
		} else {
			r.Sectors = append(r.Sectors, Sector{Label: "all states", Dimension: int(dims[k])})
		}
	}
	return r
}
