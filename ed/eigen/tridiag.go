package eigen

import (
	"cmp"
	"math"
	"runtime"
	"slices"

	"gonum.org/v1/gonum/lapack/gonum"
)

// Machine constants of IEEE double precision.
const (
	unitRoundoff = 0x1p-53   // u: fl(x) = x(1+delta), |delta| <= u
	safeMin      = 0x1p-1022 // smallest normal number; 1/safeMin does not overflow
)

// A sweep is a run of plane rotations on consecutive column pairs. The
// rotation (c, s) on the pair (j, j+1) acts on a row-major Z from the right,
// Z <- Z G with
//
//	G restricted to (j, j+1) = [ c  -s ]   so that   z_j'     = c z_j + s z_{j+1}
//	                           [ s   c ]             z_{j+1}' = c z_{j+1} - s z_j
type sweep struct {
	lo, hi int  // the sweep rotates the pairs (j, j+1) for lo <= j < hi
	back   bool // pairs in the order j = hi-1, ..., lo (else lo, ..., hi-1)
	off    int  // index of its first (c, s) pair in rotBuffer.cs
}

// rotBuffer defers the rotations of the tridiagonal QL/QR iteration. The
// iteration on (d, e) never reads Z, so the rotations can be recorded and
// applied later to each row of Z in turn: a row of Z stays in the L1 cache
// while thousands of rotations sweep over it, instead of every rotation
// streaming over the whole of Z with a stride of one row (which for n in the
// thousands also thrashes the TLB).
type rotBuffer struct {
	z      []float64 // row-major, rows x ld
	rows   int
	ld     int
	cs     []float64 // c, s of each rotation, in the order they are applied
	sweeps []sweep
	stop   *stopper // polled every four rows of a flush
}

// rotBufferPairs is the number of rotations gathered before they are applied:
// 16 Ki pairs take 256 KiB and stay in the L2 cache while every row of Z
// streams over them.
const rotBufferPairs = 1 << 14

func newRotBuffer(z []float64, rows, ld int, s *stopper) *rotBuffer {
	if z == nil {
		return nil
	}
	return &rotBuffer{
		z: z, rows: rows, ld: ld, stop: s,
		cs:     make([]float64, 0, 2*min(rotBufferPairs, 2*ld*ld)+2*ld),
		sweeps: make([]sweep, 0, 256),
	}
}

// begin starts a sweep; the caller appends its (c, s) pairs to b.cs.
func (b *rotBuffer) begin() int { return len(b.cs) }

// end closes the sweep started at off and flushes the buffer when full.
func (b *rotBuffer) end(off, lo, hi int, back bool) {
	b.sweeps = append(b.sweeps, sweep{lo: lo, hi: hi, back: back, off: off})
	if len(b.cs) >= 2*rotBufferPairs {
		b.flush()
	}
}

// flush applies the recorded rotations to every row of Z, in parallel over
// rows when the work is large (rows are independent: Z G = [z_i G]_i). When
// the stopper fires, every goroutine returns at its next group of four rows
// and Z is left half rotated (the caller polls the stopper after the flush).
func (b *rotBuffer) flush() {
	if len(b.sweeps) == 0 {
		return
	}
	w := 1
	if b.rows*len(b.cs)/2 >= 1<<21 {
		w = max(1, min(runtime.GOMAXPROCS(0), b.rows/16))
	}
	chunk := ((b.rows+w-1)/w + 3) &^ 3 // whole groups of four rows
	parallelFor(w, func(t int) {
		r0 := min(t*chunk, b.rows)
		b.applyRows(r0, min(r0+chunk, b.rows))
	})
	b.cs = b.cs[:0]
	b.sweeps = b.sweeps[:0]
}

