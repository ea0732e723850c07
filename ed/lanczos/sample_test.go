package lanczos

import (
	"context"
	"math"
	"math/rand/v2"
	"slices"
	"sort"
	"testing"

	"gonum.org/v1/gonum/lapack"
	lapackgonum "gonum.org/v1/gonum/lapack/gonum"
)

// tridiagonalQL against gonum's Dsteqr (LAPACK's implicit QL/QR with all
// eigenvectors) on seeded random tridiagonal matrices, including ones with
// tiny and zero couplings and clustered diagonals. Tolerances: eigenvalues
// 1e-13 relative to the matrix norm; squared first components 1e-12.
func TestTridiagonalQLAgainstDsteqr(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for trial := range 60 {
		n := 1 + rng.IntN(80)
		d := make([]float64, n)
		e := make([]float64, max(n-1, 0))
		for i := range d {
			d[i] = 2*rng.Float64() - 1
			if trial%3 == 1 {
				d[i] = float64(rng.IntN(3)) // clustered
			}
		}
		for i := range e {
			e[i] = 2*rng.Float64() - 1
			switch {
			case trial%5 == 2 && i%7 == 3:
				e[i] = 0
			case trial%5 == 3 && i%4 == 1:
				e[i] = 1e-14 * e[i]
			}
		}
		// Reference.
		dr, er := slices.Clone(d), slices.Clone(e)
		z := make([]float64, n*n)
		work := make([]float64, max(1, 2*n-2))
		if !(lapackgonum.Implementation{}).Dsteqr(lapack.EVTridiag, n, dr, er, z, n, work) {
			t.Fatal("Dsteqr failed")
		}
		refW := make([]float64, n)
		for j := range n {
			refW[j] = z[j] * z[j] // row 0, column j
		}
		// Ours.
		dq, eq := slices.Clone(d), slices.Clone(e)
		first := make([]float64, n)
		first[0] = 1
		if err := tridiagonalQL(dq, eq, first); err != nil {
			t.Fatal(err)
		}
		idx := make([]int, n)
		for i := range idx {
			idx[i] = i
		}
		sort.SliceStable(idx, func(a, b int) bool { return dq[idx[a]] < dq[idx[b]] })
		var sumW float64
		for j, o := range idx {
			if math.Abs(dq[o]-dr[j]) > 1e-13*4 {
				t.Errorf("trial %d n=%d: eigenvalue %d = %.16g, Dsteqr %.16g", trial, n, j, dq[o], dr[j])
			}
			sumW += first[o] * first[o]
		}
		if math.Abs(sumW-1) > 1e-13 {
			t.Errorf("trial %d: weights sum to %.16g", trial, sumW)
		}
		// Compare weights summed over (numerically) equal eigenvalues, where
		// the eigenvectors themselves are not unique.
		for j := 0; j < n; {
			k := j
			var a, b float64
			for k < n && dr[k]-dr[j] <= 1e-10 {
				a += first[idx[k]] * first[idx[k]]
				b += refW[k]
				k++
			}
			if math.Abs(a-b) > 1e-12 {
				t.Errorf("trial %d n=%d: weight of eigenvalue %d: %.16g, Dsteqr %.16g", trial, n, j, a, b)
			}
			j = k
		}
	}
}

// Gauss quadrature (derivation): M Lanczos steps from r reproduce the
// moments <r|H^p|r> = sum_j w_j eps_j^p exactly for p < 2M; the reference
// moments are computed here by repeated application of the matrix.
// Tolerance 1e-10 relative to |r|^2 ||H||^p (||H|| <= 10 for these
// matrices). The start vector has norm 3, so the weights sum to 9.
func TestSampleMoments(t *testing.T) {
	testSampleMoments[float64](t, 7)
	testSampleMoments[complex128](t, 8)
}

