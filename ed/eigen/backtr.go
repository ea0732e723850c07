package eigen

import (
	"math/cmplx"
	"runtime"
	"sync"
)

// backBlock is the number of reflectors applied together, backTile the
// widest column tile: a tile of the nb x tile block W = Y^H V takes
// 32 * 128 * 16 bytes = 64 KiB (complex), 32 KiB (real). backMinTile is the
// narrowest tile that a matrix with few columns is split into, so that its
// tiles still spread over the goroutines.
const (
	backBlock   = 32
	backTile    = 128
	backMinTile = 16
)

// backTiles returns the column tile width for a back-transformation of m
// columns and the number of goroutines that share the tiles: tiles of
// backTile columns, or, when that gives fewer tiles than GOMAXPROCS,
// m split evenly over GOMAXPROCS (at least backMinTile columns a tile).
// The tiling does not change the arithmetic of any column.
func backTiles(m int) (tile, workers int) {
	p := runtime.GOMAXPROCS(0)
	tile = backTile
	if m < p*backTile {
		tile = max(backMinTile, (m+p-1)/p)
	}
	tile = max(1, min(tile, m))
	ntiles := (m + tile - 1) / tile
	return tile, max(1, min(p, ntiles))
}

// forTiles runs apply(c0, c1, w) for the column tiles [c0, c1) of width
// tile covering m columns, on the given number of goroutines (worker wk
// taking tiles wk, wk+workers, ...; wbuf[wk] its scratch); serially when
// the work (rows x m) is small.
func forTiles[T float64 | complex128](m, tile, workers, rows int, wbuf [][]T, apply func(c0, c1 int, w []T)) {
	ntiles := (m + tile - 1) / tile
	if workers <= 1 || rows*m < 1<<15 {
		for t := 0; t < ntiles; t++ {
			apply(t*tile, min(t*tile+tile, m), wbuf[0])
		}
		return
	}
	var wg sync.WaitGroup
	for wk := 0; wk < workers; wk++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for t := wk; t < ntiles; t += workers {
				apply(t*tile, min(t*tile+tile, m), wbuf[wk])
			}
		}()
	}
	wg.Wait()
}

// complexWY builds the compact WY form of the block k0 <= k <= k1 of the
// reflectors of hetrd (reflector k in row k of a and tau[k]):
//
//	P = H_{k1} H_{k1-1} ... H_{k0} = I - Y T Y^H,   Y = [v_{k1}, ..., v_{k0}],
//
// Y row-major k1 x r (r = k1-k0+1; column q is v_{k1-q}, supported on rows
// 0..k1-q-1 with a unit last entry) and T upper triangular r x r, built
// column by column as
//
//	T_qq = tau_q,   T[0:q, q] = -tau_q T[0:q, 0:q] (Y[:, 0:q]^H y_q)
//
// (LAPACK's zlarft, forward, column-wise). tmp has length >= r. Cost
// 4 r^2 k1 real flops.
func complexWY(a []complex128, n int, tau []complex128, k0, k1 int, y, t, tmp []complex128) {
	r := k1 - k0 + 1
	clear(y[:k1*r])
	for q := 0; q < r; q++ {
		kk := k1 - q
		for i := 0; i < kk-1; i++ {
			y[i*r+q] = a[kk*n+i]
		}
		y[(kk-1)*r+q] = 1
	}
	clear(t[:r*r])
	for q := 0; q < r; q++ {
		tq := tau[k1-q]
		t[q*r+q] = tq
		if q == 0 || tq == 0 {
			continue
		}
		// tmp[p] = y_p^H y_q over the support of y_q (rows < k1-q).
		clear(tmp[:q])
		for i := 0; i < k1-q; i++ {
			yq := y[i*r+q]
			row := y[i*r : i*r+q]
			for p, yp := range row {
				tmp[p] += cmplx.Conj(yp) * yq
			}
		}
		for p := 0; p < q; p++ {
			var acc complex128
			for l := p; l < q; l++ {
				acc += t[p*r+l] * tmp[l]
			}
			t[p*r+q] = -tq * acc
		}
	}
}

