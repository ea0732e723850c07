package eigen

import (
	"math"
	"math/cmplx"

	blasgonum "gonum.org/v1/gonum/blas/gonum"
)

// zb gives the complex level-1 kernels of gonum's BLAS, which run in
// assembly (SSE3) on amd64 for unit strides.
var zb blasgonum.Implementation

// axpy: y += alpha x, over len(x) elements.
func axpy(alpha complex128, x, y []complex128) {
	if len(x) > 0 && alpha != 0 {
		zb.Zaxpy(len(x), alpha, x, 1, y[:len(x)], 1)
	}
}

// dotu returns sum_i x_i y_i (no conjugation), over len(x) elements.
func dotu(x, y []complex128) complex128 {
	if len(x) == 0 {
		return 0
	}
	return zb.Zdotu(len(x), x, 1, y[:len(x)], 1)
}

// hetrdBlock is the panel width of the blocked Householder reduction.
const hetrdBlock = 32

// hetrd reduces the complex Hermitian n x n matrix A (row-major, lower
// triangle a[i*n+j], j <= i, read; the imaginary part of the diagonal
// ignored) to a real symmetric tridiagonal matrix T by a unitary similarity,
//
//	T = Q^H A Q,   Q = Q_{n-1} Q_{n-2} ... Q_1,
//
// with d the diagonal of T (length n) and e its off-diagonal (length n-1,
// e[k-1] = T[k-1][k]). The reduction runs from the last row up. Step k
// (k = n-1, ..., 1) works on the leading (k+1) x (k+1) block and annihilates
// row k left of the subdiagonal. With y = A[0:k, k] (the conjugate of the
// stored row k), the Householder matrix
//
//	H_k = I_k - tau_k v v^H,   v_{k-1} = 1,   H_k^H H_k = I,
//
// is chosen with H_k^H y = beta e_{k-1} and beta REAL (for k = 1 it is a
// pure phase), so Q_k = diag(H_k, I) puts a real number on the subdiagonal
// and T comes out real. The leading k x k block B becomes
//
//	H^H B H = B - v w^H - w v^H,   p = tau B v,   w = p - (1/2) conj(tau) (v^H p) v,
//
// a Hermitian rank-2 update. Updates are gathered over panels of up to
// hetrdBlock steps: inside a panel the current matrix is the stored one minus
// sum_j (v_j w_j^H + w_j v_j^H), so each step needs only its own row brought
// up to date and the product B v corrected by the panel's V and W; the
// stored triangle is updated once per panel by a rank-2nb update. On return
// row k of a holds v[0:k-1] (v_{k-1} = 1 implied) and tau[k] holds tau_k
// (tau[0] is unused); the rest of a is destroyed.
//
// s is polled before every step (one matrix-vector product, at most 4n^2
// real flops) and every pollRows rows inside the product and the panel
// update; hetrd returns errStopped when it fired (a is then garbage).
func hetrd(a []complex128, n int, d, e []float64, tau []complex128, s *stopper) error {
	if n == 0 {
		return nil
	}
	tau[0] = 0
	if n == 1 {
		d[0] = real(a[0])
		return nil
	}
	nb := min(hetrdBlock, n-1)
	// Panel vectors, one per row of length n: V, W and their conjugates.
	vv := make([]complex128, nb*n)
	ww := make([]complex128, nb*n)
	vc := make([]complex128, nb*n)
	wc := make([]complex128, nb*n)
	hv := newHemv(n)

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
				axpy(-vv[j*n+k], wc[j*n:j*n+k+1], row)
				axpy(-ww[j*n+k], vc[j*n:j*n+k+1], row)
			}
			d[k] = real(row[k])
			// Reflector from y = conj(row[0:k]).
			v := vv[c*n : c*n+k]
			for j := range v {
				v[j] = cmplx.Conj(row[j])
			}
			beta, t := reflector(v)
			e[k-1] = beta
			tau[k] = t
			copy(row[:k-1], v[:k-1])
			row[k-1] = complex(beta, 0)

			w := ww[c*n : c*n+k]
			if t == 0 {
				clear(w)
			} else {
				// w = tau (B - sum_j (v_j w_j^H + w_j v_j^H)) v
				hv.mul(a, n, k, v, w, s)
				for j := 0; j < c; j++ {
					s1 := dotu(wc[j*n:j*n+k], v) // w_j^H v
					s2 := dotu(vc[j*n:j*n+k], v) // v_j^H v
					axpy(-s1, vv[j*n:j*n+k], w)
					axpy(-s2, ww[j*n:j*n+k], w)
				}
				zb.Zscal(k, t, w, 1)
				alpha := 0.5 * cmplx.Conj(t) * zb.Zdotc(k, v, 1, w, 1)
				axpy(-alpha, v, w)
			}
			vcr, wcr := vc[c*n:c*n+k], wc[c*n:c*n+k]
			for j := range k {
				vcr[j] = cmplx.Conj(v[j])
				wcr[j] = cmplx.Conj(w[j])
			}
		}
		her2kLower(a, n, top-m+1, m, vv, ww, vc, wc, s)
	}
	if s.stopped() {
		return errStopped
	}
	d[0] = real(a[0])
	return nil
}

