package lanczos

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sort"
)

// SampleVectors is the number of vectors of length Dim that a Sampler
// allocates (the caller's start vector not included). SampleObservable
// needs ObservableVectors more, for A r.
const (
	SampleVectors     = 3
	ObservableVectors = 1
)

// Ritz is the spectral information that Lanczos from one start vector r
// gathers: the eigenvalues eps_j of the M x M tridiagonal matrix and the
// weights w_j = |r|^2 z_{0j}^2, z_{0j} the first component of its j-th unit
// eigenvector, so that for any function f
//
//	<r|f(H)|r> ~ sum_j w_j f(eps_j),
//
// exactly for polynomials f of degree below 2M (Gauss quadrature) and for
// any f when the Krylov space is invariant. The weights sum to |r|^2.
//
// A sample taken with an observable A (SampleObservable) also carries
//
//	Observable_j = Re <r|psi_j><psi_j|A|r>,   <r|f(H) A|r> ~ sum_j Observable_j f(eps_j),
//
// which sum to <r|A|r>.
type Ritz struct {
	Values  []float64 // eps_j, ascending
	Weights []float64 // w_j
	// Observable holds Re <r|psi_j><psi_j|A|r> for each eps_j; nil for a
	// sample taken without an observable.
	Observable []float64
	Norm       float64 // |r|
	// Steps is the number of Lanczos steps (operator applications) taken:
	// the requested number, or fewer when an invariant subspace ended the
	// recurrence.
	Steps int
}

// Sampler runs the plain Lanczos recurrence of Sample with work vectors
// that it reuses from one call to the next: SampleVectors vectors of
// op.Dim() elements, allocated on the first call. A Sampler is not safe for
// concurrent use.
type Sampler[T Scalar] struct {
	op         Operator[T]
	prev, v, w []T
	ar         []T // A r, allocated by the first SampleObservable
	ws         workspace
}

// NewSampler returns a Sampler for op.
func NewSampler[T Scalar](op Operator[T]) *Sampler[T] { return &Sampler[T]{op: op} }

// Sample runs steps steps of plain Lanczos from r; see Sampler.Sample.
func Sample[T Scalar](ctx context.Context, op Operator[T], r []T, steps int) (*Ritz, error) {
	return NewSampler(op).Sample(ctx, r, steps)
}

// Sample runs steps steps of the plain three-term Lanczos recurrence from
// r/|r| (r itself is not modified) and returns the Ritz values and weights.
// The Krylov vectors are not kept and not reorthogonalized: loss of
// orthogonality makes converged Ritz values reappear as copies ("ghosts"),
// but the quadrature sum_j w_j f(eps_j) stays accurate, the weight of a
// value being shared among its copies (Greenbaum, Linear Algebra Appl. 113,
// 7 (1989); Meurant and Strakos, Acta Numerica 15, 471 (2006)). The recurrence stops early when the new vector's norm beta falls
// below 1e-12 times the largest ||H v|| seen (an invariant subspace).
// The context is checked before every operator application.
func (s *Sampler[T]) Sample(ctx context.Context, r []T, steps int) (*Ritz, error) {
	return s.sample(ctx, r, steps, nil)
}