// realWY is complexWY for the real reflectors of sytrd (LAPACK's dlarft):
// P = H_{k1} ... H_{k0} = I - Y T Y^T.
func realWY(a []float64, n int, tau []float64, k0, k1 int, y, t, tmp []float64) {
	r := k1 - k0 + 1
	clear(y[:k1*r])
	for q := 0; q < r; q++ {
		kk := k1 - q
		for i := 0; i < kk-1; i++ {
			y[i*r+q] = a[kk*n+i]
		}
		y[(kk-1)*r+q] = 1
	}
	clear(t[:r*r])
	for q := 0; q < r; q++ {
		tq := tau[k1-q]
		t[q*r+q] = tq
		if q == 0 || tq == 0 {
			continue
		}
		clear(tmp[:q])
		for i := 0; i < k1-q; i++ {
			daxpy(y[i*r+q], y[i*r:i*r+q], tmp[:q])
		}
		for p := 0; p < q; p++ {
			acc := 0.0
			for l := p; l < q; l++ {
				acc += t[p*r+l] * tmp[l]
			}
			t[p*r+q] = -tq * acc
		}
	}
}

// backTransform returns V = Q Z for the real n x n matrix z (row-major) and
// the unitary Q = Q_{n-1} ... Q_1 of hetrd: backTransformCols with m = n.
// If T = Z diag(lambda) Z^T, then A = Q T Q^H has the eigenvectors V = Q Z,
// column k belonging to lambda_k. Cost 8n^3 real flops.
func backTransform(a []complex128, n int, tau []complex128, z []float64, s *stopper) ([]complex128, error) {
	return backTransformCols(a, n, tau, z, n, n, 1, s)
}

// backTransformCols returns V = Q Z, row-major n x m, for the real n x m
// matrix Z, whose entry (i, j) is z[i*rs+j*cs] (row-major: rs = m, cs = 1,
// or the leading m columns of a row-major n x n matrix: rs = n, cs = 1;
// column-major, as stein writes it: rs = 1, cs = n), and the unitary
// Q = Q_{n-1} ... Q_1 of hetrd (reflector k in row k of a and tau[k]).
//
// V = Q_{n-1}(... (Q_1 Z)) is built applying the reflectors in ascending
// order k, backBlock at a time in compact WY form (complexWY): for the
// block k0 <= k <= k1, V <- P V = V - Y (T (Y^H V)), which touches rows
// 0..k1-1 of V only. Each column tile of V (backTiles) is independent, so
// tiles run in parallel. Cost 8 n^2 m real flops (2 x 4 k1 r m per block of
// r reflectors), memory the n x m complex result and O(n) per goroutine.
//
// s is polled every 32 rows of the copy of Z, before every block and every
// pollRows rows of a tile (by each goroutine); backTransformCols returns
// errStopped when it fired.
func backTransformCols(a []complex128, n int, tau []complex128, z []float64, m, rs, cs int, s *stopper) ([]complex128, error) {
	v := make([]complex128, n*m)
	const bs = transposeBlock
	for i0 := 0; i0 < n; i0 += bs {
		if s.stopped() {
			return nil, errStopped
		}
		for j0 := 0; j0 < m; j0 += bs {
			for i := i0; i < min(i0+bs, n); i++ {
				vr := v[i*m : i*m+m]
				for j := j0; j < min(j0+bs, m); j++ {
					vr[j] = complex(z[i*rs+j*cs], 0)
				}
			}
		}
	}
	if n <= 1 || m == 0 {
		return v, nil // Q = I: there are no reflectors
	}
	nb := min(backBlock, n-1)
	y := make([]complex128, n*nb)
	t := make([]complex128, nb*nb)
	tmp := make([]complex128, nb)
	tile, workers := backTiles(m)
	wbuf := make([][]complex128, workers)
	for i := range wbuf {
		wbuf[i] = make([]complex128, nb*tile)
	}

	for k0 := 1; k0 <= n-1; k0 += nb {
		if s.stopped() {
			return nil, errStopped
		}
		k1 := min(k0+nb-1, n-1)
		r := k1 - k0 + 1
		complexWY(a, n, tau, k0, k1, y, t, tmp)
		forTiles(m, tile, workers, k1, wbuf, func(c0, c1 int, w []complex128) {
			cw := c1 - c0
			w = w[:r*cw]
			clear(w)
			// W = Y^H V
			for i := 0; i < k1; i++ {
				if i%pollRows == 0 && s.stopped() {
					return
				}
				vrow := v[i*m+c0 : i*m+c1]
				yrow := y[i*r : i*r+min(r, k1-i)]
				for p, yp := range yrow {
					axpy(cmplx.Conj(yp), vrow, w[p*cw:p*cw+cw])
				}
			}
			// W = T W (upper triangular, in place top-down)
			for q := 0; q < r; q++ {
				wq := w[q*cw : q*cw+cw]
				if dg := t[q*r+q]; dg != 1 {
					zb.Zscal(cw, dg, wq, 1)
				}
				for p := q + 1; p < r; p++ {
					axpy(t[q*r+p], w[p*cw:p*cw+cw], wq)
				}
			}
			// V -= Y W
			for i := 0; i < k1; i++ {
				if i%pollRows == 0 && s.stopped() {
					return
				}
				vrow := v[i*m+c0 : i*m+c1]
				yrow := y[i*r : i*r+min(r, k1-i)]
				for p, yp := range yrow {
					axpy(-yp, w[p*cw:p*cw+cw], vrow)
				}
			}
		})
	}
	if s.stopped() {
		return nil, errStopped
	}
	return v, nil
}

