package eigen

import (
	"math/cmplx"
	"runtime"
	"sync"
)

// backBlock is the number of reflectors applied together, backTile the
// column tile: a tile of the nb x tile block W = Y^H V takes
// 32 * 128 * 16 bytes = 64 KiB.
const (
	backBlock = 32
	backTile  = 128
)

// backTransform returns V = Q Z for the real n x n matrix z (row-major) and
// the unitary Q = Q_{n-1} ... Q_1 of hetrd (reflector k in row k of a and
// tau[k]). If T = Z diag(lambda) Z^T, then A = Q T Q^H has the eigenvectors
// V = Q Z, column k belonging to lambda_k.
//
// V = Q_{n-1}(... (Q_1 Z)) is built applying the reflectors in ascending
// order k, backBlock at a time in compact WY form: for the block
// k0 <= k <= k1,
//
//	P = H_{k1} H_{k1-1} ... H_{k0} = I - Y T Y^H,   Y = [v_{k1}, ..., v_{k0}],
//
// with T upper triangular, built column by column as
//
//	T_rr = tau_r,   T[0:r, r] = -tau_r T[0:r, 0:r] (Y[:, 0:r]^H y_r),
//
// and V <- P V = V - Y (T (Y^H V)). Each column tile of V is independent,
// so tiles run in parallel. Only rows 0..k1-1 of V are touched by the block.
//
// s is polled before every block and every pollRows rows of a tile (by each
// goroutine); backTransform returns errStopped when it fired.
func backTransform(a []complex128, n int, tau []complex128, z []float64, s *stopper) ([]complex128, error) {
	v := make([]complex128, n*n)
	for i := 0; i < n; i++ {
		if i%pollRows == 0 && s.stopped() {
			return nil, errStopped
		}
		vr := v[i*n : i*n+n]
		for j, x := range z[i*n : i*n+n] {
			vr[j] = complex(x, 0)
		}
	}
	if n <= 1 {
		return v, nil // Q = I: there are no reflectors
	}
	nb := min(backBlock, n-1)
	y := make([]complex128, n*nb)
	t := make([]complex128, nb*nb)
	tmp := make([]complex128, nb)

	workers := runtime.GOMAXPROCS(0)
	ntiles := (n + backTile - 1) / backTile
	workers = max(1, min(workers, ntiles))
	wbuf := make([][]complex128, workers)
	for i := range wbuf {
		wbuf[i] = make([]complex128, nb*min(backTile, n))
	}

	for k0 := 1; k0 <= n-1; k0 += nb {
		if s.stopped() {
			return nil, errStopped
		}
		k1 := min(k0+nb-1, n-1)
		m := k1 - k0 + 1
		// Y (k1 x m, row-major): column r is v_{k1-r}, supported on
		// rows 0..k1-r-1 with a unit last entry.
		clear(y[:k1*m])
		for r := 0; r < m; r++ {
			kk := k1 - r
			for i := 0; i < kk-1; i++ {
				y[i*m+r] = a[kk*n+i]
			}
			y[(kk-1)*m+r] = 1
		}
		// T (m x m upper, row-major).
		clear(t[:m*m])
		for r := 0; r < m; r++ {
			tr := tau[k1-r]
			t[r*m+r] = tr
			if r == 0 || tr == 0 {
				continue
			}
			// tmp[s] = y_s^H y_r over the support of y_r (rows < k1-r).
			clear(tmp[:r])
			for i := 0; i < k1-r; i++ {
				yr := y[i*m+r]
				row := y[i*m : i*m+r]
				for s, ys := range row {
					tmp[s] += cmplx.Conj(ys) * yr
				}
			}
			// T[0:r, r] = -tau_r T[0:r, 0:r] tmp
			for s := 0; s < r; s++ {
				var acc complex128
				for q := s; q < r; q++ {
					acc += t[s*m+q] * tmp[q]
				}
				t[s*m+r] = -tr * acc
			}
		}
		// Apply to every column tile of V.
		apply := func(tile int, w []complex128) {
			c0 := tile * backTile
			c1 := min(c0+backTile, n)
			cw := c1 - c0
			w = w[:m*cw]
			clear(w)
			// W = Y^H V
			for i := 0; i < k1; i++ {
				if i%pollRows == 0 && s.stopped() {
					return
				}
				vrow := v[i*n+c0 : i*n+c1]
				smax := min(m, k1-i)
				yrow := y[i*m : i*m+smax]
				for s, ys := range yrow {
					axpy(cmplx.Conj(ys), vrow, w[s*cw:s*cw+cw])
				}
			}
			// W = T W (upper triangular, in place top-down)
			for r := 0; r < m; r++ {
				wr := w[r*cw : r*cw+cw]
				if d := t[r*m+r]; d != 1 {
					zb.Zscal(cw, d, wr, 1)
				}
				for s := r + 1; s < m; s++ {
					axpy(t[r*m+s], w[s*cw:s*cw+cw], wr)
				}
			}
			// V -= Y W
			for i := 0; i < k1; i++ {
				if i%pollRows == 0 && s.stopped() {
					return
				}
				vrow := v[i*n+c0 : i*n+c1]
				smax := min(m, k1-i)
				yrow := y[i*m : i*m+smax]
				for s, ys := range yrow {
					axpy(-ys, w[s*cw:s*cw+cw], vrow)
				}
			}
		}
		if workers == 1 || k1*n < 1<<15 {
			for tile := 0; tile < ntiles; tile++ {
				apply(tile, wbuf[0])
			}
			continue
		}
		var wg sync.WaitGroup
		for wk := 0; wk < workers; wk++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for tile := wk; tile < ntiles; tile += workers {
					apply(tile, wbuf[wk])
				}
			}()
		}
		wg.Wait()
	}
	if s.stopped() {
		return nil, errStopped
	}
	return v, nil
}