// applyRows applies all recorded sweeps to rows r0..r1-1 of Z, four rows at
// a time: within a row each rotation depends on the previous one (a
// multiply-add latency chain), so four independent rows keep the FPU busy.
func (b *rotBuffer) applyRows(r0, r1 int) {
	ld := b.ld
	r := r0
	for ; r+3 < r1; r += 4 {
		if b.stop.stopped() {
			return
		}
		x := b.z[r*ld : r*ld+ld]
		y := b.z[(r+1)*ld : (r+1)*ld+ld]
		u := b.z[(r+2)*ld : (r+2)*ld+ld]
		v := b.z[(r+3)*ld : (r+3)*ld+ld]
		for _, sw := range b.sweeps {
			cnt := sw.hi - sw.lo
			cs := b.cs[sw.off : sw.off+2*cnt]
			lo, hi := sw.lo, sw.hi+1
			if sw.back {
				rotBack4(x[lo:hi], y[lo:hi], u[lo:hi], v[lo:hi], cs)
			} else {
				rotFwd4(x[lo:hi], y[lo:hi], u[lo:hi], v[lo:hi], cs)
			}
		}
	}
	for ; r+1 < r1; r += 2 {
		x := b.z[r*ld : r*ld+ld]
		y := b.z[(r+1)*ld : (r+1)*ld+ld]
		for _, sw := range b.sweeps {
			cnt := sw.hi - sw.lo
			cs := b.cs[sw.off : sw.off+2*cnt]
			if sw.back {
				rotBack2(x[sw.lo:sw.hi+1], y[sw.lo:sw.hi+1], cs)
			} else {
				rotFwd2(x[sw.lo:sw.hi+1], y[sw.lo:sw.hi+1], cs)
			}
		}
	}
	if r < r1 {
		x := b.z[r*ld : r*ld+ld]
		for _, sw := range b.sweeps {
			cnt := sw.hi - sw.lo
			cs := b.cs[sw.off : sw.off+2*cnt]
			if sw.back {
				rotBack1(x[sw.lo:sw.hi+1], cs)
			} else {
				rotFwd1(x[sw.lo:sw.hi+1], cs)
			}
		}
	}
}

// rotBack4 is rotBack2 on four rows.
func rotBack4(x, y, u, v, cs []float64) {
	m := len(x) - 1
	if m <= 0 || len(y) != m+1 || len(u) != m+1 || len(v) != m+1 || len(cs) != 2*m {
		return
	}
	cx, cy, cu, cv := x[m], y[m], u[m], v[m]
	k := 0
	for j := m - 1; j >= 0; j-- {
		c, s := cs[k], cs[k+1]
		k += 2
		ux, uy, uu, uv := x[j], y[j], u[j], v[j]
		x[j+1] = c*cx - s*ux
		y[j+1] = c*cy - s*uy
		u[j+1] = c*cu - s*uu
		v[j+1] = c*cv - s*uv
		cx = s*cx + c*ux
		cy = s*cy + c*uy
		cu = s*cu + c*uu
		cv = s*cv + c*uv
	}
	x[0], y[0], u[0], v[0] = cx, cy, cu, cv
}

// rotFwd4 is rotFwd2 on four rows.
func rotFwd4(x, y, u, v, cs []float64) {
	m := len(x) - 1
	if m <= 0 || len(y) != m+1 || len(u) != m+1 || len(v) != m+1 || len(cs) != 2*m {
		return
	}
	cx, cy, cu, cv := x[0], y[0], u[0], v[0]
	for j := 0; j < m; j++ {
		c, s := cs[2*j], cs[2*j+1]
		ux, uy, uu, uv := x[j+1], y[j+1], u[j+1], v[j+1]
		x[j] = c*cx + s*ux
		y[j] = c*cy + s*uy
		u[j] = c*cu + s*uu
		v[j] = c*cv + s*uv
		cx = c*ux - s*cx
		cy = c*uy - s*cy
		cu = c*uu - s*cu
		cv = c*uv - s*cv
	}
	x[m], y[m], u[m], v[m] = cx, cy, cu, cv
}

// rotBack2 applies the pairs j = m-1, ..., 0 (m = len(x)-1) to the rows x, y:
// the element z_{j+1} is final after pair j, z_j is carried to pair j-1.
func rotBack2(x, y, cs []float64) {
	m := len(x) - 1
	if m <= 0 || len(y) != m+1 || len(cs) != 2*m {
		return
	}
	cx, cy := x[m], y[m]
	k := 0
	for j := m - 1; j >= 0; j-- {
		c, s := cs[k], cs[k+1]
		k += 2
		ux, uy := x[j], y[j]
		x[j+1] = c*cx - s*ux
		y[j+1] = c*cy - s*uy
		cx = s*cx + c*ux
		cy = s*cy + c*uy
	}
	x[0], y[0] = cx, cy
}

// rotFwd2 applies the pairs j = 0, ..., m-1 to the rows x, y: z_j is final
// after pair j, z_{j+1} is carried to pair j+1.
func rotFwd2(x, y, cs []float64) {
	m := len(x) - 1
	if m <= 0 || len(y) != m+1 || len(cs) != 2*m {
		return
	}
	cx, cy := x[0], y[0]
	for j := 0; j < m; j++ {
		c, s := cs[2*j], cs[2*j+1]
		ux, uy := x[j+1], y[j+1]
		x[j] = c*cx + s*ux
		y[j] = c*cy + s*uy
		cx = c*ux - s*cx
		cy = c*uy - s*cy
	}
	x[m], y[m] = cx, cy
}

func rotBack1(x, cs []float64) {
	m := len(x) - 1
	if m <= 0 || len(cs) != 2*m {
		return
	}
	cx := x[m]
	k := 0
	for j := m - 1; j >= 0; j-- {
		c, s := cs[k], cs[k+1]
		k += 2
		ux := x[j]
		x[j+1] = c*cx - s*ux
		cx = s*cx + c*ux
	}
	x[0] = cx
}

