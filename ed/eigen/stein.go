package eigen

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sync/atomic"
)

// Inverse iteration for the eigenvectors of a subset of the spectrum of a
// real symmetric tridiagonal T, in the manner of LAPACK's dstein (as its
// documentation describes it; the method: Wilkinson, The Algebraic
// Eigenvalue Problem, 1965; Golub and Van Loan, Matrix Computations). The
// constants:
const (
	// steinMaxIts is the most inverse-iteration steps one eigenvector
	// takes (dstein: MAXITS = 5).
	steinMaxIts = 5
	// steinExtra is the number of steps taken after the one in which the
	// growth criterion first held (dstein: EXTRA = 2; here 1, so that a
	// vector takes 2 to 5 steps: measured with n = m = 210 to 2000 on
	// random, Toeplitz-like and glued Wilkinson tridiagonals, 1 and 2 gave
	// the same residuals, at most 0.11 n ulp ||T||, and orthogonality, at
	// most 0.41 n ulp, and 1 took 1.2 to 1.5 times less time).
	steinExtra = 1
	// steinClusterTol is the cluster tolerance relative to ||T_block||_1:
	// eigenvalues of one block closer than this (in a chain) form a cluster
	// whose vectors are re-orthogonalized against each other (dstein: 1e-3).
	steinClusterTol = 1e-3
	// steinBig bounds the entries of an inverse-iteration solve: beyond it
	// the iterate is scaled down by 1/steinBig (dlagts guards likewise
	// against overflow).
	steinBig = 0x1p400
)

// steinMaxPairs decides between the two routes to the eigenvectors of the
// lowest m of n eigenvalues: inverse iteration (stein) with an n x m
// back-transformation when its re-orthogonalizations take at most
// steinMaxPairs n^2 (vector, earlier vector of its cluster) pairs
// (steinPlan.pairs), else every tridiagonal eigenvector by the QL
// iteration, cut to the lowest m before the back-transformation (the
// back-transformations cost the same on either route, up to formQ for
// real m > 2n/3). The crossover is not a share of n: on a random matrix's
// spectrum stein wins at every m (BenchmarkSubsetRoute, n = 2000, whole
// solves, 2 cores: m = n real 2.2 s against 4.6 s, complex 7.7 s against
// 10.5 s), and what it costs beyond O(n m) is the pairs: about 1.6e-9 n
// seconds each (two modified Gram-Schmidt steps of length n, on one core),
// against about 3.2e-10 n^3 seconds for the QL iteration (on both cores).
// BenchmarkSteinClustered, n = 4000, a spectrum chained into one cluster:
// stein 3.3 s (m = n/4, 0.031 n^2 pairs), 13.6 s (m = n/2, 0.125 n^2),
// 52 s (m = n, 0.5 n^2), QL 20.7 s: equal near 0.19 n^2. With more cores
// the crossover moves down (QL's rotations use every core). It is a
// variable so that the tests can force either route.
var steinMaxPairs = 0.2

// useStein reports whether the eigenvectors of a plan for n rows are
// computed by inverse iteration (see steinMaxPairs).
func useStein(n int, p *steinPlan) bool {
	return float64(p.pairs) <= steinMaxPairs*float64(n)*float64(n)
}

// ulp is the relative machine precision of dstein's EPS (dlamch('P') =
// 2^-52).
const ulp = 2 * unitRoundoff

// A tridiagBlock is an unreduced diagonal block of T: rows lo..hi-1.
type tridiagBlock struct{ lo, hi int }

// splitTridiag returns the unreduced diagonal blocks of the symmetric
// tridiagonal (d, e), in order: T splits after row i when
//
//	|e_i| <= ulp/2 sqrt(|d_i|) sqrt(|d_{i+1}|),
//
// the criterion of sterf and tridiagQL (LAPACK's dsterf and dsteqr): the
// neglected e_i is then below the rounding of the diagonal entries, so the
// blocks' spectra are those that sterf computes for T. Cost O(n).
func splitTridiag(d, e []float64) []tridiagBlock {
	n := len(d)
	var out []tridiagBlock
	lo := 0
	for i := 0; i < n-1; i++ {
		if math.Abs(e[i]) <= math.Sqrt(math.Abs(d[i]))*math.Sqrt(math.Abs(d[i+1]))*unitRoundoff {
			out = append(out, tridiagBlock{lo, i + 1})
			lo = i + 1
		}
	}
	return append(out, tridiagBlock{lo, n})
}