// her2kTile is the column tile of the rank-2nb update: the 2nb conjugated
// panel vectors restricted to a tile (2 * 32 * 256 * 16 bytes = 256 KiB) stay
// in the L2 cache while the rows of the tile stream past.
const her2kTile = 256

// her2kLower performs the rank-2m update of the leading kt x kt lower
// triangle of a,
//
//	A[i][j] -= sum_c ( V_c[i] conj(W_c[j]) + W_c[i] conj(V_c[j]) ),   j <= i < kt,
//
// where V_c, W_c are the rows c*n.. of vv, ww and vc, wc their conjugates.
// Each goroutine polls s every pollRows rows and returns early when it fired.
func her2kLower(a []complex128, n, kt, m int, vv, ww, vc, wc []complex128, s *stopper) {
	w := parallelWorkers(kt * kt * m)
	if w <= 1 {
		her2kRows(a, n, 0, kt, m, vv, ww, vc, wc, s)
		return
	}
	bounds := triSplit(kt, w)
	parallelFor(w, func(t int) {
		her2kRows(a, n, bounds[t], bounds[t+1], m, vv, ww, vc, wc, s)
	})
}

// her2kRows does the rows r0 <= i < r1 of her2kLower.
func her2kRows(a []complex128, n, r0, r1, m int, vv, ww, vc, wc []complex128, s *stopper) {
	for j0 := 0; j0 < r1; j0 += her2kTile {
		j1 := min(j0+her2kTile, r1)
		for i := max(j0, r0); i < r1; i++ {
			if (i-r0)%pollRows == 0 && s.stopped() {
				return
			}
			hi := min(i+1, j1)
			row := a[i*n+j0 : i*n+hi]
			for c := 0; c < m; c++ {
				axpy(-vv[c*n+i], wc[c*n+j0:c*n+hi], row)
				axpy(-ww[c*n+i], vc[c*n+j0:c*n+hi], row)
			}
		}
	}
}

// hemv computes p = B v for the leading k x k block B of a Hermitian matrix
// stored as a row-major lower triangle. Row i contributes
//
//	p_i += sum_{j<i} B_ij v_j + B_ii v_i     (a dot product along the row)
//	p_j += conj(B_ij) v_i,  j < i            (kept conjugated: q_j += B_ij conj(v_i))
//
// so each stored element is read once, in memory order. Large products are
// split over goroutines by rows of equal total length, each with its own q.
type hemv struct {
	q [][]complex128
}

func newHemv(n int) *hemv {
	w := parallelWorkers(n * n / 2)
	h := &hemv{q: make([][]complex128, w)}
	for i := range h.q {
		h.q[i] = make([]complex128, n)
	}
	return h
}