func rotFwd1(x, cs []float64) {
	m := len(x) - 1
	if m <= 0 || len(cs) != 2*m {
		return
	}
	cx := x[0]
	for j := 0; j < m; j++ {
		c, s := cs[2*j], cs[2*j+1]
		ux := x[j+1]
		x[j] = c*cx + s*ux
		cx = c*ux - s*cx
	}
	x[m] = cx
}

// tridiagQL computes all eigenvalues of the real symmetric tridiagonal
// matrix T with diagonal d (length n) and off-diagonal e (length n-1), and
// accumulates the eigenvector rotations into Z (z row-major rows x ld with
// ld >= n; z may be nil for values only). On return d holds the eigenvalues
// ascending and, if z != nil, Z <- Z U with T = U diag(d) U^T, so that with
// Z = I on entry column k of Z is the eigenvector of d[k], and with Z = Q
// (A = Q T Q^T) column k is the eigenvector of A. e is destroyed. It returns
// ErrNoConvergence if some eigenvalue fails to converge within 30 n
// iterations, and errStopped if s fired: s is polled once per sweep (at most
// n rotations) and every four rows of each flush of the rotation buffer (a
// flush is rows x 16 Ki rotations).
//
// The method is the implicitly shifted QL/QR iteration with the Wilkinson
// shift (the eigenvalue of the 2x2 block at the converging end that is
// nearer the end entry). The matrix is split into unreduced blocks wherever
//
//	|e_j| <= u sqrt(|d_j|) sqrt(|d_{j+1}|),
//
// a sub-block is iterated from the end with the smaller diagonal entry (QL
// when that is the top, QR when it is the bottom), an off-diagonal entry is
// taken as converged once
//
//	e_j^2 <= u^2 |d_j| |d_{j+1}| + safe_min,
//
// and a 2x2 block left at the converging end is diagonalized in closed form. One QL sweep on
// rows l..m with shift sigma is the bulge chase
//
//	T - sigma I = Q L,   T' = L Q + sigma I = Q^T T Q,
//
// performed by the rotations G_{m-1}, ..., G_l, each also applied to Z. The
// rotations are deferred in a rotBuffer and applied row by row.
func tridiagQL(d, e []float64, z []float64, rows, ld int, s *stopper) error {
	n := len(d)
	if n <= 1 {
		return nil
	}
	impl := gonum.Implementation{}
	buf := newRotBuffer(z, rows, ld, s)
	const (
		eps  = unitRoundoff
		eps2 = eps * eps
	)
	ssfmax := math.Sqrt(1/safeMin) / 3
	ssfmin := math.Sqrt(safeMin) / eps2
	maxIter := 30 * n
	iter := 0

	for l1 := 0; l1 < n; {
		if l1 > 0 {
			e[l1-1] = 0
		}
		// Find the end m of the unreduced block starting at l1.
		m := l1
		for ; m < n-1; m++ {
			t := math.Abs(e[m])
			if t == 0 {
				break
			}
			if t <= math.Sqrt(math.Abs(d[m]))*math.Sqrt(math.Abs(d[m+1]))*eps {
				e[m] = 0
				break
			}
		}
		l, lend := l1, m
		l1 = m + 1
		if lend == l {
			continue
		}
		// Scale the block into a safe range.
		lsv, lendsv := l, lend
		anorm := 0.0
		for i := l; i < lend; i++ {
			anorm = math.Max(anorm, math.Max(math.Abs(d[i]), math.Abs(e[i])))
		}
		anorm = math.Max(anorm, math.Abs(d[lend]))
		if anorm == 0 {
			continue
		}
		scale := 1.0
		if anorm > ssfmax {
			scale = ssfmax / anorm
		} else if anorm < ssfmin {
			scale = ssfmin / anorm
		}
		if scale != 1 {
			for i := l; i < lend; i++ {
				d[i] *= scale
				e[i] *= scale
			}
			d[lend] *= scale
		}
		// Iterate from the end with the smaller diagonal entry.
		if math.Abs(d[lend]) < math.Abs(d[l]) {
			l, lend = lend, l
		}
		if lend > l {
			// QL iteration: eigenvalues converge at the top, l.
			for l <= lend {
				m := l
				for ; m < lend; m++ {
					t := math.Abs(e[m])
					if t*t <= (eps2*math.Abs(d[m]))*math.Abs(d[m+1])+safeMin {
						break
					}
				}
				if m < lend {
					e[m] = 0
				}
				p := d[l]
				if m == l {
					l++
					continue
				}
				if m == l+1 {
					rt1, rt2, c, s := impl.Dlaev2(d[l], e[l], d[l+1])
					if buf != nil {
						off := buf.begin()
						buf.cs = append(buf.cs, c, s)
						buf.end(off, l, l+1, true)
					}
					d[l], d[l+1], e[l] = rt1, rt2, 0
					l += 2
					continue
				}
				if iter == maxIter {
					return ErrNoConvergence
				}
				iter++
				if s.stopped() {
					return errStopped
				}
				// Wilkinson shift.
				g := (d[l+1] - p) / (2 * e[l])
				r := math.Hypot(g, 1)
				g = d[m] - p + e[l]/(g+math.Copysign(r, g))
				s, c := 1.0, 1.0
				p = 0
				off := 0
				if buf != nil {
					off = buf.begin()
				}
				for i := m - 1; i >= l; i-- {
					f := s * e[i]
					b := c * e[i]
					c, s, r = impl.Dlartg(g, f)
					if i != m-1 {
						e[i+1] = r
					}
					g = d[i+1] - p
					r = (d[i]-g)*s + 2*c*b
					p = s * r
					d[i+1] = g + p
					g = c*r - b
					if buf != nil {
						buf.cs = append(buf.cs, c, -s)
					}
				}
				if buf != nil {
					buf.end(off, l, m, true)
				}
				d[l] -= p
				e[l] = g
			}
		} else {
			// QR iteration: eigenvalues converge at the bottom, l.
			for l >= lend {
				m := l
				for ; m > lend; m-- {
					t := math.Abs(e[m-1])
					if t*t <= (eps2*math.Abs(d[m-1]))*math.Abs(d[m])+safeMin {
						break
					}
				}
				if m > lend {
					e[m-1] = 0
				}
				p := d[l]
				if m == l {
					l--
					continue
				}
				if m == l-1 {
					rt1, rt2, c, s := impl.Dlaev2(d[l-1], e[l-1], d[l])
					if buf != nil {
						off := buf.begin()
						buf.cs = append(buf.cs, c, s)
						buf.end(off, l-1, l, false)
					}
					d[l-1], d[l], e[l-1] = rt1, rt2, 0
					l -= 2
					continue
				}
				if iter == maxIter {
					return ErrNoConvergence
				}
				iter++
				if s.stopped() {
					return errStopped
				}
				g := (d[l-1] - p) / (2 * e[l-1])
				r := math.Hypot(g, 1)
				g = d[m] - p + e[l-1]/(g+math.Copysign(r, g))
				s, c := 1.0, 1.0
				p = 0
				off := 0
				if buf != nil {
					off = buf.begin()
				}
				for i := m; i < l; i++ {
					f := s * e[i]
					b := c * e[i]
					c, s, r = impl.Dlartg(g, f)
					if i != m {
						e[i-1] = r
					}
					g = d[i] - p
					r = (d[i+1]-g)*s + 2*c*b
					p = s * r
					d[i] = g + p
					g = c*r - b
					if buf != nil {
						buf.cs = append(buf.cs, c, s)
					}
				}
				if buf != nil {
					buf.end(off, m, l, false)
				}
				d[l] -= p
				e[l-1] = g
			}
		}
		if scale != 1 {
			for i := lsv; i <= lendsv; i++ {
				d[i] /= scale
			}
		}
	}
	if buf != nil {
		buf.flush()
	}
	if s.stopped() {
		return errStopped
	}
	return sortEigen(d, z, rows, ld, s)
}