// stein writes the orthonormal eigenvectors of the lowest m eigenvalues of
// the symmetric tridiagonal T (diagonal d, length n; off-diagonal e, length
// n-1; neither is changed) into z, column-major n x m: z[j*n+i] is
// component i of the eigenvector of the j-th lowest eigenvalue. w holds the
// eigenvalues of T ascending (sterf's, used as they are when T does not
// split). It is LAPACK's dstein method:
//
//   - T is split into unreduced blocks (splitTridiag) and, when there are
//     several, the eigenvalues of each block are computed by sterf on a
//     copy, so that each eigenvalue carries its block; the lowest m over all
//     blocks are taken in ascending order (ties: the earlier block first);
//     an eigenvector is supported on its block;
//   - for each such eigenvalue lambda of a block B, ascending: a shift
//     within 10 ulp |lambda| of the previous shift of the block is moved to
//     the previous one plus that (so that the factorizations differ); B -
//     lambda I is factored by Gaussian elimination with partial pivoting,
//     P (B - lambda I) = L U (tridiagLU); from a deterministic pseudo-random
//     start vector x, each step scales x to ||x||_inf = b ulp ||B||_1 (b the
//     order of B), solves (B - lambda I) y = x (a pivot below ulp ||B||_1 in
//     magnitude replaced by that value, sign kept), re-orthogonalizes y by
//     modified Gram-Schmidt against the vectors already computed of the
//     cluster of lambda (the eigenvalues of B that are chained to lambda by
//     gaps of at most 1e-3 ||B||_1), and takes y as the next x; the growth
//     criterion ||y||_inf >= sqrt(0.1/b), i.e. a residual
//     ||(B - lambda I) y||_inf <= sqrt(10) b^1.5 ulp ||B||_1 ||y||_inf (up
//     to the pivot perturbation and the re-orthogonalization), must hold
//     and then hold for steinExtra more steps, within steinMaxIts steps: 2
//     to 5 steps. (dstein scales x to b ||B||_1 max(ulp, |u_bb|), u_bb the
//     last pivot of U, which accepts a shift far from every eigenvalue, u_bb
//     being large then; without the pivot the criterion bounds the
//     residual, and a shift that is not an eigenvalue fails it);
//   - the vector is normalized to unit 2-norm, its largest component
//     positive.
//
// Cost: about 20b flops per step and eigenvalue for the factorization and
// the solve, plus 4b flops per step for each earlier vector of its cluster
// (steinPlan.pairs counts these): O(n m) when the gaps exceed the cluster
// tolerance, as in most of a random matrix's spectrum, up to O(n m^2) when
// the lowest m chain into one cluster, as a spectrum of n levels spaced
// below 1e-3 ||T|| does (a many-body spectrum of order n > 1000); plus sterf
// on the blocks (O(n^2)) when T splits. Memory O(n) besides z.
//
// stein is newSteinPlan followed by run. s is polled before every
// eigenvector and every pollRows vectors of its re-orthogonalization (and
// in sterf); stein returns errStopped when it fired. A vector that fails
// the growth criterion returns an error wrapping ErrNoConvergence, as does
// a failure of sterf on a block.
func stein(d, e, w []float64, m int, z []float64, s *stopper) error {
	p, err := newSteinPlan(d, e, w, m, s)
	if err != nil {
		return err
	}
	return p.run(d, e, z, s)
}

