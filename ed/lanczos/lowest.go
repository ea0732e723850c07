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
	// Reorthogonalization selects how the basis is kept orthogonal: Partial
	// (the zero value) or Full; see "Orthogonality" in the package
	// documentation.
	Reorthogonalization Reorthogonalization
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
	// Progress, when not nil, is called after every convergence check of
	// the Ritz estimates (at least once per restart cycle) with the number
	// of operator applications so far and the number of wanted pairs whose
	// residual estimate is within the tolerance. It runs on the goroutine
	// that called Lowest.
	Progress func(matvecs, converged int)
}

// Result is what Lowest found.
type Result[T Scalar] struct {
	// Values are the K lowest eigenvalues found, ascending: the Rayleigh
	// quotients <y|H|y> of the returned Ritz vectors.
	Values []float64
	// Vectors[i] is the unit eigenvector of Values[i], when asked for. The
	// vectors are orthonormal to rounding (with Partial, overlaps below
	// 1e-13 and norms within 1e-14 of 1 are left as they come) and share
	// no memory with each other or with anything else.
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
	// Reorthogonalizations counts the Lanczos vectors that were
	// orthogonalized against the Krylov basis beyond the three-term
	// recurrence: every one with Full, those the estimates called for with
	// Partial.
	Reorthogonalizations int
	// Warnings say what the numbers cannot: non-convergence, and levels
	// that look degenerate when their multiplicity was not checked.
	Warnings []string
}

// Reorthogonalization is the way Lowest keeps its Krylov basis orthogonal.
type Reorthogonalization int

const (
	// Partial runs the three-term Lanczos recurrence and orthogonalizes a
	// new vector against the basis only when Simon's estimates of the loss
	// of orthogonality exceed min(sqrt(eps), Tol/100) (partial
	// reorthogonalization).
	Partial Reorthogonalization = iota
	// Full orthogonalizes every new vector against the whole basis by
	// classical Gram-Schmidt applied twice.
	Full
)

func (r Reorthogonalization) String() string {
	switch r {
	case Partial:
		return "partial"
	case Full:
		return "full"
	}
	return fmt.Sprintf("Reorthogonalization(%d)", int(r))
}

// DefaultBasis is the basis size used when Options.Basis is 0:
// min(dim, max(2k+20, 40)).
func DefaultBasis(dim, k int) int { return min(dim, max(2*k+20, 40)) }

// DefaultMaxIterations is the budget of operator applications used when
// Options.MaxIterations is 0: 300 k + 1000.
func DefaultMaxIterations(k int) int { return 300*k + 1000 }