// backTransformReal is backTransformCols for the orthogonal Q of sytrd
// (reflector k in row k of a and tau[k]): it returns V = Q Z, row-major
// n x m, for the real n x m Z read as z[i*rs+j*cs], applying Q without
// forming it (LAPACK's dormtr, side = L), backBlock reflectors at a time in
// compact WY form (realWY), parallel over column tiles. Cost 2 n^2 m flops
// (against 4n^3/3 for the explicit Q of formQ); memory the n x m result and
// O(n) per goroutine. s is polled as in backTransformCols; it returns
// errStopped when it fired.
func backTransformReal(a []float64, n int, tau []float64, z []float64, m, rs, cs int, s *stopper) ([]float64, error) {
	v := make([]float64, n*m)
	const bs = transposeBlock
	for i0 := 0; i0 < n; i0 += bs {
		if s.stopped() {
			return nil, errStopped
		}
		for j0 := 0; j0 < m; j0 += bs {
			for i := i0; i < min(i0+bs, n); i++ {
				vr := v[i*m : i*m+m]
				for j := j0; j < min(j0+bs, m); j++ {
					vr[j] = z[i*rs+j*cs]
				}
			}
		}
	}
	if n <= 1 || m == 0 {
		return v, nil
	}
	nb := min(backBlock, n-1)
	y := make([]float64, n*nb)
	t := make([]float64, nb*nb)
	tmp := make([]float64, nb)
	tile, workers := backTiles(m)
	wbuf := make([][]float64, workers)
	for i := range wbuf {
		wbuf[i] = make([]float64, nb*tile)
	}

	for k0 := 1; k0 <= n-1; k0 += nb {
		if s.stopped() {
			return nil, errStopped
		}
		k1 := min(k0+nb-1, n-1)
		r := k1 - k0 + 1
		realWY(a, n, tau, k0, k1, y, t, tmp)
		forTiles(m, tile, workers, k1, wbuf, func(c0, c1 int, w []float64) {
			applyWYReal(v, m, c0, c1, k1, r, y, t, w, s)
		})
	}
	if s.stopped() {
		return nil, errStopped
	}
	return v, nil
}

// applyWYReal applies P = I - Y T Y^T (realWY's Y, k1 x r, and T) to the
// columns c0..c1-1 of the rows 0..k1-1 of the row-major v (ld columns):
// V <- V - Y (T (Y^T V)), with w (r x (c1-c0)) as scratch. It polls s every
// pollRows rows and returns early, V half updated, when it fired.
func applyWYReal(v []float64, ld, c0, c1, k1, r int, y, t, w []float64, s *stopper) {
	cw := c1 - c0
	w = w[:r*cw]
	clear(w)
	// W = Y^T V
	for i := 0; i < k1; i++ {
		if i%pollRows == 0 && s.stopped() {
			return
		}
		vrow := v[i*ld+c0 : i*ld+c1]
		yrow := y[i*r : i*r+min(r, k1-i)]
		for p, yp := range yrow {
			daxpy(yp, vrow, w[p*cw:p*cw+cw])
		}
	}
	// W = T W (upper triangular, in place top-down)
	for q := 0; q < r; q++ {
		wq := w[q*cw : q*cw+cw]
		if dg := t[q*r+q]; dg != 1 {
			db.Dscal(cw, dg, wq, 1)
		}
		for p := q + 1; p < r; p++ {
			daxpy(t[q*r+p], w[p*cw:p*cw+cw], wq)
		}
	}
	// V -= Y W
	for i := 0; i < k1; i++ {
		if i%pollRows == 0 && s.stopped() {
			return
		}
		vrow := v[i*ld+c0 : i*ld+c1]
		yrow := y[i*r : i*r+min(r, k1-i)]
		for p, yp := range yrow {
			daxpy(-yp, w[p*cw:p*cw+cw], vrow)
		}
	}
}