// A steinPlan is the first part of stein: the blocks of T, the selected
// eigenvalues of each (ascending) with their columns in z, and pairs, the
// number of (vector, earlier vector of its cluster) pairs that the
// re-orthogonalization will take per step (the cost beyond O(n m)).
type steinPlan struct {
	n, m   int
	blocks []tridiagBlock
	vals   [][]float64
	cols   [][]int
	pairs  int
}

// newSteinPlan splits T, computes the eigenvalues of the blocks when there
// are several (sterf on copies, O(n^2)), selects the lowest m and counts
// the cluster pairs (see stein).
func newSteinPlan(d, e, w []float64, m int, s *stopper) (*steinPlan, error) {
	n := len(d)
	p := &steinPlan{n: n, m: m, blocks: splitTridiag(d, e)}
	type eig struct {
		val float64
		blk int
	}
	evs := make([]eig, 0, n)
	if len(p.blocks) == 1 {
		for _, x := range w {
			evs = append(evs, eig{x, 0})
		}
	} else {
		for bi, b := range p.blocks {
			if b.hi-b.lo == 1 {
				evs = append(evs, eig{d[b.lo], bi})
				continue
			}
			bd := slices.Clone(d[b.lo:b.hi])
			be := slices.Clone(e[b.lo : b.hi-1])
			if err := sterf(bd, be, s); err != nil {
				if err == ErrNoConvergence {
					err = fmt.Errorf("%w: sterf on the tridiagonal block %d..%d exceeded 30n sweeps", ErrNoConvergence, b.lo, b.hi-1)
				}
				return nil, err
			}
			for _, x := range bd {
				evs = append(evs, eig{x, bi})
			}
		}
		slices.SortStableFunc(evs, func(a, b eig) int { return cmp.Compare(a.val, b.val) })
	}
	p.vals = make([][]float64, len(p.blocks))
	p.cols = make([][]int, len(p.blocks))
	for j, ev := range evs[:m] {
		p.vals[ev.blk] = append(p.vals[ev.blk], ev.val)
		p.cols[ev.blk] = append(p.cols[ev.blk], j)
	}
	for bi, b := range p.blocks {
		if b.hi-b.lo < 2 || len(p.vals[bi]) < 2 {
			continue
		}
		_, first := steinShifts(p.vals[bi], blockNorm(d[b.lo:b.hi], e[b.lo:b.hi-1]), nil, nil)
		for q, f := range first {
			p.pairs += q - f
		}
	}
	return p, nil
}

// run computes the eigenvectors of the plan into the column-major n x m z
// (see stein).
func (p *steinPlan) run(d, e []float64, z []float64, s *stopper) error {
	if steinFail {
		return fmt.Errorf("%w: inverse iteration failed (forced by a test)", ErrNoConvergence)
	}
	n := p.n
	clear(z[:n*p.m])
	var it steinIter
	for bi, b := range p.blocks {
		if len(p.cols[bi]) == 0 {
			continue
		}
		if err := it.block(d[b.lo:b.hi], e[b.lo:b.hi-1], b.lo, p.vals[bi], p.cols[bi], z, n, s); err != nil {
			return err
		}
	}
	return nil
}

// blockNorm returns ||B||_1 (= ||B||_inf) of the symmetric tridiagonal
// B = (d, e), len(d) >= 2.
func blockNorm(d, e []float64) float64 {
	b := len(d)
	nrm := math.Max(math.Abs(d[0])+math.Abs(e[0]), math.Abs(d[b-1])+math.Abs(e[b-2]))
	for i := 1; i < b-1; i++ {
		nrm = math.Max(nrm, math.Abs(d[i])+math.Abs(e[i-1])+math.Abs(e[i]))
	}
	return nrm
}

