package lanczos

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/lapack"
	lapackgonum "gonum.org/v1/gonum/lapack/gonum"
)

var lapackImpl lapackgonum.Implementation

// DefaultTol is the residual tolerance when Options.Tol is 0.
const DefaultTol = 1e-10

// startStream is the second PCG word of the generator seeded by
// Options.Seed; any fixed value works, this one is the fractional part of
// the golden ratio in 64 bits.
const startStream = 0x9e3779b97f4a7c15

// breakdownTol: a new Lanczos vector whose norm after orthogonalization is
// below breakdownTol times the largest ||H v|| seen so far is taken to lie
// in the span of the basis (an invariant subspace).
const breakdownTol = 1e-12

// Options configure Lowest. The zero value of every field but K and Start
// selects the documented default; the zero value of K means 1.
type Options[T Scalar] struct {
	// K is the number of lowest eigenvalues wanted; 0 means 1. It must not
	// exceed the dimension.
	K int
	// Vectors asks for the eigenvectors too.
	Vectors bool
	// Tol is the relative residual tolerance: a Ritz pair (theta, y), ||y||
	// = 1, is converged when ||H y - theta y|| <= Tol max(1, |theta|).
	// 0 means DefaultTol (1e-10).
	Tol float64
	// MaxIterations bounds the total number of operator applications,
	// including the K applications of the final explicit residual check;
	// 0 means DefaultMaxIterations(K) = 300 K + 1000. It must be at least
	// 2K.
	MaxIterations int
	// Basis is the largest number of Krylov vectors kept at once; 0 means
	// DefaultBasis(Dim, K) = min(Dim, max(2K+20, 40)). A value of at least
	// Dim is reduced to Dim; a smaller value must be at least K+2 (2K+2
	// with Multiplicities).
	Basis int
	// Multiplicities completes the multiplicities of degenerate levels: see
	// "Degenerate levels" in the package documentation. It costs at least
	// one more convergence run.
	Multiplicities bool
	// Seed selects the pseudo-random start vector (and the vectors that
	// replace the residual after an invariant subspace has been found):
	// math/rand/v2's PCG seeded with (Seed, 0x9e3779b97f4a7c15), components
	// uniform in [-1, 1) (real and imaginary parts independently), then
	// normalized.
	Seed uint64
	// Start, when not nil, is the start vector instead of a random one (it
	// is copied and normalized; it must not be zero). Later random vectors
	// still come from Seed.
	Start []T
	// Progress, when not nil, is called after every restart cycle with the
	// number of operator applications so far and the number of wanted
	// pairs whose residual estimate is within the tolerance. It runs on the
	// goroutine that called Lowest.
	Progress func(matvecs, converged int)
}

// Result is what Lowest found.
type Result[T Scalar] struct {
	// Values are the K lowest eigenvalues found, ascending: the Rayleigh
	// quotients <y|H|y> of the returned Ritz vectors.
	Values []float64
	// Vectors[i] is the unit eigenvector of Values[i], when asked for. The
	// vectors are orthonormal to rounding and share no memory with each
	// other or with anything else.
	Vectors [][]T
	// Residuals[i] = ||H y_i - Values[i] y_i||, computed explicitly with one
	// application of H per pair.
	Residuals []float64
	// Converged reports whether every residual is within the tolerance.
	Converged bool
	// Matvecs counts the applications of the operator.
	Matvecs int
	// Restarts counts the thick restarts.
	Restarts int
	// Warnings say what the numbers cannot: non-convergence, and levels
	// that look degenerate when their multiplicity was not checked.
	Warnings []string
}

// DefaultBasis is the basis size used when Options.Basis is 0:
// min(dim, max(2k+20, 40)).
func DefaultBasis(dim, k int) int { return min(dim, max(2*k+20, 40)) }

// DefaultMaxIterations is the budget of operator applications used when
// Options.MaxIterations is 0: 300 k + 1000.
func DefaultMaxIterations(k int) int { return 300*k + 1000 }

// Lowest computes the K lowest eigenvalues (and, if asked, eigenvectors) of
// the Hermitian operator op by thick-restart Lanczos with full
// reorthogonalization; see the package documentation for the method, its
// costs and its limits. A context that is done stops the iteration within
// one operator application and Lowest returns its error; an error from
// op.Apply is returned wrapped. Reaching Options.MaxIterations is not an
// error: the result then has Converged false and a warning.
func Lowest[T Scalar](ctx context.Context, op Operator[T], opt Options[T]) (*Result[T], error) {
	s, err := newLowest(ctx, op, opt)
	if err != nil {
		return nil, err
	}
	return s.run()
}