// sortEigen sorts d ascending and permutes the columns of Z alike, polling s
// every pollRows rows of Z (it returns errStopped when s fired).
func sortEigen(d []float64, z []float64, rows, ld int, s *stopper) error {
	n := len(d)
	sorted := true
	for i := 1; i < n; i++ {
		if d[i] < d[i-1] {
			sorted = false
			break
		}
	}
	if sorted {
		return nil
	}
	perm := make([]int, n)
	for i := range perm {
		perm[i] = i
	}
	slices.SortStableFunc(perm, func(a, b int) int { return cmp.Compare(d[a], d[b]) })
	nd := make([]float64, n)
	for k, p := range perm {
		nd[k] = d[p]
	}
	copy(d, nd)
	if z == nil {
		return nil
	}
	tmp := nd // reused as a row buffer
	for r := 0; r < rows; r++ {
		if r%pollRows == 0 && s.stopped() {
			return errStopped
		}
		row := z[r*ld : r*ld+n]
		for k, p := range perm {
			tmp[k] = row[p]
		}
		copy(row, tmp)
	}
	return nil
}

// tridiagValues overwrites d with the eigenvalues (ascending) of the
// symmetric tridiagonal matrix (d, e), destroying e, by the root-free sterf.
func tridiagValues(d, e []float64, s *stopper) error {
	return sterf(d, e, s)
}