// steinShifts returns the shifts of inverse iteration for the eigenvalues
// vals (ascending) of a block of norm onenrm, and for each the index of the
// first eigenvalue of its cluster (see stein): a shift within 10 ulp |x| of
// the previous shift is moved to the previous one plus that, and a gap
// above steinClusterTol onenrm between consecutive shifts starts a new
// cluster. shift and first are reused when long enough.
func steinShifts(vals []float64, onenrm float64, shift []float64, first []int) ([]float64, []int) {
	shift, first = append(shift[:0], vals...), first[:0]
	ortol := steinClusterTol * onenrm
	f := 0
	for q := range shift {
		if q > 0 {
			if pertol := 10 * ulp * math.Abs(shift[q]); shift[q]-shift[q-1] < pertol {
				shift[q] = shift[q-1] + pertol
			}
			if math.Abs(shift[q]-shift[q-1]) > ortol {
				f = q
			}
		}
		first = append(first, f)
	}
	return shift, first
}

// steinIter holds the scratch vectors of stein (each of the order of the
// largest block).
type steinIter struct {
	lu    tridiagLU
	x     []float64
	shift []float64
	first []int
}

// block computes the eigenvectors of the unreduced block (d, e) (rows
// lo.. of T) for the eigenvalues vals (ascending), writing the one of
// vals[q] into column cols[q] of the column-major n x m z (see stein).
func (it *steinIter) block(d, e []float64, lo int, vals []float64, cols []int, z []float64, n int, s *stopper) error {
	b := len(d)
	if b == 1 {
		for _, j := range cols { // a 1 x 1 block has one eigenvalue
			z[j*n+lo] = 1
		}
		return nil
	}
	it.lu.resize(b)
	if cap(it.x) < b {
		it.x = make([]float64, b)
	}
	x := it.x[:b]
	onenrm := blockNorm(d, e)
	it.shift, it.first = steinShifts(vals, onenrm, it.shift, it.first)
	growth := math.Sqrt(0.1 / float64(b))
	ptol := ulp * onenrm
	fb := float64(b)

	for q, j := range cols {
		if s.stopped() {
			return errStopped
		}
		xj := it.shift[q]
		cluster := cols[it.first[q]:q]
		it.lu.factor(d, e, xj)
		rng := rand.New(rand.NewPCG(uint64(lo), uint64(q)))
		fillRandom(x, rng)
		held := 0
		for its := 1; ; its++ {
			if its > steinMaxIts {
				return fmt.Errorf("%w: inverse iteration: the eigenvector of eigenvalue %.17g (column %d, tridiagonal block %d..%d) did not converge in %d steps", ErrNoConvergence, vals[q], j, lo, lo+b-1, steinMaxIts)
			}
			xmax := maxAbs(x)
			if xmax == 0 || math.IsNaN(xmax) {
				// The previous step left nothing outside the cluster's
				// span (or broke down): restart from a new vector.
				fillRandom(x, rng)
				xmax = maxAbs(x)
			}
			// dstein's scaling: ||x||_inf = b ||B||_1 max(eps, |u_bb|),
			// u_bb the last pivot of B - shift I, about the distance of
			// the shift from the eigenvalue: a shift nudged away from a
			// tight cluster still gives the growth the test asks for.
			db.Dscal(b, fb*onenrm*math.Max(ulp, math.Abs(it.lu.u1[b-1]))/xmax, x, 1)
			boosted := it.lu.solve(x, ptol)
			for c, zc := range cluster {
				if c%pollRows == pollRows-1 && s.stopped() {
					return errStopped
				}
				zcol := z[zc*n+lo : zc*n+lo+b]
				daxpy(-ddot(x, zcol), zcol, x)
			}
			if boosted || maxAbs(x) >= growth {
				held++
				if held > steinExtra {
					break
				}
			}
		}
		db.Dscal(b, 1/maxAbs(x), x, 1) // no overflow in the 2-norm
		nrm := math.Sqrt(ddot(x, x))
		jmax := 0
		for i, v := range x {
			if math.Abs(v) > math.Abs(x[jmax]) {
				jmax = i
			}
		}
		if x[jmax] < 0 {
			nrm = -nrm
		}
		out := z[j*n+lo : j*n+lo+b]
		for i, v := range x {
			out[i] = v / nrm
		}
		// The growth test cannot tell a shift that is no eigenvalue (it
		// grows from any start): the residual can. A converged vector has
		// ||B x - lambda x||_inf of order b eps ||B||_1.
		if r := tridiagResidual(d, e, vals[q], out); r > 1e3*fb*ulp*onenrm {
			return fmt.Errorf("%w: inverse iteration: the eigenvector of eigenvalue %.17g (column %d, tridiagonal block %d..%d) has the residual %.3g, beyond 1e3 b eps ||B||_1 = %.3g", ErrNoConvergence, vals[q], j, lo, lo+b-1, r, 1e3*fb*ulp*onenrm)
		}
	}
	return nil
}

