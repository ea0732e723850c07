package eigen

import (
	"runtime"

	blasgonum "gonum.org/v1/gonum/blas/gonum"
	lapackgonum "gonum.org/v1/gonum/lapack/gonum"
)

// db gives the real level-1 kernels of gonum's BLAS (assembly on amd64 for
// unit strides), lpk gonum's LAPACK port.
var (
	db  blasgonum.Implementation
	lpk lapackgonum.Implementation
)

// daxpy: y += alpha x, over len(x) elements.
func daxpy(alpha float64, x, y []float64) {
	if len(x) > 0 && alpha != 0 {
		db.Daxpy(len(x), alpha, x, 1, y[:len(x)], 1)
	}
}

// ddot returns sum_i x_i y_i over len(x) elements.
func ddot(x, y []float64) float64 {
	if len(x) == 0 {
		return 0
	}
	return db.Ddot(len(x), x, 1, y[:len(x)], 1)
}

// sytrd is hetrd for a real symmetric matrix: it reduces the n x n matrix A
// (row-major, lower triangle a[i*n+j], j <= i, read) to the symmetric
// tridiagonal T = Q^T A Q, Q = Q_{n-1} ... Q_1, Q_k = diag(H_k, I),
// H_k = I - tau_k v v^T (v of length k, v_{k-1} = 1), by the same blocked
// bottom-up Householder reduction with rank-2nb panel updates as hetrd, on
// the same storage: d the diagonal, e the off-diagonal (e[k-1] = T[k-1][k]),
// row k of a holds v[0:k-1] on return and tau[k] holds tau_k (tau[0] = 0).
// The reflectors are LAPACK's (Dlarfg: H_k y = beta e_{k-1}, y = A[0:k, k]).
//
// Against gonum's Dsytrd (Dlatrd panels + Dsyr2k, lower: its reflectors are
// columns of the row-major array, so each step streams the trailing matrix
// with a matrix-vector product on strided vectors) this works on rows: the
// reflector of step k is the contiguous row k, and the product B v reads the
// stored triangle once, in memory order, on up to GOMAXPROCS goroutines.
//
// s is polled before every step (one matrix-vector product, at most n^2
// flops) and every pollRows rows inside the product and the panel update;
// sytrd returns errStopped when it fired (a is then garbage).
func sytrd(a []float64, n int, d, e, tau []float64, s *stopper) error {
	if n == 0 {
		return nil
	}
	tau[0] = 0
	if n == 1 {
		d[0] = a[0]
		return nil
	}
	nb := min(hetrdBlock, n-1)
	vv := make([]float64, nb*n) // panel reflectors, one per row of length n
	ww := make([]float64, nb*n)
	sv := newSymv(n)

	for top := n - 1; top >= 1; top -= nb {
		m := min(nb, top) // panel steps k = top, ..., top-m+1
		for c := 0; c < m; c++ {
			if s.stopped() {
				return errStopped
			}
			k := top - c
			row := a[k*n : k*n+k+1]
			// Bring row k (with its diagonal) up to date with the panel.
			for j := 0; j < c; j++ {
				daxpy(-vv[j*n+k], ww[j*n:j*n+k+1], row)
				daxpy(-ww[j*n+k], vv[j*n:j*n+k+1], row)
			}
			d[k] = row[k]
			// Reflector from y = row[0:k], alpha = y[k-1].
			v := vv[c*n : c*n+k]
			copy(v, row[:k])
			beta, t := lpk.Dlarfg(k, v[k-1], v[:k-1], 1)
			v[k-1] = 1
			e[k-1] = beta
			tau[k] = t
			copy(row[:k-1], v[:k-1])
			row[k-1] = beta

			w := ww[c*n : c*n+k]
			if t == 0 {
				clear(w)
				continue
			}
			// w = tau (B - sum_j (v_j w_j^T + w_j v_j^T)) v, then
			// w -= (tau/2) (v^T w) v.
			sv.mul(a, n, k, v, w, s)
			for j := 0; j < c; j++ {
				s1 := ddot(ww[j*n:j*n+k], v)
				s2 := ddot(vv[j*n:j*n+k], v)
				daxpy(-s1, vv[j*n:j*n+k], w)
				daxpy(-s2, ww[j*n:j*n+k], w)
			}
			db.Dscal(k, t, w, 1)
			daxpy(-0.5*t*ddot(v, w), v, w)
		}
		syr2kLower(a, n, top-m+1, m, vv, ww, s)
	}
	if s.stopped() {
		return errStopped
	}
	d[0] = a[0]
	return nil
}

// syr2kTile is the column tile of the real rank-2nb update: the 2nb panel
// vectors restricted to a tile (2 * 32 * 512 * 8 bytes = 256 KiB) stay in
// the L2 cache while the rows of the tile stream past.
const syr2kTile = 512

// syr2kLower performs A[i][j] -= sum_c (V_c[i] W_c[j] + W_c[i] V_c[j]) on
// the leading kt x kt lower triangle of a (V_c, W_c the rows c*n.. of vv,
// ww), on up to GOMAXPROCS goroutines; each polls s every pollRows rows.
func syr2kLower(a []float64, n, kt, m int, vv, ww []float64, s *stopper) {
	w := parallelWorkers(kt * kt * m / 2)
	if w <= 1 {
		syr2kRows(a, n, 0, kt, m, vv, ww, s)
		return
	}
	bounds := triSplit(kt, w)
	parallelFor(w, func(t int) {
		syr2kRows(a, n, bounds[t], bounds[t+1], m, vv, ww, s)
	})
}