// SampleObservable is Sample that also estimates <r|f(H) A|r> for the
// Hermitian operator a (of the same dimension; it need not commute with
// H), the static estimator of Jaklic and Prelovsek (Phys. Rev. B 49, 5065
// (1994)):
//
//	<r|f(H) A|r> ~ sum_j f(eps_j) <r|psi_j><psi_j|A|r>,
//	<psi_j|A|r> = sum_k U_kj <v_k|A r>,
//
// with v_k the Krylov vectors, U the eigenvectors of the tridiagonal
// matrix and <r|psi_j> = |r| U_0j. A r is formed once (one application of
// a, into one more work vector); the overlaps <v_k|A r> are accumulated in
// the recurrence's own pass over each new vector, so no Krylov vector is
// stored, and the plane rotations that give U_0j are applied to the row
// of overlaps as well (O(M^2), no U formed). The estimate is
// Re sum_k (f(T) e_1)_k |r| <v_k|A r>, the Lanczos approximation
// |r| V f(T) e_1 of f(H) r projected on A r, which stays accurate when
// the Krylov vectors lose orthogonality (Druskin, Greenbaum and
// Knizhnerman, SIAM J. Sci. Comput. 19, 38 (1998)). It is exact for
// polynomials f of degree below M, and for any f once the Krylov space is
// invariant; the real part is taken because Tr f(H) A is real, so the
// imaginary part is pure noise. The result's Observable holds the
// weights.
func (s *Sampler[T]) SampleObservable(ctx context.Context, r []T, steps int, a Operator[T]) (*Ritz, error) {
	if a == nil {
		return nil, errors.New("lanczos: SampleObservable without an observable")
	}
	if a.Dim() != s.op.Dim() {
		return nil, fmt.Errorf("lanczos: observable dimension %d, operator dimension %d", a.Dim(), s.op.Dim())
	}
	return s.sample(ctx, r, steps, a)
}

func (s *Sampler[T]) sample(ctx context.Context, r []T, steps int, obs Operator[T]) (*Ritz, error) {
	n := s.op.Dim()
	if len(r) != n {
		return nil, fmt.Errorf("lanczos: start vector length %d, dimension %d", len(r), n)
	}
	if steps < 1 {
		return nil, fmt.Errorf("lanczos: %d Lanczos steps", steps)
	}
	if s.v == nil {
		s.prev, s.v, s.w = make([]T, n), make([]T, n), make([]T, n)
		s.ws.part = make([]float64, numChunks[T](n)*5)
	}
	nr := math.Sqrt(norm2(&s.ws, r))
	if nr == 0 || math.IsNaN(nr) || math.IsInf(nr, 0) {
		return nil, errors.New("lanczos: start vector has zero or non-finite norm")
	}
	copy(s.v, r)
	scale(s.v, 1/nr)
	alpha := make([]float64, 0, steps)
	beta := make([]float64, 0, steps)
	var hnorm float64
	c := make([]T, 2)
	// overlap[k] = Re <v_k|A r>, and the arguments of the fused pass.
	var overlap []float64
	var dots [][]T
	var d []T
	if obs != nil {
		if s.ar == nil {
			s.ar = make([]T, n)
		}
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		if err := obs.Apply(ctx, s.ar, r); err != nil {
			return nil, fmt.Errorf("lanczos: apply the observable: %w", err)
		}
		d = make([]T, 1)
		if an := dotMany(&s.ws, [][]T{s.v}, s.ar, d); math.IsNaN(an) || math.IsInf(an, 0) {
			return nil, errors.New("lanczos: observable produced a non-finite vector")
		}
		overlap = make([]float64, 1, steps)
		overlap[0] = realPart(d[0])
		dots = [][]T{s.ar}
	}
	for j := range steps {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		if err := s.op.Apply(ctx, s.w, s.v); err != nil {
			return nil, fmt.Errorf("lanczos: apply: %w", err)
		}
		h2 := dotMany(&s.ws, [][]T{s.v}, s.w, c[:1])
		if math.IsNaN(h2) || math.IsInf(h2, 0) {
			return nil, errors.New("lanczos: operator produced a non-finite vector")
		}
		hnorm = max(hnorm, math.Sqrt(h2))
		a := realPart(c[0])
		alpha = append(alpha, a)
		if j == steps-1 {
			break
		}
		c[0] = fromReal[T](a)
		c[1] = 0
		if j > 0 {
			c[1] = fromReal[T](beta[j-1])
		}
		var b float64
		if obs == nil {
			b = math.Sqrt(subtract(&s.ws, [][]T{s.v, s.prev}, c, s.w, nil))
		} else {
			// The same pass gives <A r|w>, w = b v_{j+1}: Re <v_{j+1}|A r>
			// is its real part over b.
			b = math.Sqrt(update(&s.ws, [][]T{s.v, s.prev}, c, s.w, dots, d))
		}
		if b <= breakdownTol*hnorm {
			break
		}
		beta = append(beta, b)
		if obs != nil {
			overlap = append(overlap, realPart(d[0])/b)
		}
		scale(s.w, 1/b)
		s.prev, s.v, s.w = s.v, s.w, s.prev
	}
	m := len(alpha)
	first := make([]float64, m)
	first[0] = 1
	rows := [][]float64{first}
	if obs != nil {
		rows = append(rows, overlap[:m])
	}
	if err := tridiagonalQL(alpha, beta[:m-1], rows...); err != nil {
		return nil, err
	}
	order := make([]int, m)
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return alpha[order[a]] < alpha[order[b]] })
	rz := &Ritz{Values: make([]float64, m), Weights: make([]float64, m), Norm: nr, Steps: m}
	for i, o := range order {
		rz.Values[i] = alpha[o]
		rz.Weights[i] = nr * nr * first[o] * first[o]
	}
	if obs != nil {
		rz.Observable = make([]float64, m)
		for i, o := range order {
			rz.Observable[i] = nr * first[o] * overlap[o]
		}
	}
	return rz, nil
}