// tridiagResidual returns max_i |(B x)_i - lambda x_i| for the symmetric
// tridiagonal B = (d, e).
func tridiagResidual(d, e []float64, lambda float64, x []float64) float64 {
	b := len(d)
	r := 0.0
	for i := 0; i < b; i++ {
		t := (d[i] - lambda) * x[i]
		if i > 0 {
			t += e[i-1] * x[i-1]
		}
		if i+1 < b {
			t += e[i] * x[i+1]
		}
		r = nanMax(r, math.Abs(t))
	}
	return r
}

// fillRandom fills x with uniform deviates in (-1, 1) from r (dstein's
// start vectors are uniform on (-1, 1), from dlarnv).
func fillRandom(x []float64, r *rand.Rand) {
	for i := range x {
		x[i] = 2*r.Float64() - 1
	}
}

// maxAbs returns max_i |x_i| (NaN if some x_i is NaN).
func maxAbs(x []float64) float64 {
	m := 0.0
	for _, v := range x {
		m = nanMax(m, math.Abs(v))
	}
	return m
}

// tridiagLU is the factorization P (B - lambda I) = L U of a symmetric
// tridiagonal B of order b by Gaussian elimination with partial pivoting
// (LAPACK's dlagtf): U is upper triangular with the diagonal u1 and the two
// superdiagonals u2 (u2[k] = U[k][k+1]) and u3 (u3[k] = U[k][k+2], nonzero
// only after an interchange); step k eliminates the subdiagonal entry of
// column k with the multiplier l[k], after interchanging rows k and k+1
// when swap[k]. Cost: 4b flops to factor, 7b to solve.
type tridiagLU struct {
	u1, u2, u3, l []float64
	swap          []bool
}

func (f *tridiagLU) resize(b int) {
	if cap(f.u1) < b {
		f.u1, f.u2, f.u3, f.l = make([]float64, b), make([]float64, b), make([]float64, b), make([]float64, b)
		f.swap = make([]bool, b)
	}
	f.u1, f.u2, f.u3, f.l, f.swap = f.u1[:b], f.u2[:b], f.u3[:b], f.l[:b], f.swap[:b]
}

// factor factors B - lambda I for B = (d, e) (len(d) = b >= 2 after
// resize(b)). Row k, when its turn comes, has entries only in columns k and
// k+1 (alpha, beta): interchanged or not, the eliminated row is a
// combination of two rows of that shape.
func (f *tridiagLU) factor(d, e []float64, lambda float64) {
	b := len(d)
	alpha, beta := d[0]-lambda, e[0]
	for k := 0; k < b-1; k++ {
		c := e[k]               // (k+1, k)
		next := d[k+1] - lambda // (k+1, k+1)
		sup := 0.0              // (k+1, k+2)
		if k+2 < b {
			sup = e[k+1]
		}
		if math.Abs(alpha) >= math.Abs(c) {
			f.swap[k] = false
			f.u1[k], f.u2[k], f.u3[k] = alpha, beta, 0
			mult := 0.0
			if alpha != 0 {
				mult = c / alpha
			}
			f.l[k] = mult
			alpha, beta = next-mult*beta, sup
		} else {
			f.swap[k] = true
			f.u1[k], f.u2[k], f.u3[k] = c, next, sup
			mult := alpha / c
			f.l[k] = mult
			alpha, beta = beta-mult*next, -mult*sup
		}
	}
	f.u1[b-1] = alpha
}

