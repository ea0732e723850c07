package lanczos

import (
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"sort"
	"unsafe"
)

// Partial reorthogonalization (Simon, Math. Comp. 42, 115 (1984); Larsen,
// PROPACK, DAIMI PB-537 (1998)). With the Lanczos relation
//
//	H v_k = sum_{l <= b} T[l, k] v_l + beta_b v_{b+1} delta_{kb} + f_k,
//
// f_k of the size of rounding, the inner products omega[i, k] = <v_i, v_k>
// of the active basis obey, from <v_b, H v_k> = <H v_b, v_k>,
//
//	beta_b omega[b+1, k] = sum_{l < b} T[l, k] omega[b, l]
//	                      - sum_{l <= b, l != k} T[l, b] omega[l, k] + theta_bk,
//
// for k < b, with omega[i, i] = 1 and a rounding term theta_bk. For a
// tridiagonal T this is Simon's recurrence; after a thick restart T has an
// arrow row and the same formula applies as it stands. The rounding term is
// modelled as 2 eps1 ||H|| with the sign of the rest. PROPACK takes eps1 =
// sqrt(n) eps/2, a bound for dense products; for the sparse operators here
// that made the estimates exceed the measured overlaps by 10^3 and
// reorthogonalize every few steps, while eps1 = eps still kept the largest
// measured overlap below the trigger level (TestPartialSemiOrthogonality
// measures it). The overlaps with the vectors subtracted in the step itself
// (the couplings of v_b, v_b and the locked vectors) are measured in the
// pass that subtracts them instead.
//
// When an estimate exceeds omegaMax = min(sqrt(eps), Tol/100), the new
// vector is orthogonalized against every active vector whose estimate
// exceeds omegaSelect = max(omegaMax eps^(1/4), 8 eps1) (PROPACK's ratio of
// the two levels; classical Gram-Schmidt, a second round when the norm
// falls below 1/sqrt(2) of what it was: Daniel, Gragg, Kaufman and Stewart,
// Math. Comp. 30, 772 (1976)), and so is the next vector, against the same
// vectors and those of its own estimates above omegaSelect. This keeps the
// basis semi-orthogonal, which is enough for T to be the projection of H
// onto the span of the basis to working precision (Simon), so that no
// spurious copies of converged eigenvalues appear. The components removed,
// beta omega, are not recorded in T; Simon's sqrt(eps) would leave errors
// of 1e-8 beta in the Lanczos relation of the kept Ritz vectors after a
// thick restart, and Tol/100 keeps them below the tolerance.
//
// At a thick restart the Gram matrix of the kept Ritz vectors and the next
// vector is measured in the pass that forms them and replaces the
// estimates, so the recurrence restarts from the true overlaps; settle
// replaces kept vectors that have drifted from orthonormality.

const (
	eps     = 0x1p-52 // machine epsilon of float64
	sqrtEps = 0x1p-26
	// etaSelect is eps^(3/4), PROPACK's selection level; here the least
	// deviation from orthonormality of kept vectors that settle acts on.
	etaSelect = 1.8189894035458565e-12
	// orthoTol and normTol: Ritz vectors formed from a semi-orthogonal basis
	// whose overlaps or norms deviate more than this are orthonormalized
	// (normalized) before they are checked and returned.
	orthoTol = 1e-13
	normTol  = 1e-14
)

// ovl is the value of an overlap in the omega recurrence: itself for real
// T, its modulus for complex T.
func ovl[T Scalar](z T) float64 {
	if isComplex[T]() {
		return cmplx.Abs(complexes([]T{z})[0])
	}
	return realPart(z)
}

// modulus returns |z|.
func modulus[T Scalar](z T) float64 { return math.Sqrt(abs2(z)) }

// abs2 returns |z|^2.
func abs2[T Scalar](z T) float64 {
	f := floats([]T{z})
	var s float64
	for _, x := range f {
		s += x * x
	}
	return s
}