// tridiagonalQL computes the eigenvalues of the symmetric tridiagonal
// matrix with diagonal d (length n) and off-diagonal e (length n-1) by the
// implicitly shifted QL iteration with Wilkinson's shift (Bowdler, Martin,
// Reinsch and Wilkinson, Numer. Math. 11, 293 (1968)), and applies the same
// plane rotations to each row vector z of zs (length n) from the right:
// z <- z U, U the unit eigenvectors as columns. With z = e_1^T on entry, z
// holds on return the first components of the unit eigenvectors, which is
// all that Gauss quadrature needs (Golub and Welsch, Math. Comp. 23, 221
// (1969)): O(n^2) work per row instead of O(n^3) for all the vectors. On
// return d holds the eigenvalues (unsorted) and e is destroyed.
func tridiagonalQL(d, e []float64, zs ...[]float64) error {
	n := len(d)
	if n <= 1 {
		return nil
	}
	// sub[i] couples i and i+1; sub[n-1] = 0 is a sentinel.
	sub := make([]float64, n)
	copy(sub, e)
	const eps = 0x1p-52
	for l := 0; l < n; l++ {
		for iter := 0; ; iter++ {
			// Find the first negligible coupling at or after l.
			m := l
			for ; m < n-1; m++ {
				if math.Abs(sub[m]) <= eps*(math.Abs(d[m])+math.Abs(d[m+1])) {
					break
				}
			}
			if m == l {
				break // d[l] is an eigenvalue
			}
			if iter == 50 {
				return errors.New("lanczos: tridiagonal QL iteration did not converge")
			}
			// Wilkinson's shift: the eigenvalue of the leading 2 x 2 block
			// of the unreduced part [l, m] nearer to d[l].
			g := (d[l+1] - d[l]) / (2 * sub[l])
			r := math.Hypot(g, 1)
			g = d[m] - d[l] + sub[l]/(g+math.Copysign(r, g))
			sn, cs, p := 1.0, 1.0, 0.0
			deflated := false
			for i := m - 1; i >= l; i-- {
				f := sn * sub[i]
				b := cs * sub[i]
				r = math.Hypot(f, g)
				sub[i+1] = r
				if r == 0 {
					// The rotation underflowed: the block splits at i+1.
					d[i+1] -= p
					sub[m] = 0
					deflated = true
					break
				}
				sn, cs = f/r, g/r
				g = d[i+1] - p
				r = (d[i]-g)*sn + 2*cs*b
				p = sn * r
				d[i+1] = g + p
				g = cs*r - b
				for _, z := range zs {
					zi, zi1 := z[i], z[i+1]
					z[i+1] = sn*zi + cs*zi1
					z[i] = cs*zi - sn*zi1
				}
			}
			if deflated {
				continue
			}
			d[l] -= p
			sub[l] = g
			sub[m] = 0
		}
	}
	return nil
}