// solve overwrites x with the solution of (B - lambda I) y = x from the
// factors, a pivot of magnitude below ptol taken as ptol with its sign (the
// perturbation of dlagts with job = -1). When an entry of the solution
// exceeds steinBig, the whole of x (solved part and remaining right-hand
// side) is scaled by 1/steinBig and solve reports true: y is then parallel
// to the solution, and the growth is beyond any criterion.
func (f *tridiagLU) solve(x []float64, ptol float64) (boosted bool) {
	b := len(x)
	for k := 0; k < b-1; k++ {
		if f.swap[k] {
			x[k], x[k+1] = x[k+1], x[k]
		}
		x[k+1] -= f.l[k] * x[k]
	}
	for k := b - 1; k >= 0; k-- {
		t := x[k]
		if k+1 < b {
			t -= f.u2[k] * x[k+1]
		}
		if k+2 < b {
			t -= f.u3[k] * x[k+2]
		}
		p := f.u1[k]
		if math.Abs(p) < ptol {
			p = math.Copysign(ptol, p)
		}
		t /= p
		x[k] = t
		if math.Abs(t) > steinBig {
			db.Dscal(b, 1/steinBig, x, 1)
			boosted = true
		}
	}
	return boosted
}

// stageErr maps the error of a subset stage to the exported one: an error
// that already says what failed (wrapping ErrNoConvergence) is returned as
// it is, the rest as solveErr maps them.
func stageErr(ctx context.Context, err error) error {
	if err != errStopped && err != ErrNoConvergence && errors.Is(err, ErrNoConvergence) {
		return err
	}
	return solveErr(ctx, err)
}

// subsetValues returns the eigenvalues of the tridiagonal T = (d, e) by
// sterf on copies (d and e are kept for the eigenvectors): w, all n
// ascending in the units of T, and values, the lowest k divided by sigma
// (the prescaling of A), which the solve returns: bitwise those of the
// values-only path, which runs sterf on the same (d, e). m is the number of
// eigenvectors the job asks for, job.vectorCount(values).
func subsetValues(d, e []float64, k int, sigma float64, job Job, s *stopper) (w, values []float64, m int, err error) {
	w = slices.Clone(d)
	if err := sterf(w, slices.Clone(e), s); err != nil {
		return nil, nil, 0, err
	}
	values = make([]float64, k)
	for i := range values {
		values[i] = w[i]
		if sigma != 1 {
			values[i] /= sigma
		}
	}
	return w, values, job.vectorCount(values), nil
}

// symmetricSubset finishes a real solve whose job asks for the eigenvectors
// of the lowest m <= k eigenvalues only (VectorsFor set, or Lowest = k < n),
// after sytrd (T = (d, e), reflectors in a and tau; A scaled by sigma). The
// eigenvalues are sterf's (subsetValues); then, with m = 0, no vector;
// when the plan of inverse iteration is cheap (useStein: few cluster
// pairs), inverse iteration on T (stein: O(n m) plus the clusters' pairs)
// and V = Q Z (backTransformReal, 2n^2 m flops); else the QL iteration on
// T from Z = I (about 6n^3) and Q applied to the lowest m columns of Z
// (2n^2 m), or, for m > 2n/3, where the explicit Q (4n^3/3) is cheaper than
// that, formQ and the QL iteration on Q, cut to m columns. vecs is
// row-major n x m and does not share ws; with m = 0 it is empty.
func symmetricSubset(a []float64, n int, d, e, tau []float64, job Job, k int, sigma float64, ws *Workspace, s *stopper) (values, vecs []float64, err error) {
	w, values, m, err := subsetValues(d, e, k, sigma, job, s)
	if err != nil {
		return nil, nil, err
	}
	if m == 0 {
		return values, []float64{}, nil
	}
	z, err := steinVectors(d, e, w, n, m, ws, s)
	switch {
	case err != nil:
	case z != nil:
		vecs, err = backTransformReal(a, n, tau, z, m, 1, n, s)
	case 3*m <= 2*n:
		if z, err = qlFromIdentity(d, e, n, ws, s); err == nil {
			vecs, err = backTransformReal(a, n, tau, z, m, n, 1, s)
		}
	default:
		vecs, err = formQ(a, n, tau, s)
		if err == nil {
			err = tridiagQL(d, e, vecs, n, n, s)
		}
		if err == nil && m < n {
			for i := 1; i < n; i++ {
				copy(vecs[i*m:i*m+m], vecs[i*n:i*n+m])
			}
			vecs = vecs[: n*m : n*m]
		}
	}
	if err != nil {
		return nil, nil, err
	}
	return values, vecs, nil
}