// stepPartial applies H to q = v[nl+b] and runs the three-term recurrence:
// one pass for alpha = <q, H q> and the components along the locked
// vectors (none when there are no locked vectors and the operator is a
// DotOperator: the product returns alpha), one that subtracts them and the
// couplings of q and measures the overlaps that are left, one that
// normalizes. The locked vectors are not part of the Lanczos relation
// (their residuals are not rounding), so they are always subtracted. A
// reorthogonalization against the active basis follows when the omega
// estimates call for it.
func (s *lowest[T]) stepPartial() error {
	if err := s.ctx.Err(); err != nil {
		return err
	}
	b, nl, ld := s.b, s.nl, s.ld
	j := nl + b
	q, dst := s.v[j], s.slot(j+1)
	first := append(s.list[:0], s.v[:nl]...)
	first = append(first, q)
	c := s.c1[:nl+1]
	var h2 float64
	if s.dotOp != nil && nl == 0 {
		dot, n2, err := s.dotOp.ApplyDot(s.ctx, dst, q)
		if err != nil {
			return fmt.Errorf("lanczos: apply: %w", err)
		}
		c[0], h2 = fromReal[T](dot), n2
	} else {
		if err := s.op.Apply(s.ctx, dst, q); err != nil {
			return fmt.Errorf("lanczos: apply: %w", err)
		}
		h2 = dotMany(&s.ws, first, dst, c)
	}
	s.mv++
	if math.IsNaN(h2) || math.IsInf(h2, 0) {
		return errors.New("lanczos: operator produced a non-finite vector")
	}
	s.hnorm = max(s.hnorm, math.Sqrt(h2))
	alpha := realPart(c[nl])

	sub := first[:nl]
	coef := append(s.coef[:0], c[:nl]...)
	coupled := s.coupled[:0]
	for l, tl := range s.t[b*ld : b*ld+b] {
		if tl != 0 {
			sub = append(sub, s.v[nl+l])
			coef = append(coef, fromReal[T](tl))
			coupled = append(coupled, l)
		}
	}
	sub = append(sub, q)
	coef = append(coef, fromReal[T](alpha))
	coupled = append(coupled, b)
	d := s.c2[:len(sub)]
	w0 := recurrence(&s.ws, sub, coef, dst, d)

	s.t[b*ld+b] = alpha
	s.b++
	nb := s.b
	row := s.t[nb*ld : nb*ld+nb]
	clear(row)
	beta := math.Sqrt(w0)
	if !(beta > breakdownTol*s.hnorm) {
		s.invariantFound()
		return nil
	}

	next := s.om[nb*ld : nb*ld+nb]
	s.estimateOmega(b, beta, coupled, next)
	local := 0.0 // largest measured overlap left, relative to beta
	for i := range nl {
		local = max(local, modulus(d[i])/beta)
	}
	for i, l := range coupled {
		next[l] = ovl(d[nl+i]) / beta
		local = max(local, math.Abs(next[l]))
	}
	worst := 0.0
	for _, x := range next {
		worst = max(worst, math.Abs(x))
	}

	forced := s.force
	switch {
	case forced || worst > s.omegaMax:
		r := append(s.list[:0], s.v[:nl]...)
		qat := -1
		for k := range nb {
			s.sel[k] = (forced && s.sel[k]) || math.Abs(next[k]) > s.omegaSelect
			if s.sel[k] {
				if k == b {
					qat = len(r)
				}
				r = append(r, s.v[nl+k])
			}
		}
		c1, c2 := s.c1[:len(r)], s.c2[:len(r)]
		dotMany(&s.ws, r, dst, c1)
		w1 := update(&s.ws, r, c1, dst, nil, nil)
		if qat >= 0 {
			s.t[b*ld+b] += realPart(c1[qat])
		}
		if w1 < 0.5*w0 {
			dotMany(&s.ws, r, dst, c2)
			w2 := update(&s.ws, r, c2, dst, nil, nil)
			if qat >= 0 {
				s.t[b*ld+b] += realPart(c2[qat])
			}
			// Twice is enough: a second round that removes a sizeable part
			// of what the first left says the vector is in the span.
			if w2 < 0.49*w1 {
				s.invariantFound()
				return nil
			}
			w1 = w2
		}
		beta = math.Sqrt(w1)
		if !(beta > breakdownTol*s.hnorm) {
			s.invariantFound()
			return nil
		}
		for k := range nb {
			if s.sel[k] {
				next[k] = s.eps1
			}
		}
		s.reorths++
		s.force = !forced
		if forced {
			clear(s.sel)
		}
		scale(dst, 1/beta)
	case local > s.omegaSelect:
		// A second round against the vectors just subtracted, in the pass
		// that normalizes.
		var r2 float64
		for _, z := range d {
			r2 += abs2(z)
		}
		if r2 > 0.51*w0 {
			s.invariantFound()
			return nil
		}
		beta = math.Sqrt(w0 - r2)
		if !(beta > breakdownTol*s.hnorm) {
			s.invariantFound()
			return nil
		}
		s.t[b*ld+b] += realPart(d[len(d)-1])
		subtractScale(sub, d, dst, 1/beta)
		for _, l := range coupled {
			next[l] = s.eps1
		}
	default:
		scale(dst, 1/beta)
	}
	row[b] = beta
	return nil
}