// lowest is the state of one Lowest call.
//
// Slots: v[0:nl] are locked eigenvectors (only with Multiplicities, after
// the first pass), v[nl:nl+b] the active orthonormal basis, v[nl+b] the next
// Lanczos vector (unit, orthogonal to all before it), and the other slots are
// free. The active projected matrix T (b x b) is stored in the lower
// triangle of t (leading dimension ld = m+1); row b of t holds the couplings
// of v[nl+b], so that
//
//	H V = V T + v[nl+b] t[b, 0:b] + O(eps ||H||),   V = v[nl:nl+b],
//
// with V orthogonal to the locked vectors.
type lowest[T Scalar] struct {
	ctx      context.Context
	op       Operator[T]
	n, m, k  int
	tol      float64
	maxMV    int
	multi    bool
	vectors  bool
	progress func(int, int)

	v       [][]T
	nl      int
	lockVal []float64
	lockRes []float64
	b       int
	t       []float64
	ld      int
	// invariant: the last step found v[0:nl+b] invariant under H (to
	// rounding), so v[nl+b] is void and the couplings in row b are zero.
	invariant bool

	rng      *rand.Rand
	mv       int
	restarts int
	hnorm    float64 // largest ||H v|| seen, an estimate of ||H||
	ws       workspace
	c1, c2   []T
	eig      []float64 // projected matrix, then its eigenvectors (Dsyev)
	theta    []float64
	work     []float64 // Dsyev work
}

func newLowest[T Scalar](ctx context.Context, op Operator[T], opt Options[T]) (*lowest[T], error) {
	n := op.Dim()
	if n <= 0 {
		return nil, fmt.Errorf("lanczos: operator dimension %d", n)
	}
	k := opt.K
	if k == 0 {
		k = 1
	}
	if k < 0 || k > n {
		return nil, fmt.Errorf("lanczos: K = %d outside 1..%d", opt.K, n)
	}
	tol := opt.Tol
	if tol == 0 {
		tol = DefaultTol
	}
	if !(tol > 0) || math.IsInf(tol, 0) {
		return nil, fmt.Errorf("lanczos: Tol = %g must be positive", opt.Tol)
	}
	need := k + 2
	if opt.Multiplicities {
		need = 2*k + 2
	}
	m := opt.Basis
	switch {
	case m == 0:
		m = DefaultBasis(n, k)
	case m >= n:
		m = n
	case m < need:
		return nil, fmt.Errorf("lanczos: Basis = %d below %d for K = %d", opt.Basis, need, k)
	}
	maxMV := opt.MaxIterations
	if maxMV == 0 {
		maxMV = DefaultMaxIterations(k)
	}
	if maxMV < 2*k {
		return nil, fmt.Errorf("lanczos: MaxIterations = %d below 2K = %d", opt.MaxIterations, 2*k)
	}
	if opt.Start != nil && len(opt.Start) != n {
		return nil, fmt.Errorf("lanczos: start vector length %d, dimension %d", len(opt.Start), n)
	}
	s := &lowest[T]{
		ctx: ctx, op: op, n: n, m: m, k: k, tol: tol, maxMV: maxMV,
		multi: opt.Multiplicities, vectors: opt.Vectors, progress: opt.Progress,
		ld:  m + 1,
		t:   make([]float64, (m+1)*(m+1)),
		rng: rand.New(rand.NewPCG(opt.Seed, startStream)),
		c1:  make([]T, m+1),
		c2:  make([]T, m+1),
	}
	s.ws.part = make([]float64, numChunks[T](n)*(2*(m+1)+1))
	s.eig = make([]float64, m*m)
	s.theta = make([]float64, m)
	s.v = make([][]T, m+1)
	for i := range s.v {
		s.v[i] = make([]T, n)
	}
	if opt.Start != nil {
		copy(s.v[0], opt.Start)
		nr := math.Sqrt(norm2(&s.ws, s.v[0]))
		if nr == 0 || math.IsNaN(nr) || math.IsInf(nr, 0) {
			return nil, errors.New("lanczos: start vector has zero or non-finite norm")
		}
		scale(s.v[0], 1/nr)
	} else if err := s.randomOrthogonal(s.v[0], 0); err != nil {
		return nil, err
	}
	return s, nil
}

// tolFor is the absolute residual tolerance of a pair with value theta.
func (s *lowest[T]) tolFor(theta float64) float64 { return s.tol * max(1, math.Abs(theta)) }