// syr2kRows does the rows r0 <= i < r1 of syr2kLower.
func syr2kRows(a []float64, n, r0, r1, m int, vv, ww []float64, s *stopper) {
	for j0 := 0; j0 < r1; j0 += syr2kTile {
		j1 := min(j0+syr2kTile, r1)
		for i := max(j0, r0); i < r1; i++ {
			if (i-r0)%pollRows == 0 && s.stopped() {
				return
			}
			hi := min(i+1, j1)
			row := a[i*n+j0 : i*n+hi]
			for c := 0; c < m; c++ {
				daxpy(-vv[c*n+i], ww[c*n+j0:c*n+hi], row)
				daxpy(-ww[c*n+i], vv[c*n+j0:c*n+hi], row)
			}
		}
	}
}

// symv computes p = B v for the leading k x k block B of a symmetric matrix
// stored as a row-major lower triangle, as hemv does for a Hermitian one:
// row i gives p_i += sum_{j<=i} B_ij v_j (a dot product along the row) and
// q_j += B_ij v_i for j < i, so every stored element is read once, in memory
// order; large products are split over goroutines by rows of equal total
// length, each with its own q.
type symv struct {
	q [][]float64
}

func newSymv(n int) *symv {
	w := parallelWorkers(n * n / 4)
	h := &symv{q: make([][]float64, w)}
	for i := range h.q {
		h.q[i] = make([]float64, n)
	}
	return h
}

// mul sets p = B v (p and v of length k). When s fires it returns early
// with p incomplete.
func (h *symv) mul(a []float64, ld, k int, v, p []float64, s *stopper) {
	w := min(len(h.q), parallelWorkers(k*k/4))
	if w <= 1 {
		q := h.q[0][:k]
		clear(q)
		symvRows(a, ld, 0, k, v, p, q, s)
		for i, x := range q {
			p[i] += x
		}
		return
	}
	bounds := triSplit(k, w)
	parallelFor(w, func(t int) {
		r0, r1 := bounds[t], bounds[t+1]
		q := h.q[t][:r1]
		clear(q)
		symvRows(a, ld, r0, r1, v, p, q, s)
	})
	for t := 0; t < w; t++ {
		q := h.q[t][:bounds[t+1]]
		for i, x := range q {
			p[i] += x
		}
	}
}

// symvRows sets p_i for r0 <= i < r1 to the row part of B v and adds the
// column parts of these rows to q.
func symvRows(a []float64, ld, r0, r1 int, v, p, q []float64, s *stopper) {
	for i := r0; i < r1; i++ {
		if (i-r0)%pollRows == 0 && s.stopped() {
			return
		}
		row := a[i*ld : i*ld+i]
		vi := v[i]
		sum := a[i*ld+i] * vi
		if i > 0 {
			sum += ddot(row, v)
			daxpy(vi, row, q)
		}
		p[i] = sum
	}
}

// formQ returns the explicit orthogonal Q = Q_{n-1} ... Q_1 of sytrd
// (reflector k in row k of a and tau[k]) as a row-major n x n matrix: LAPACK's
// Dorgtr, for this package's storage.
//
// Q = Q_{n-1}(... (Q_1 I)) is built from I applying the reflectors in
// ascending order k, backBlock at a time in compact WY form (realWY and
// applyWYReal, as backTransformReal): for the block k0 <= k <= k1,
//
//	P = H_{k1} ... H_{k0} = I - Y T Y^T,   Y = [v_{k1}, ..., v_{k0}],
//
// V <- P V = V - Y (T (Y^T V)). Before the block, V differs from I only in
// its leading (k0-1) x (k0-1) block, and P touches rows 0..k1-1 only, so
// only the leading k1 x k1 block of V changes: the cost is 4 m k1^2 flops for
// a block of m reflectors, 4n^3/3 in all, as for Dorgtr. The column tiles of
// that block are independent and run in parallel; s is polled before every
// block and every pollRows rows of a tile, and formQ returns errStopped when
// it fired.
func formQ(a []float64, n int, tau []float64, s *stopper) ([]float64, error) {
	v := make([]float64, n*n)
	for i := 0; i < n; i++ {
		v[i*n+i] = 1
	}
	if n <= 1 {
		return v, nil
	}
	nb := min(backBlock, n-1)
	y := make([]float64, n*nb)
	t := make([]float64, nb*nb)
	tmp := make([]float64, nb)

	maxWorkers := max(1, min(runtime.GOMAXPROCS(0), (n+backTile-1)/backTile))
	wbuf := make([][]float64, maxWorkers)
	for i := range wbuf {
		wbuf[i] = make([]float64, nb*min(backTile, n))
	}

	for k0 := 1; k0 <= n-1; k0 += nb {
		if s.stopped() {
			return nil, errStopped
		}
		k1 := min(k0+nb-1, n-1)
		r := k1 - k0 + 1
		realWY(a, n, tau, k0, k1, y, t, tmp)
		cols := k1 // columns >= k1 of V are still unit vectors, fixed by P
		ntiles := (cols + backTile - 1) / backTile
		forTiles(cols, backTile, min(maxWorkers, ntiles), k1, wbuf, func(c0, c1 int, w []float64) {
			applyWYReal(v, n, c0, c1, k1, r, y, t, w, s)
		})
	}
	if s.stopped() {
		return nil, errStopped
	}
	return v, nil
}