// invariantFound records that the Krylov space is invariant to rounding.
// The rest of the run reorthogonalizes fully: the random vector that
// continues the basis is orthogonal to an invariant subspace only to the
// breakdown tolerance, which the omega model does not describe.
func (s *lowest[T]) invariantFound() {
	s.invariant = true
	s.full = true
}

// estimateOmega sets next[k], k < b, to the estimates of <v[nl+b+1],
// v[nl+k]> for the new vector of norm beta (before normalization), from the
// rows of om and the couplings of v[nl+b] (coupled: the l <= b with T[l, b]
// != 0, b included).
func (s *lowest[T]) estimateOmega(b int, beta float64, coupled []int, next []float64) {
	ld := s.ld
	t, om := s.t, s.om
	tt := func(i, k int) float64 {
		if i < k {
			i, k = k, i
		}
		return t[i*ld+k]
	}
	og := func(i, k int) float64 {
		if i == k {
			return 1
		}
		if i < k {
			i, k = k, i
		}
		return om[i*ld+k]
	}
	noise := 2 * s.eps1 * s.hnorm
	rowB := om[b*ld : b*ld+b]
	for k := range b {
		var x float64
		for l, o := range rowB {
			if tlk := tt(l, k); tlk != 0 {
				x += tlk * o
			}
		}
		for _, l := range coupled {
			if l != k {
				x -= tt(l, b) * og(l, k)
			}
		}
		next[k] = (x + math.Copysign(noise, x)) / beta
	}
}

// restartOmega replaces the estimates of the restarted basis by the Gram
// matrix measured when the kk kept Ritz vectors were formed (gram, row
// stride kk+1; row kk holds the overlaps with the next vector when next).
func (s *lowest[T]) restartOmega(kk int, gram []T, next bool) {
	ld, k1 := s.ld, kk+1
	for a := range kk {
		for c := range a {
			s.om[a*ld+c] = ovl(gram[a*k1+c])
		}
	}
	for c := range kk {
		if next {
			s.om[kk*ld+c] = ovl(gram[kk*k1+c])
		} else {
			s.om[kk*ld+c] = s.eps1
		}
	}
	s.force = false
	clear(s.sel)
}