// randomOrthogonal fills x with a random unit vector orthogonal to v[0:nb]
// (nb < n) by two rounds of classical Gram-Schmidt.
func (s *lowest[T]) randomOrthogonal(x []T, nb int) error {
	for range 20 {
		fillUniform(x, s.rng)
		n0 := norm2(&s.ws, x)
		if nb > 0 {
			basis := s.v[:nb]
			c1, c2 := s.c1[:nb], s.c2[:nb]
			dotMany(&s.ws, basis, x, c1)
			subtract(&s.ws, basis, c1, x, c2)
			n2 := subtract(&s.ws, basis, c2, x, nil)
			if !(n2 > 1e-6*n0) {
				continue // nearly in the span: draw again
			}
			n0 = n2
		}
		if !(n0 > 0) {
			continue
		}
		scale(x, 1/math.Sqrt(n0))
		return nil
	}
	return errors.New("lanczos: no random vector outside the Krylov basis")
}

// step performs one Lanczos step: it applies H to v[nl+b], orthogonalizes
// the result against v[0:nl+b+1] twice, and appends v[nl+b] to the active
// basis.
func (s *lowest[T]) step() error {
	if err := s.ctx.Err(); err != nil {
		return err
	}
	j := s.nl + s.b
	dst := s.v[j+1]
	if err := s.op.Apply(s.ctx, dst, s.v[j]); err != nil {
		return fmt.Errorf("lanczos: apply: %w", err)
	}
	s.mv++
	basis := s.v[:j+1]
	c1, c2 := s.c1[:j+1], s.c2[:j+1]
	h2 := dotMany(&s.ws, basis, dst, c1)
	if math.IsNaN(h2) || math.IsInf(h2, 0) {
		return errors.New("lanczos: operator produced a non-finite vector")
	}
	s.hnorm = max(s.hnorm, math.Sqrt(h2))
	w1 := subtract(&s.ws, basis, c1, dst, c2)
	w2 := subtract(&s.ws, basis, c2, dst, nil)
	b := s.b
	s.t[b*s.ld+b] = realPart(c1[j]) + realPart(c2[j])
	s.b++
	b++
	row := s.t[b*s.ld : b*s.ld+b]
	clear(row)
	beta := math.Sqrt(w2)
	// Twice is enough: if the second round removed a sizeable part of what
	// the first left, the vector is in the span to rounding.
	if beta <= breakdownTol*s.hnorm || beta < 0.7*math.Sqrt(w1) {
		s.invariant = true
		return nil
	}
	scale(dst, 1/beta)
	row[b-1] = beta
	return nil
}

// ritz solves the active projected eigenproblem with LAPACK's Dsyev
// (gonum): ascending theta, the eigenvectors u (b x b row-major, column i
// for theta[i]) and the residual estimates |t[b, 0:b] u[:, i]|. theta and u
// are overwritten by the next call.
func (s *lowest[T]) ritz() (theta, u, est []float64, err error) {
	b := s.b
	if b == 0 {
		return nil, nil, nil, nil
	}
	a := s.eig[:b*b]
	for i := range b {
		for j := 0; j <= i; j++ {
			a[i*b+j] = s.t[i*s.ld+j]
			a[j*b+i] = s.t[i*s.ld+j]
		}
	}
	theta = s.theta[:b]
	var query [1]float64
	lapackImpl.Dsyev(lapack.EVCompute, blas.Upper, b, a, b, theta, query[:], -1)
	if need := int(query[0]); len(s.work) < need {
		s.work = make([]float64, need)
	}
	if !lapackImpl.Dsyev(lapack.EVCompute, blas.Upper, b, a, b, theta, s.work, len(s.work)) {
		return nil, nil, nil, errors.New("lanczos: projected eigenproblem did not converge")
	}
	u = a
	est = make([]float64, b)
	if !s.invariant {
		row := s.t[b*s.ld : b*s.ld+b]
		for i := range b {
			var r float64
			for l, tl := range row {
				r += tl * u[l*b+i]
			}
			est[i] = math.Abs(r)
		}
	}
	return theta, u, est, nil
}

