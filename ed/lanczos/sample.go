package lanczos

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sort"
)

// SampleVectors is the number of vectors of length Dim that a Sampler
// allocates (the caller's start vector not included).
const SampleVectors = 3

// Ritz is the spectral information that Lanczos from one start vector r
// gathers: the eigenvalues eps_j of the M x M tridiagonal matrix and the
// weights w_j = |r|^2 z_{0j}^2, z_{0j} the first component of its j-th unit
// eigenvector, so that for any function f
//
//	<r|f(H)|r> ~ sum_j w_j f(eps_j),
//
// exactly for polynomials f of degree below 2M (Gauss quadrature) and for
// any f when the Krylov space is invariant. The weights sum to |r|^2.
type Ritz struct {
	Values  []float64 // eps_j, ascending
	Weights []float64 // w_j
	Norm    float64   // |r|
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
		b := math.Sqrt(subtract(&s.ws, [][]T{s.v, s.prev}, c, s.w, nil))
		if b <= breakdownTol*hnorm {
			break
		}
		beta = append(beta, b)
		scale(s.w, 1/b)
		s.prev, s.v, s.w = s.v, s.w, s.prev
	}
	m := len(alpha)
	first := make([]float64, m)
	first[0] = 1
	if err := tridiagonalQL(alpha, beta[:m-1], first); err != nil {
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
	return rz, nil
}

// tridiagonalQL computes the eigenvalues of the symmetric tridiagonal
// matrix with diagonal d (length n) and off-diagonal e (length n-1) by the
// implicitly shifted QL iteration with Wilkinson's shift (Bowdler, Martin,
// Reinsch and Wilkinson, Numer. Math. 11, 293 (1968)), and applies the same
// plane rotations to the row vector z from the right. With z = e_1^T on
// entry, z holds on return the first components of the unit eigenvectors,
// which is all that Gauss quadrature needs (Golub and Welsch, Math. Comp.
// 23, 221 (1969)): O(n^2) work instead of O(n^3) for all the vectors. On
// return d holds the eigenvalues (unsorted) and e is destroyed.
func tridiagonalQL(d, e, z []float64) error {
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
				zi, zi1 := z[i], z[i+1]
				z[i+1] = sn*zi + cs*zi1
				z[i] = cs*zi - sn*zi1
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