// tidy makes Ritz vectors formed from a semi-orthogonal basis orthonormal:
// gram (row stride st) is their Gram matrix, measured when they were
// formed. If two of them overlap by more than orthoTol they are
// orthonormalized in order by classical Gram-Schmidt twice, otherwise only
// normalized where needed. Converged Ritz vectors overlap by at most about
// their residuals over the gap between their values, so the change is of
// that order; the explicit check that follows measures the result.
func (s *lowest[T]) tidy(ys [][]T, gram []T, st int) {
	worst := 0.0
	for a := range ys {
		for c := range a {
			worst = max(worst, modulus(gram[a*st+c]))
		}
	}
	if worst > orthoTol {
		for a, y := range ys {
			n2 := realPart(gram[a*st+a])
			if a > 0 {
				prev := ys[:a]
				c1, c2 := s.c1[:a], s.c2[:a]
				dotMany(&s.ws, prev, y, c1)
				subtract(&s.ws, prev, c1, y, c2)
				n2 = subtract(&s.ws, prev, c2, y, nil)
			}
			scale(y, 1/math.Sqrt(n2))
		}
		return
	}
	for a, y := range ys {
		if g := realPart(gram[a*st+a]); math.Abs(g-1) > normTol {
			scale(y, 1/math.Sqrt(g))
		}
	}
}

// settle follows the combine of a restart with Partial: gram (row stride
// kk+1) is the measured Gram matrix of the kept Ritz vectors y = v[nl:nl+kk]
// and, when next, of the next vector r = v[nl+b]. The kept vectors inherit
// the semi-orthogonality of the basis they come from; the omega estimates
// restart from the measured overlaps, which is all that is needed while
// they stay at the level of omegaMax. If they deviate from orthonormality
// by more than settleTol = max(eps^(3/4), 10 omegaMax), a safety net, they
// are replaced by an orthonormal basis of their span that keeps the arrow
// form: with Z = [y r] = Q R (Cholesky of the Gram matrix), the relation
// H y = y Theta + r s^T becomes
//
//	H Q_1 = Q_1 A + q (R_22 s^T R_11^-1),   A = (R_11 Theta + R_12 s^T) R_11^-1,
//
// and the eigenvectors X of A (Jacobi) give the new kept vectors Q_1 X
// with values the eigenvalues of A, the new next vector q and the
// couplings R_22 s^T R_11^-1 X, made real by a phase of each vector.
// theta[:kk] and coupling are updated. A = Q_1^H H Q_1 is Hermitian up to
// the errors of the relations (the components that reorthogonalization
// removed), so its two triangles differ by them; each pair of entries is
// taken from the better converged vector of the two (the smaller
// coupling), whose relation is the accurate one, so that the errors of
// unconverged vectors do not spread into converged ones.
func (s *lowest[T]) settle(kk int, theta, coupling []float64, gram []T, next bool) error {
	k1 := kk + 1
	nz := kk
	if next {
		nz = k1
	}
	worst := 0.0
	for a := range nz {
		for c := 0; c <= a; c++ {
			if a == kk && c == kk {
				continue // r is a unit vector
			}
			g := gram[a*k1+c]
			if a == c {
				worst = max(worst, math.Abs(realPart(g)-1))
			} else {
				worst = max(worst, modulus(g))
			}
		}
	}
	if worst <= s.settleTol {
		s.restartOmega(kk, gram, next)
		return nil
	}
	// G[i][j] = <z_i, z_j>.
	g := make([]complex128, nz*nz)
	for a := range nz {
		for c := 0; c <= a; c++ {
			var z complex128
			if a == kk {
				if c == kk {
					z = 1
				} else {
					z = toComplex(gram[kk*k1+c]) // <y_c, r>
				}
			} else {
				z = toComplex(gram[a*k1+c]) // <y_c, y_a>
			}
			g[c*nz+a] = z
			g[a*nz+c] = cmplx.Conj(z)
		}
	}
	r, ok := cholesky(g, nz)
	if !ok {
		return errors.New("lanczos: kept Ritz vectors are not linearly independent")
	}
	ri := invUpper(r, nz)
	// A = (R_11 Theta + R_12 s^T) R_11^-1, then its Hermitian part.
	a := make([]complex128, kk*kk)
	for i := range kk {
		for j := range kk {
			var x complex128
			for l := i; l <= j; l++ { // R_11 Theta R_11^-1: l from i (R) to j (R^-1)
				x += r[i*nz+l] * complex(theta[l], 0) * ri[l*nz+j]
			}
			if next {
				for l := 0; l <= j; l++ {
					x += r[i*nz+kk] * complex(coupling[l], 0) * ri[l*nz+j]
				}
			}
			a[i*kk+j] = x
		}
	}
	// a[i*kk+j] comes from the relation of y_j, whose error e_j enters it
	// as <q_i, e_j>: each pair takes the entry of the vector with the
	// smaller coupling (averaging spread the errors of unconverged vectors
	// into converged ones and stalled their residuals, as
	// TestLowestToleranceSweep once showed).
	for i := range kk {
		for j := range i {
			h := a[i*kk+j] // from y_j
			if math.Abs(coupling[i]) < math.Abs(coupling[j]) {
				h = cmplx.Conj(a[j*kk+i]) // from y_i
			}
			a[i*kk+j], a[j*kk+i] = h, cmplx.Conj(h)
		}
		a[i*kk+i] = complex(real(a[i*kk+i]), 0)
	}
	lambda, x := jacobi(a, kk)
	// Couplings R_22 s^T R_11^-1 X, made real and non-negative by phases.
	for c := range kk {
		var sc complex128
		if next {
			for j := range kk {
				var w complex128
				for l := 0; l <= j; l++ {
					w += complex(coupling[l], 0) * ri[l*nz+j]
				}
				sc += w * x[j*kk+c]
			}
			sc *= r[kk*nz+kk]
		}
		if m := cmplx.Abs(sc); m > 0 {
			ph := cmplx.Conj(sc) / complex(m, 0)
			for j := range kk {
				x[j*kk+c] *= ph
			}
			sc = complex(m, 0)
		}
		theta[c] = lambda[c]
		coupling[c] = real(sc)
	}
	// Coefficients of the new vectors in Z: R^-1 [X 0; 0 1].
	coef := make([]T, nz*nz)
	for l := range nz {
		for c := range kk {
			var z complex128
			for j := l; j < kk; j++ {
				z += ri[l*nz+j] * x[j*kk+c]
			}
			coef[l*nz+c] = fromComplex[T](z)
		}
		if next {
			coef[l*nz+kk] = fromComplex[T](ri[l*nz+kk])
		}
	}
	z := make([][]T, 0, nz)
	z = append(z, s.v[s.nl:s.nl+kk]...)
	if next {
		z = append(z, s.v[s.nl+s.b])
	}
	st := nz + 1
	g2 := make([]T, st*st)
	combine(&s.ws, z, nil, coef, z, g2, nil)
	for a := range nz {
		for c := 0; c <= a && c < kk; c++ {
			gram[a*k1+c] = g2[a*st+c]
		}
	}
	s.restartOmega(kk, gram, next)
	s.settled++
	return nil
}