func testSampleMoments[T Scalar](t *testing.T, seed uint64) {
	const n, m = 200, 6
	a := randomSparse[T](n, 8, seed)
	r := RandomVector[T](n, rand.New(rand.NewPCG(seed, 1)))
	for i := range r {
		r[i] *= 3
	}
	keep := slices.Clone(r)
	rz, err := Sample(context.Background(), a, r, m)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(floats(r), floats(keep)) {
		t.Error("Sample modified its start vector")
	}
	if rz.Steps != m || len(rz.Values) != m || math.Abs(rz.Norm-3) > 1e-13 {
		t.Fatalf("steps %d, %d values, norm %g", rz.Steps, len(rz.Values), rz.Norm)
	}
	if !slices.IsSorted(rz.Values) {
		t.Error("Ritz values not ascending")
	}
	x := slices.Clone(r)
	y := make([]T, n)
	for p := range 2 * m {
		exact := real(inner(r, x))
		var q float64
		for j, e := range rz.Values {
			q += rz.Weights[j] * math.Pow(e, float64(p))
		}
		if math.Abs(q-exact) > 1e-10*9*math.Pow(10, float64(p)) {
			t.Errorf("%T p=%d: quadrature %.15g, <r|H^p|r> %.15g", *new(T), p, q, exact)
		}
		if err := a.Apply(context.Background(), y, x); err != nil {
			t.Fatal(err)
		}
		x, y = y, x
	}
}

// An invariant Krylov space ends the recurrence early. On the ring of N
// sites (N even) the site vector e_0 is even under the reflection j -> -j,
// so its Krylov space is the even subspace, of dimension N/2 + 1, spanned
// by the plane-wave pairs q and -q; the Ritz values are then the distinct
// levels -2 cos(2 pi q/N), q = 0..N/2, with weights |<q|e_0>|^2 summed over
// each pair: 1/N for q = 0 and N/2, 2/N otherwise (derivation).
func TestSampleInvariantSubspace(t *testing.T) {
	const n = 40
	op := &ring[float64]{n: n}
	r := make([]float64, n)
	r[0] = 1
	rz, err := Sample(context.Background(), op, r, 100)
	if err != nil {
		t.Fatal(err)
	}
	if rz.Steps != n/2+1 {
		t.Fatalf("%d steps, want %d", rz.Steps, n/2+1)
	}
	for q := 0; q <= n/2; q++ {
		want := -2 * math.Cos(2*math.Pi*float64(q)/n)
		w := 2.0 / n
		if q == 0 || q == n/2 {
			w = 1.0 / n
		}
		if math.Abs(rz.Values[q]-want) > 1e-12 || math.Abs(rz.Weights[q]-w) > 1e-12 {
			t.Errorf("q=%d: value %.15g weight %.15g, want %.15g %.15g", q, rz.Values[q], rz.Weights[q], want, w)
		}
	}
}

// Input errors documented by Sample: wrong length, a zero start vector,
// fewer than one step.
func TestSampleErrors(t *testing.T) {
	op := &ring[float64]{n: 10}
	ctx := context.Background()
	if _, err := Sample(ctx, op, make([]float64, 9), 5); err == nil {
		t.Error("wrong length: no error")
	}
	if _, err := Sample(ctx, op, make([]float64, 10), 5); err == nil {
		t.Error("zero vector: no error")
	}
	if _, err := Sample(ctx, op, RandomVector[float64](10, rand.New(rand.NewPCG(1, 1))), 0); err == nil {
		t.Error("zero steps: no error")
	}
}

// RandomVector: unit norm, reproducible from the generator, and, for
// complex T, real and imaginary parts of equal variance 1/(2n) (derivation:
// normalized circular Gaussian); the variance check at n = 2^16 has a
// relative standard deviation of about 0.6%, so 5% is a 8-sigma bound.
func TestRandomVector(t *testing.T) {
	const n = 1 << 16
	c1 := RandomVector[complex128](n, rand.New(rand.NewPCG(5, 6)))
	c2 := RandomVector[complex128](n, rand.New(rand.NewPCG(5, 6)))
	if !slices.Equal(c1, c2) {
		t.Error("not reproducible")
	}
	var nr, re2, im2 float64
	for _, z := range c1 {
		re2 += real(z) * real(z)
		im2 += imag(z) * imag(z)
	}
	nr = re2 + im2
	if math.Abs(nr-1) > 1e-13 {
		t.Errorf("norm^2 %.16g", nr)
	}
	if math.Abs(re2/im2-1) > 0.05 {
		t.Errorf("real and imaginary weights %g %g", re2, im2)
	}
	r := RandomVector[float64](n, rand.New(rand.NewPCG(5, 6)))
	var s float64
	for _, x := range r {
		s += x * x
	}
	if math.Abs(s-1) > 1e-13 {
		t.Errorf("real norm^2 %.16g", s)
	}
}