// restart keeps the kk lowest Ritz vectors: they replace v[nl:nl+kk], the
// next Lanczos vector moves to v[nl+kk], and T becomes diag(theta[:kk]) with
// the couplings of the next vector in row kk (Wu and Simon's thick restart).
// After an invariant subspace the next vector is a new random one,
// orthogonal to all kept vectors and uncoupled, unless the kept vectors
// already span the whole space.
func (s *lowest[T]) restart(kk int, theta, u []float64) error {
	b := s.b
	row := s.t[b*s.ld : b*s.ld+b]
	coupling := make([]float64, kk)
	for i := range kk {
		for l, tl := range row {
			coupling[i] += tl * u[l*b+i]
		}
	}
	keep := make([]float64, b*kk)
	for l := range b {
		copy(keep[l*kk:(l+1)*kk], u[l*b:l*b+kk])
	}
	combine(&s.ws, s.v[s.nl:s.nl+b], keep, kk)
	if kk < b {
		s.v[s.nl+kk], s.v[s.nl+b] = s.v[s.nl+b], s.v[s.nl+kk]
	}
	clear(s.t)
	for i := range kk {
		s.t[i*s.ld+i] = theta[i]
	}
	if s.invariant {
		clear(coupling)
		if s.nl+kk < s.n {
			if err := s.randomOrthogonal(s.v[s.nl+kk], s.nl+kk); err != nil {
				return err
			}
			s.invariant = false
		}
	}
	copy(s.t[kk*s.ld:kk*s.ld+kk], coupling)
	s.b = kk
	s.restarts++
	return nil
}

// pair is one member of the current answer: a value, its explicit residual
// and the slot of its vector.
type pair struct {
	val, res float64
	slot     int
}

// selectActive merges the locked pairs with the active Ritz values: it returns how
// many of the lowest active values belong to the K lowest. In a
// verification pass (nl > 0) an active value displaces the highest locked
// one only if it is lower by more than the tolerance, so that copies of one
// level found again cannot displace each other forever.
func (s *lowest[T]) selectActive(theta []float64) int {
	if s.nl == 0 {
		return min(s.k, len(theta))
	}
	kept := slices.Clone(s.lockVal) // ascending
	ka := 0
	for _, th := range theta {
		last := kept[len(kept)-1]
		if !(th < last-s.tolFor(last)) {
			break
		}
		kept = kept[:len(kept)-1]
		at, _ := slices.BinarySearch(kept, th)
		kept = slices.Insert(kept, at, th)
		ka++
	}
	return ka
}

func (s *lowest[T]) run() (*Result[T], error) {
	reserve := s.k // applications kept back for the explicit check
	var final []pair
	verified := false
	for {
		capacity := s.m - s.nl
		for s.b < capacity && !s.invariant && s.mv+1+reserve <= s.maxMV {
			if err := s.step(); err != nil {
				return nil, err
			}
		}
		theta, u, est, err := s.ritz()
		if err != nil {
			return nil, err
		}
		ka := s.selectActive(theta)
		want := ka
		if s.nl > 0 {
			want = ka + 1
		}
		// Not converged while the basis is smaller than what is wanted.
		conv := s.nl+ka >= s.k && want <= s.b
		want = min(want, s.b)
		nconv := s.k - ka
		for i := range want {
			ok := est[i] <= s.tolFor(theta[i])
			conv = conv && ok
			if ok && i < ka {
				nconv++
			}
		}
		if s.progress != nil {
			s.progress(s.mv, nconv)
		}
		complete := s.invariant && s.nl+s.b == s.n
		outOfBudget := s.mv+1+reserve > s.maxMV
		if !conv && !complete && !outOfBudget {
			limit := s.b - 1
			if s.invariant {
				limit = s.b // the void next vector is replaced, nothing is lost
			}
			kk := max(0, min(limit, want+(capacity-want)/2))
			if err := s.restart(kk, theta, u); err != nil {
				return nil, err
			}
			continue
		}

		// Compute the wanted Ritz vectors and check them explicitly.
		kk := min(s.b, want+(capacity-want)/2)
		if kk == capacity && !s.invariant {
			kk = max(want, capacity-1)
		}
		if err := s.restart(kk, theta, u); err != nil {
			return nil, err
		}
		var work []T
		usedNext := false
		switch {
		case s.nl+kk+1 <= s.m:
			work = s.v[s.nl+kk+1]
		case s.invariant:
			work, usedNext = s.v[s.nl+kk], true
		default:
			work = make([]T, s.n) // not reached with validated options
		}
		active := make([]pair, ka)
		accept := true
		for i := range ka {
			slot := s.nl + i
			val, res, err := s.explicit(s.v[slot], work)
			if err != nil {
				return nil, err
			}
			active[i] = pair{val, res, slot}
			accept = accept && res <= s.tolFor(val)
		}
		if usedNext {
			clear(work)
		}
		outOfBudget = s.mv+1+reserve > s.maxMV
		if !accept && !outOfBudget && !complete {
			continue
		}

		// The pass is over: merge with the locked pairs.
		merged := make([]pair, 0, s.nl+ka)
		for i := range s.nl {
			merged = append(merged, pair{s.lockVal[i], s.lockRes[i], i})
		}
		merged = append(merged, active...)
		slices.SortStableFunc(merged, func(a, b pair) int {
			switch {
			case a.val < b.val:
				return -1
			case a.val > b.val:
				return 1
			}
			return 0
		})
		merged = merged[:min(s.k, len(merged))]
		final = merged
		if s.multi && s.nl > 0 && ka == 0 && conv {
			verified = true
		}
		if !s.multi || verified || outOfBudget || !accept {
			break
		}
		// Lock the K pairs and verify from a new random vector.
		s.lock(merged)
		final = s.lockedPairs()
		if s.nl == s.n {
			verified = true
			break
		}
		s.b = 0
		s.invariant = false
		clear(s.t)
		if err := s.randomOrthogonal(s.v[s.nl], s.nl); err != nil {
			return nil, err
		}
	}
	return s.result(final, verified), nil
}