// toComplex and fromComplex convert between T and complex128 (the
// imaginary part is dropped for real T).
func toComplex[T Scalar](z T) complex128 {
	f := floats([]T{z})
	if len(f) == 2 {
		return complex(f[0], f[1])
	}
	return complex(f[0], 0)
}

func fromComplex[T Scalar](z complex128) T {
	var x T
	f := floats([]T{x})
	f[0] = real(z)
	if len(f) == 2 {
		f[1] = imag(z)
	}
	return *(*T)(unsafe.Pointer(&f[0]))
}

// cholesky returns the upper triangular R with G = R^H R of the Hermitian
// positive definite n x n matrix g (row-major), or false.
func cholesky(g []complex128, n int) ([]complex128, bool) {
	r := make([]complex128, n*n)
	for j := range n {
		d := real(g[j*n+j])
		for i := range j {
			d -= real(r[i*n+j])*real(r[i*n+j]) + imag(r[i*n+j])*imag(r[i*n+j])
		}
		if !(d > 0) {
			return nil, false
		}
		rjj := math.Sqrt(d)
		r[j*n+j] = complex(rjj, 0)
		for k := j + 1; k < n; k++ {
			x := g[j*n+k]
			for i := range j {
				x -= cmplx.Conj(r[i*n+j]) * r[i*n+k]
			}
			r[j*n+k] = x / complex(rjj, 0)
		}
	}
	return r, true
}