// Lowest computes the K lowest eigenvalues (and, if asked, eigenvectors) of
// the Hermitian operator op by thick-restart Lanczos with partial (the
// default) or full reorthogonalization; see the package documentation for
// the method, its costs and its limits. A context that is done stops the
// iteration within one operator application and Lowest returns its error;
// an error from op.Apply is returned wrapped. Reaching
// Options.MaxIterations is not an error: the result then has Converged
// false and a warning.
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
// the first pass), v[nl:nl+b] the active basis, v[nl+b] the next Lanczos
// vector (unit, orthogonal to all before it: to rounding with Full, to
// about min(sqrt(eps), Tol/100) with Partial), and the other slots are
// free. The active
// projected matrix T (b x b) is stored in the lower triangle of t (leading
// dimension ld = m+1); row b of t holds the couplings of v[nl+b], so that
//
//	H V = V T + v[nl+b] t[b, 0:b] + O(eps ||H||),   V = v[nl:nl+b],
//
// with V orthogonal to the locked vectors. With Partial, om holds in the
// same layout the estimates omega[i, k] of <v[nl+i], v[nl+k]>, k < i <= b.
type lowest[T Scalar] struct {
	ctx      context.Context
	op       Operator[T]
	dotOp    DotOperator[T] // op, when it is one
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
	reorths  int
	settled  int     // restarts whose kept vectors settle replaced
	hnorm    float64 // largest ||H v|| seen, an estimate of ||H||
	ws       workspace
	c1, c2   []T
	eig      []float64 // projected matrix, then its eigenvectors (Dsyev)
	theta    []float64
	est      []float64
	work     []float64 // Dsyev work

	// Partial reorthogonalization (see partial.go).
	full                  bool      // every step orthogonalizes against the whole basis
	eps1                  float64   // eps: rounding level of one step
	omegaMax, omegaSelect float64   // reorthogonalization trigger and selection levels
	settleTol             float64   // kept vectors further from orthonormal are replaced (settle)
	om                    []float64 // omega estimates, layout of t
	force                 bool      // the previous step reorthogonalized, so must this one
	sel                   []bool    // the active vectors it used
	list                  [][]T     // vector lists of one step
	coef                  []T
	coupled               []int
	gram                  []T // Gram matrix of the Ritz vectors of the last combine

	// Test hooks, nil otherwise: after every step and every restart.
	afterStep, afterRestart func()

	// Convergence checks: after a check the next one is due gap steps
	// later (see schedule); estimates must pass estFactor times the
	// tolerance.
	lastRatio float64
	rate      float64 // decay of ln(ratio) per step between the last two checks
	lastMV    int
	gap       int
	estFactor float64
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
	switch opt.Reorthogonalization {
	case Partial, Full:
	default:
		return nil, fmt.Errorf("lanczos: unknown %v", opt.Reorthogonalization)
	}
	s := &lowest[T]{
		ctx: ctx, op: op, n: n, m: m, k: k, tol: tol, maxMV: maxMV,
		dotOp: dotOperator(op),
		multi: opt.Multiplicities, vectors: opt.Vectors, progress: opt.Progress,
		ld:        m + 1,
		t:         make([]float64, (m+1)*(m+1)),
		rng:       rand.New(rand.NewPCG(opt.Seed, startStream)),
		c1:        make([]T, m+1),
		c2:        make([]T, m+1),
		full:      opt.Reorthogonalization == Full,
		eps1:      eps,
		estFactor: 1,
	}
	s.omegaMax = min(sqrtEps, tol/100)
	s.settleTol = max(etaSelect, 10*s.omegaMax)
	s.omegaSelect = max(s.omegaMax*0x1p-13, 8*s.eps1)
	s.ws.part = make([]float64, numChunks[T](n)*(2*(m+1)+1))
	s.eig = make([]float64, m*m)
	s.theta = make([]float64, m)
	s.est = make([]float64, m)
	if !s.full {
		s.om = make([]float64, (m+1)*(m+1))
		s.sel = make([]bool, m+1)
		s.list = make([][]T, 0, m+1)
		s.coef = make([]T, 0, m+1)
		s.coupled = make([]int, 0, m+1)
		s.gram = make([]T, (m+1)*(m+1))
	}
	s.v = make([][]T, m+1)
	s.slot(0)
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

// dotOperator returns op as a DotOperator, or nil.
func dotOperator[T Scalar](op Operator[T]) DotOperator[T] {
	d, _ := op.(DotOperator[T])
	return d
}

// slot returns s.v[i], allocated on first use: a run that converges
// before the basis is full never touches the memory of the slots it does
// not reach.
func (s *lowest[T]) slot(i int) []T {
	if s.v[i] == nil {
		s.v[i] = make([]T, s.n)
	}
	return s.v[i]
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
// the result and appends v[nl+b] to the active basis.
func (s *lowest[T]) step() error {
	var err error
	if s.full {
		err = s.stepFull()
	} else {
		err = s.stepPartial()
	}
	if err == nil && s.afterStep != nil {
		s.afterStep()
	}
	return err
}

// stepFull orthogonalizes H v[nl+b] against v[0:nl+b+1] twice.
func (s *lowest[T]) stepFull() error {
	if err := s.ctx.Err(); err != nil {
		return err
	}
	j := s.nl + s.b
	dst := s.slot(j + 1)
	if err := s.op.Apply(s.ctx, dst, s.v[j]); err != nil {
		return fmt.Errorf("lanczos: apply: %w", err)
	}
	s.mv++
	s.reorths++
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
// for theta[i]) and the residual estimates |t[b, 0:b] u[:, i]|. theta, u
// and est are overwritten by the next call.
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
	est = s.est[:b]
	clear(est)
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

// keepColumns copies the first kk columns of the b x b matrix u into a new
// b x kk matrix.
func keepColumns(u []float64, b, kk int) []float64 {
	keep := make([]float64, b*kk)
	for l := range b {
		copy(keep[l*kk:(l+1)*kk], u[l*b:l*b+kk])
	}
	return keep
}

// restart keeps the kk lowest Ritz vectors: they replace v[nl:nl+kk], the
// next Lanczos vector moves to v[nl+kk], and T becomes diag(theta[:kk]) with
// the couplings of the next vector in row kk (Wu and Simon's thick restart).
// After an invariant subspace the next vector is a new random one,
// orthogonal to all kept vectors and uncoupled, unless the kept vectors
// already span the whole space. With Partial, the Gram matrix of the kept
// vectors and the next one, measured in the same pass, replaces the omega
// estimates.
func (s *lowest[T]) restart(kk int, theta, u []float64) error {
	b := s.b
	row := s.t[b*s.ld : b*s.ld+b]
	coupling := make([]float64, kk)
	for i := range kk {
		for l, tl := range row {
			coupling[i] += tl * u[l*b+i]
		}
	}
	keep := keepColumns(u, b, kk)
	active := s.v[s.nl : s.nl+b]
	if s.full {
		combine(&s.ws, active, keep, nil, active[:kk], nil, nil)
	} else {
		var next []T
		if !s.invariant {
			next = s.v[s.nl+b]
		}
		gram := s.gram[:(kk+1)*(kk+1)]
		combine(&s.ws, active, keep, nil, active[:kk], gram, next)
		if err := s.settle(kk, theta, coupling, gram, next != nil); err != nil {
			return err
		}
	}
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
			if err := s.randomOrthogonal(s.slot(s.nl+kk), s.nl+kk); err != nil {
				return err
			}
			s.invariant = false
		}
	}
	copy(s.t[kk*s.ld:kk*s.ld+kk], coupling)
	s.b = kk
	s.restarts++
	if s.afterRestart != nil {
		s.afterRestart()
	}
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

// assessment is the outcome of one convergence check: ka of the lowest
// active Ritz pairs belong to the K lowest, want of them must converge
// (one more in a verification pass), nconv of the K are within the
// tolerance, conv says whether the pass may end, and ratio is the largest
// estimate over its threshold among the wanted pairs.
type assessment struct {
	ka, want, nconv int
	conv            bool
	ratio           float64
}

func (s *lowest[T]) assess(theta, est []float64) assessment {
	ka := s.selectActive(theta)
	want := ka
	if s.nl > 0 {
		want = ka + 1
	}
	// Not converged while the basis is smaller than what is wanted.
	a := assessment{ka: ka, conv: s.nl+ka >= s.k && want <= s.b}
	want = min(want, s.b)
	a.want = want
	a.nconv = s.k - ka
	for i := range want {
		lim := s.estFactor * s.tolFor(theta[i])
		ok := est[i] <= lim
		a.ratio = max(a.ratio, est[i]/lim)
		a.conv = a.conv && ok
		if ok && i < ka {
			a.nconv++
		}
	}
	return a
}

// checkDue reports whether the Ritz estimates should be checked after this
// step: always while the projected eigenproblem (about b^3 flops) is cheap
// against one pass over a vector, otherwise on the schedule.
func (s *lowest[T]) checkDue() bool {
	b := s.b
	return b*b*b <= s.n/64 || s.mv-s.lastMV >= s.gap
}

// schedule sets the number of steps to the next check from the decay of
// the largest estimate ratio since the last check: a quarter of the steps
// that a geometric decay at that rate would need to reach the tolerance,
// at least one. Lanczos convergence accelerates, so the extrapolation
// overestimates and the quarter keeps the checks from overshooting.
func (s *lowest[T]) schedule(ratio float64) {
	gap := 1
	s.rate = 0
	if steps := s.mv - s.lastMV; s.lastRatio > 0 && ratio > 1 && ratio < s.lastRatio && steps > 0 {
		s.rate = math.Log(s.lastRatio/ratio) / float64(steps)
		gap = max(1, int(math.Log(ratio)/s.rate/4))
	}
	s.gap, s.lastRatio, s.lastMV = gap, ratio, s.mv
}

// remaining is the number of steps that the decay rate measured by the
// last two checks predicts until the wanted estimates pass, or 0 when
// there is no such prediction.
func (s *lowest[T]) remaining() float64 {
	if s.rate <= 0 || s.lastRatio <= 1 {
		return 0
	}
	return math.Log(s.lastRatio) / s.rate
}

// check solves the projected eigenproblem, assesses convergence, schedules
// the next check and reports progress.
func (s *lowest[T]) check() (theta, u []float64, a assessment, err error) {
	theta, u, est, err := s.ritz()
	if err != nil {
		return nil, nil, a, err
	}
	a = s.assess(theta, est)
	s.schedule(a.ratio)
	if s.progress != nil {
		s.progress(s.mv, a.nconv)
	}
	return theta, u, a, nil
}

// cycle runs Lanczos steps until the wanted estimates converge (checked
// when due), the basis is full, the space is invariant or the budget is
// spent, and returns the last check.
func (s *lowest[T]) cycle(capacity, reserve int) (theta, u []float64, a assessment, err error) {
	for s.b < capacity && !s.invariant && s.mv+1+reserve <= s.maxMV {
		if err := s.step(); err != nil {
			return nil, nil, a, err
		}
		if s.b < capacity && !s.invariant && s.mv+1+reserve <= s.maxMV && s.checkDue() {
			theta, u, a, err = s.check()
			if err != nil || a.conv {
				return theta, u, a, err
			}
		}
	}
	return s.check()
}

func (s *lowest[T]) run() (*Result[T], error) {
	reserve := s.k // applications kept back for the explicit check
	var final []pair
	verified := false
	for {
		capacity := s.m - s.nl
		theta, u, a, err := s.cycle(capacity, reserve)
		if err != nil {
			return nil, err
		}
		complete := s.invariant && s.nl+s.b == s.n
		outOfBudget := s.mv+1+reserve > s.maxMV
		if !a.conv && !complete && !outOfBudget {
			limit := s.b - 1
			if s.invariant {
				limit = s.b // the void next vector is replaced, nothing is lost
			}
			kk := max(0, min(limit, a.want+(capacity-a.want)/2))
			if rem := s.remaining(); rem > 0 && float64(a.want+2)+1.25*rem <= float64(capacity-1) {
				// Convergence is predicted within the next cycle even with
				// few kept vectors: keep few, which makes the restart cheap.
				kk = max(0, min(kk, a.want+max(1, (capacity-a.want)/8)))
			}
			if err := s.restart(kk, theta, u); err != nil {
				return nil, err
			}
			continue
		}

		// Form the wanted Ritz vectors and check them explicitly: into free
		// slots when there are enough, so that the basis survives a failed
		// check, otherwise in place by a restart.
		ka := a.ka
		free := s.nl + s.b + 1
		var ys [][]T
		var work []T
		slot0 := s.nl // slot of ys[0]
		usedNext := false
		if !s.invariant && s.b < capacity && free+ka < len(s.v) {
			for i := free; i <= free+ka; i++ {
				s.slot(i)
			}
			ys, work, slot0 = s.v[free:free+ka], s.v[free+ka], free
			var gram []T
			if !s.full {
				gram = s.gram[:(ka+1)*(ka+1)]
			}
			combine(&s.ws, s.v[s.nl:s.nl+s.b], keepColumns(u, s.b, ka), nil, ys, gram, nil)
			if gram != nil {
				s.tidy(ys, gram, ka+1)
			}
		} else {
			kk := min(s.b, a.want+(capacity-a.want)/2)
			if kk == capacity && !s.invariant {
				kk = max(a.want, capacity-1)
			}
			if err := s.restart(kk, theta, u); err != nil {
				return nil, err
			}
			ys = s.v[s.nl : s.nl+ka]
			if !s.full {
				s.tidy(ys, s.gram, kk+1)
			}
			switch {
			case s.nl+kk+1 <= s.m:
				work = s.slot(s.nl + kk + 1)
			case s.invariant:
				work, usedNext = s.slot(s.nl+kk), true
			default:
				work = make([]T, s.n) // not reached with validated options
			}
		}
		active := make([]pair, ka)
		accept := true
		for i, y := range ys {
			val, res, err := s.explicit(y, work)
			if err != nil {
				return nil, err
			}
			active[i] = pair{val, res, slot0 + i}
			accept = accept && res <= s.tolFor(val)
		}
		if usedNext {
			clear(work)
		}
		outOfBudget = s.mv+1+reserve > s.maxMV
		if !accept && !outOfBudget && !complete {
			// The estimates were optimistic: ask more of them.
			s.estFactor *= 0.1
			s.lastRatio = 0
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
		if s.multi && s.nl > 0 && ka == 0 && a.conv {
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
		s.force = false
		s.estFactor, s.lastRatio, s.gap = 1, 0, 1
		clear(s.t)
		if err := s.randomOrthogonal(s.slot(s.nl), s.nl); err != nil {
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
	c := s.c1[:1]
	if s.dotOp != nil {
		dot, _, err := s.dotOp.ApplyDot(s.ctx, work, y)
		if err != nil {
			return 0, 0, fmt.Errorf("lanczos: apply: %w", err)
		}
		c[0] = fromReal[T](dot)
	} else {
		if err := s.op.Apply(s.ctx, work, y); err != nil {
			return 0, 0, fmt.Errorf("lanczos: apply: %w", err)
		}
		dotMany(&s.ws, [][]T{y}, work, c)
	}
	s.mv++
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
	r := &Result[T]{Matvecs: s.mv, Restarts: s.restarts, Reorthogonalizations: s.reorths, Converged: true}
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