// hermitianSubset is symmetricSubset for a complex solve, after hetrd:
// sterf's eigenvalues; when useStein, stein and V = Q Z for the real n x m
// Z (backTransformCols, 8n^2 m flops); else the QL iteration on T from
// Z = I (about 6n^3, Z in ws) and Q applied to its lowest m columns only
// (8n^2 m, against the 8n^3 of every column).
func hermitianSubset(a []complex128, n int, d, e []float64, tau []complex128, job Job, k int, sigma float64, ws *Workspace, s *stopper) (values []float64, vecs []complex128, err error) {
	w, values, m, err := subsetValues(d, e, k, sigma, job, s)
	if err != nil {
		return nil, nil, err
	}
	if m == 0 {
		return values, []complex128{}, nil
	}
	z, err := steinVectors(d, e, w, n, m, ws, s)
	switch {
	case err != nil:
	case z != nil:
		vecs, err = backTransformCols(a, n, tau, z, m, 1, n, s)
	default:
		if z, err = qlFromIdentity(d, e, n, ws, s); err == nil {
			vecs, err = backTransformCols(a, n, tau, z, m, n, 1, s)
		}
	}
	if err != nil {
		return nil, nil, err
	}
	return values, vecs, nil
}

// steinVectors returns the eigenvectors of the lowest m eigenvalues w of the
// tridiagonal (d, e) by inverse iteration, column-major n x m in ws, when
// its plan is cheap (useStein); nil, for the caller's QL route, when it is
// not or when inverse iteration failed (steinFallback).
func steinVectors(d, e, w []float64, n, m int, ws *Workspace, s *stopper) ([]float64, error) {
	plan, err := newSteinPlan(d, e, w, m, s)
	if err != nil || !useStein(n, plan) {
		return nil, err
	}
	z := ws.floats(n * m)
	if err := plan.run(d, e, z, s); err != nil {
		if steinFallback(err) {
			return nil, nil
		}
		return nil, err
	}
	return z, nil
}

// qlFromIdentity returns every eigenvector of the tridiagonal (d, e) by the
// QL iteration from Z = I, row-major n x n in ws (about 6n^3 flops); d and e
// are destroyed.
func qlFromIdentity(d, e []float64, n int, ws *Workspace, s *stopper) ([]float64, error) {
	z, err := identityInto(ws.floats(n*n), n, s)
	if err != nil {
		return nil, err
	}
	return z, tridiagQL(d, e, z, n, n, s)
}

// identityInto sets the row-major n x n z to I and returns it, polling s
// every pollRows rows (a Workspace's n x n buffer takes milliseconds to
// clear); it returns errStopped, z half set, when s fired.
func identityInto(z []float64, n int, s *stopper) ([]float64, error) {
	for i := 0; i < n; i++ {
		if i%pollRows == 0 && s.stopped() {
			return nil, errStopped
		}
		row := z[i*n : i*n+n]
		clear(row)
		row[i] = 1
	}
	return z, nil
}

// steinFallback reports whether a failed inverse iteration (err from stein)
// is retried by the QL iteration, which always converges for these
// matrices: every failure but a stop. steinFallbacks counts the retries
// (for the tests); steinFail, when set, makes stein fail (tests).
func steinFallback(err error) bool {
	if err == errStopped {
		return false
	}
	steinFallbacks.Add(1)
	return true
}

var (
	steinFallbacks atomic.Int64
	steinFail      bool
)