// invUpper returns the inverse of the upper triangular n x n matrix r.
func invUpper(r []complex128, n int) []complex128 {
	x := make([]complex128, n*n)
	for j := range n {
		x[j*n+j] = 1 / r[j*n+j]
		for i := j - 1; i >= 0; i-- {
			var z complex128
			for l := i + 1; l <= j; l++ {
				z += r[i*n+l] * x[l*n+j]
			}
			x[i*n+j] = -z / r[i*n+i]
		}
	}
	return x
}

// jacobi diagonalizes the Hermitian n x n matrix a (row-major, destroyed)
// by cyclic Jacobi rotations and returns its eigenvalues ascending and the
// unitary matrix of its eigenvectors (column c for value c). The matrices
// it gets are diagonal up to small couplings, for which Jacobi converges
// quadratically; for a real symmetric matrix the rotations are real.
func jacobi(a []complex128, n int) ([]float64, []complex128) {
	x := make([]complex128, n*n)
	for i := range n {
		x[i*n+i] = 1
	}
	for sweep := 0; sweep < 50; sweep++ {
		var off, diag float64
		for i := range n {
			diag += real(a[i*n+i]) * real(a[i*n+i])
			for j := range i {
				off += 2 * (real(a[i*n+j])*real(a[i*n+j]) + imag(a[i*n+j])*imag(a[i*n+j]))
			}
		}
		if off <= eps*eps*diag || off == 0 {
			break
		}
		for p := range n {
			for q := p + 1; q < n; q++ {
				apq := a[p*n+q]
				m := cmplx.Abs(apq)
				if m == 0 {
					continue
				}
				ph := apq / complex(m, 0) // e^{i phi}
				app, aqq := real(a[p*n+p]), real(a[q*n+q])
				th := (aqq - app) / (2 * m)
				t := 1 / (math.Abs(th) + math.Sqrt(th*th+1))
				if th < 0 {
					t = -t
				}
				c := 1 / math.Sqrt(t*t+1)
				sn := t * c
				// U on (p, q): [[c, s], [-s e^{-i phi}, c e^{-i phi}]].
				upp, upq := complex(c, 0), complex(sn, 0)
				uqp, uqq := -complex(sn, 0)*cmplx.Conj(ph), complex(c, 0)*cmplx.Conj(ph)
				for k := range n { // columns: A U
					akp, akq := a[k*n+p], a[k*n+q]
					a[k*n+p] = akp*upp + akq*uqp
					a[k*n+q] = akp*upq + akq*uqq
					xkp, xkq := x[k*n+p], x[k*n+q]
					x[k*n+p] = xkp*upp + xkq*uqp
					x[k*n+q] = xkp*upq + xkq*uqq
				}
				for k := range n { // rows: U^H (A U)
					apk, aqk := a[p*n+k], a[q*n+k]
					a[p*n+k] = cmplx.Conj(upp)*apk + cmplx.Conj(uqp)*aqk
					a[q*n+k] = cmplx.Conj(upq)*apk + cmplx.Conj(uqq)*aqk
				}
				a[p*n+q], a[q*n+p] = 0, 0
				a[p*n+p] = complex(real(a[p*n+p]), 0)
				a[q*n+q] = complex(real(a[q*n+q]), 0)
			}
		}
	}
	lambda := make([]float64, n)
	order := make([]int, n)
	for i := range n {
		lambda[i] = real(a[i*n+i])
		order[i] = i
	}
	sort.SliceStable(order, func(i, j int) bool { return lambda[order[i]] < lambda[order[j]] })
	vals := make([]float64, n)
	vecs := make([]complex128, n*n)
	for c, o := range order {
		vals[c] = lambda[o]
		for i := range n {
			vecs[i*n+c] = x[i*n+o]
		}
	}
	return vals, vecs
}