// explicit applies H to the unit vector y and returns the Rayleigh quotient
// rho and ||H y - rho y||, using work as scratch.
func (s *lowest[T]) explicit(y, work []T) (float64, float64, error) {
	if err := s.ctx.Err(); err != nil {
		return 0, 0, err
	}
	if err := s.op.Apply(s.ctx, work, y); err != nil {
		return 0, 0, fmt.Errorf("lanczos: apply: %w", err)
	}
	s.mv++
	c := s.c1[:1]
	dotMany(&s.ws, [][]T{y}, work, c)
	rho := realPart(c[0])
	c[0] = fromReal[T](rho)
	r2 := subtract(&s.ws, [][]T{y}, c, work, nil)
	return rho, math.Sqrt(r2), nil
}

// lock moves the vectors of the merged pairs to v[0:k] in ascending order
// and makes them the locked set.
func (s *lowest[T]) lock(merged []pair) {
	used := make([]bool, len(s.v))
	order := make([][]T, 0, len(s.v))
	s.lockVal = s.lockVal[:0]
	s.lockRes = s.lockRes[:0]
	for _, p := range merged {
		order = append(order, s.v[p.slot])
		used[p.slot] = true
		s.lockVal = append(s.lockVal, p.val)
		s.lockRes = append(s.lockRes, p.res)
	}
	for i, x := range s.v {
		if !used[i] {
			order = append(order, x)
		}
	}
	s.v = order
	s.nl = len(merged)
}

func (s *lowest[T]) lockedPairs() []pair {
	p := make([]pair, s.nl)
	for i := range p {
		p[i] = pair{s.lockVal[i], s.lockRes[i], i}
	}
	return p
}

func (s *lowest[T]) result(final []pair, verified bool) *Result[T] {
	r := &Result[T]{Matvecs: s.mv, Restarts: s.restarts, Converged: true}
	for _, p := range final {
		r.Values = append(r.Values, p.val)
		r.Residuals = append(r.Residuals, p.res)
		if p.res > s.tolFor(p.val) {
			r.Converged = false
		}
	}
	if s.vectors {
		for _, p := range final {
			r.Vectors = append(r.Vectors, s.v[p.slot])
		}
	}
	if !r.Converged {
		nc := 0
		for _, p := range final {
			if p.res <= s.tolFor(p.val) {
				nc++
			}
		}
		r.Warnings = append(r.Warnings, fmt.Sprintf(
			"not converged: %d of %d pairs within the tolerance %g after %d operator applications (MaxIterations %d)",
			nc, s.k, s.tol, s.mv, s.maxMV))
	}
	if s.multi && !verified {
		r.Warnings = append(r.Warnings,
			"multiplicities not verified: the budget ran out before a verification pass finished")
	}
	if !s.multi {
		// One warning per group of values equal within the tolerance.
		for i := 0; i < len(final); {
			j := i + 1
			for j < len(final) && final[j].val-final[j-1].val <= s.tolFor(final[j].val) {
				j++
			}
			if j-i > 1 {
				r.Warnings = append(r.Warnings, fmt.Sprintf(
					"values %d to %d (%.12g) are equal within the tolerance: a degenerate level whose multiplicity may be incomplete (set Multiplicities to complete it)",
					i, j-1, final[i].val))
			}
			i = j
		}
	}
	return r
}