// mul sets p = B v (p and v of length k). When s fires it returns early
// with p incomplete.
func (h *hemv) mul(a []complex128, ld, k int, v, p []complex128, s *stopper) {
	w := min(len(h.q), parallelWorkers(k*k/2))
	if w <= 1 {
		q := h.q[0][:k]
		clear(q)
		hemvRows(a, ld, 0, k, v, p, q, s)
		for i := range q {
			p[i] += cmplx.Conj(q[i])
		}
		return
	}
	bounds := triSplit(k, w)
	parallelFor(w, func(t int) {
		r0, r1 := bounds[t], bounds[t+1]
		q := h.q[t][:r1]
		clear(q)
		hemvRows(a, ld, r0, r1, v, p, q, s)
	})
	for t := 0; t < w; t++ {
		q := h.q[t][:bounds[t+1]]
		for i := range q {
			p[i] += cmplx.Conj(q[i])
		}
	}
}

// hemvRows sets p_i for r0 <= i < r1 to the row part of B v and adds the
// conjugated column parts of these rows to q.
func hemvRows(a []complex128, ld, r0, r1 int, v, p, q []complex128, s *stopper) {
	for i := r0; i < r1; i++ {
		if (i-r0)%pollRows == 0 && s.stopped() {
			return
		}
		row := a[i*ld : i*ld+i]
		vi := v[i]
		s := complex(real(a[i*ld+i]), 0) * vi
		if i > 0 {
			s += dotu(row, v)
			axpy(cmplx.Conj(vi), row, q)
		}
		p[i] = s
	}
}

// reflector computes the Householder matrix H = I - tau v v^H with
// H^H y = beta e_last, beta real, for y = (x, alpha) (alpha the LAST entry):
//
//	beta = -sign(Re alpha) sqrt(|alpha|^2 + |x|^2),
//	tau  = (beta - alpha) / beta,
//	v    = (x / (alpha - beta), 1).
//
// y is overwritten by v. If x = 0 and alpha is real, H = I (tau = 0, beta =
// alpha). Tiny beta is rescaled to keep 1/(alpha - beta) finite.
func reflector(y []complex128) (beta float64, tau complex128) {
	k := len(y)
	alpha := y[k-1]
	x := y[:k-1]
	xnorm := 0.0
	if k > 1 {
		xnorm = zb.Dznrm2(k-1, x, 1)
	}
	ar, ai := real(alpha), imag(alpha)
	if xnorm == 0 && ai == 0 {
		y[k-1] = 1
		return ar, 0
	}
	beta = -math.Copysign(hypot3(ar, ai, xnorm), ar)
	const small = safeMin / (2 * unitRoundoff)
	knt := 0
	if math.Abs(beta) < small {
		for {
			knt++
			if k > 1 {
				zb.Zdscal(k-1, 1/small, x, 1)
			}
			beta /= small
			ar /= small
			ai /= small
			if math.Abs(beta) >= small || knt >= 20 {
				break
			}
		}
		if k > 1 {
			xnorm = zb.Dznrm2(k-1, x, 1)
		}
		beta = -math.Copysign(hypot3(ar, ai, xnorm), ar)
	}
	tau = complex((beta-ar)/beta, -ai/beta)
	if k > 1 {
		zb.Zscal(k-1, 1/(complex(ar, ai)-complex(beta, 0)), x, 1)
	}
	for range knt {
		beta *= small
	}
	y[k-1] = 1
	return beta, tau
}

// hypot3 returns sqrt(x^2 + y^2 + z^2) without overflow.
func hypot3(x, y, z float64) float64 {
	x, y, z = math.Abs(x), math.Abs(y), math.Abs(z)
	w := math.Max(x, math.Max(y, z))
	if w == 0 || math.IsInf(w, 0) {
		return x + y + z
	}
	x, y, z = x/w, y/w, z/w
	return w * math.Sqrt(x*x+y*y+z*z)
}
