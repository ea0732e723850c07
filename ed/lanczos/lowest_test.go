package lanczos

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"runtime"
	"slices"
	"testing"
)

// Lowest against gonum's dense eigensolver (mat.EigenSym; complex matrices
// through their real 2n embedding) on seeded random sparse Hermitian
// matrices. Tolerance: eigenvalues to 1e-9 absolute (the spectra lie in
// about [-8, 8]); explicit residuals recomputed here to 1e-10 max(1,|theta|)
// (Tol) times 10 for rounding in this test's own residual.
func TestLowestRandomSparse(t *testing.T) {
	for _, n := range []int{50, 137, 400} {
		for _, k := range []int{1, 4, 10} {
			testLowestRandom[float64](t, n, k, uint64(n*31+k))
			testLowestRandom[complex128](t, n, k, uint64(n*37+k))
		}
	}
}

func testLowestRandom[T Scalar](t *testing.T, n, k int, seed uint64) {
	a := randomSparse[T](n, 8, seed)
	ref := denseEigenvalues(t, a.dense(), n)
	for _, mode := range []Reorthogonalization{Partial, Full} {
		testLowestRandomMode(t, a, ref, n, k, seed, mode)
	}
}

func testLowestRandomMode[T Scalar](t *testing.T, a *sparse[T], ref []float64, n, k int, seed uint64, mode Reorthogonalization) {
	res, err := Lowest(context.Background(), a, Options[T]{K: k, Vectors: true, Seed: seed, Reorthogonalization: mode})
	if err != nil {
		t.Fatal(err)
	}
	name := "real " + mode.String()
	if isComplex[T]() {
		name = "complex " + mode.String()
	}
	if !res.Converged {
		t.Errorf("%s n=%d K=%d: not converged: %v", name, n, k, res.Warnings)
	}
	if len(res.Values) != k || len(res.Vectors) != k || len(res.Residuals) != k {
		t.Fatalf("%s n=%d K=%d: lengths %d %d %d", name, n, k, len(res.Values), len(res.Vectors), len(res.Residuals))
	}
	for i, v := range res.Values {
		if math.Abs(v-ref[i]) > 1e-9 {
			t.Errorf("%s n=%d K=%d: value %d = %.15g, reference %.15g", name, n, k, i, v, ref[i])
		}
		r := residual(t, a, res.Vectors[i], v)
		if r > 1e-9*max(1, math.Abs(v)) {
			t.Errorf("%s n=%d K=%d: residual %d = %g", name, n, k, i, r)
		}
		if math.Abs(r-res.Residuals[i]) > 1e-12*max(1, math.Abs(v)) {
			t.Errorf("%s n=%d K=%d: reported residual %g, recomputed %g", name, n, k, res.Residuals[i], r)
		}
		for j := 0; j <= i; j++ {
			g := inner(res.Vectors[j], res.Vectors[i])
			want := 0.0
			if i == j {
				want = 1
			}
			if math.Abs(real(g)-want) > 1e-10 || math.Abs(imag(g)) > 1e-10 {
				t.Errorf("%s n=%d K=%d: <y%d,y%d> = %v", name, n, k, j, i, g)
			}
		}
	}
	t.Logf("%s n=%d K=%d: %d matvecs, %d restarts, %d reorthogonalized", name, n, k, res.Matvecs, res.Restarts, res.Reorthogonalizations)
}

// The tight-binding ring, H = -sum_j (e^{i phi}|j><j+1| + h.c.), has the
// closed-form spectrum eps_q = -2 cos(2 pi q/N + phi) (plane waves); the
// open chain eps_k = -2 cos(pi k/(N+1)), k = 1..N (standing waves).
// Tolerance 1e-9.
func TestLowestTightBinding(t *testing.T) {
	// Ring without flux: eps_q = eps_{-q}, so every level but the lowest is
	// doubly degenerate; Multiplicities completes them.
	ring0 := &ring[float64]{n: 200}
	r0, err := Lowest(context.Background(), ring0, Options[float64]{K: 5, Multiplicities: true, Vectors: true})
	if err != nil {
		t.Fatal(err)
	}
	compareValues(t, "ring N=200", r0.Values, ringSpectrum(200, 0)[:5], 1e-9)
	if !r0.Converged || len(r0.Warnings) != 0 {
		t.Errorf("ring N=200: converged %v, warnings %v", r0.Converged, r0.Warnings)
	}
	for i, y := range r0.Vectors {
		if r := residual(t, ring0, y, r0.Values[i]); r > 1e-9 {
			t.Errorf("ring N=200: residual %d = %g", i, r)
		}
	}

	// Ring with flux phi = 0.3 (complex): the degeneracy is lifted.
	ringF := &ring[complex128]{n: 150, phi: 0.3}
	rf, err := Lowest(context.Background(), ringF, Options[complex128]{K: 6, Vectors: true})
	if err != nil {
		t.Fatal(err)
	}
	compareValues(t, "ring N=150 phi=0.3", rf.Values, ringSpectrum(150, 0.3)[:6], 1e-9)
	for i, y := range rf.Vectors {
		if r := residual(t, ringF, y, rf.Values[i]); r > 1e-9 {
			t.Errorf("ring N=150 phi=0.3: residual %d = %g", i, r)
		}
	}

	// Open chain (real, non-degenerate).
	open := &ring[float64]{n: 300, open: true}
	ro, err := Lowest(context.Background(), open, Options[float64]{K: 4})
	if err != nil {
		t.Fatal(err)
	}
	compareValues(t, "open chain N=300", ro.Values, openChainSpectrum(300)[:4], 1e-9)
	if !ro.Converged {
		t.Errorf("open chain: %v", ro.Warnings)
	}
}

func compareValues(t *testing.T, name string, got, want []float64, tol float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d values, want %d", name, len(got), len(want))
	}
	for i := range got {
		if math.Abs(got[i]-want[i]) > tol {
			t.Errorf("%s: value %d = %.15g, want %.15g", name, i, got[i], want[i])
		}
	}
}

// A bound state: the ring with an attractive impurity -V|0><0| has, for an
// infinite ring, the single level below the band at E_b = -sqrt(4 + V^2)
// (derivation: with G_00(E) = (1/N) sum_q 1/(E - eps_q) -> -1/sqrt(E^2-4)
// for E < -2, the bound state solves 1 = -V G_00(E)); on a ring of N sites
// the correction is of order e^{-kappa N}, cosh kappa = |E_b|/2, which is
// below rounding for N = 5000 (kappa = 0.48 at V = 1). Tolerance 1e-9.
func TestLowestImpurityBoundState(t *testing.T) {
	for _, v := range []float64{1, 0.5} {
		op := &ring[float64]{n: 5000, v: v}
		res, err := Lowest(context.Background(), op, Options[float64]{Vectors: true})
		if err != nil {
			t.Fatal(err)
		}
		want := -math.Sqrt(4 + v*v)
		if math.Abs(res.Values[0]-want) > 1e-9 || !res.Converged {
			t.Errorf("V=%g: E = %.15g, want %.15g (converged %v)", v, res.Values[0], want, res.Converged)
		}
		if r := residual(t, op, res.Vectors[0], res.Values[0]); r > 1e-9*math.Abs(want) {
			t.Errorf("V=%g: residual %g", v, r)
		}
		t.Logf("V=%g: %d matvecs", v, res.Matvecs)
	}
}

// Degenerate levels. H = diag(A, ..., A) with c identical random sparse
// blocks has every eigenvalue of A with multiplicity c (derivation), and
// gonum's mat.EigenSym on the full matrix is the reference. Without
// Multiplicities the package documents a lower bound: every value returned
// is an eigenvalue, every distinct level below the largest value returned
// appears, no level appears more often than its multiplicity, and a warning
// names every group of equal values. With Multiplicities the K lowest
// eigenvalues are returned with their multiplicities. Tolerance 1e-9.
func TestLowestDegenerate(t *testing.T) {
	for _, copies := range []int{2, 3} {
		for _, n := range []int{30, 60, 200} {
			testDegenerate[float64](t, copies, n)
			testDegenerate[complex128](t, copies, n)
		}
	}
}

func testDegenerate[T Scalar](t *testing.T, copies, n int) {
	a := randomSparse[T](n, 8, uint64(100*copies+n))
	h := blockDiagonal(a, copies)
	levels := denseEigenvalues(t, a.dense(), n) // each of multiplicity copies
	ref := denseEigenvalues(t, h.dense(), h.n)
	for _, mode := range []Reorthogonalization{Partial, Full} {
		testDegenerateMode(t, h, levels, ref, copies, n, mode)
	}
}

func testDegenerateMode[T Scalar](t *testing.T, h *sparse[T], levels, ref []float64, copies, n int, mode Reorthogonalization) {
	const k = 6
	name := fmt.Sprintf("%T %v copies=%d n=%d", *new(T), mode, copies, n)

	// Documented lower bound without Multiplicities.
	res, err := Lowest(context.Background(), h, Options[T]{K: k, Vectors: true, Reorthogonalization: mode})
	if err != nil {
		t.Fatal(err)
	}
	if !res.Converged {
		t.Errorf("%s: not converged", name)
	}
	count := make([]int, n)
	for _, v := range res.Values {
		at := -1
		for l, lv := range levels {
			if math.Abs(v-lv) <= 1e-9 {
				at = l
			}
		}
		if at < 0 {
			t.Errorf("%s: %.15g is not an eigenvalue", name, v)
			continue
		}
		count[at]++
	}
	top := res.Values[k-1]
	groups := 0
	for l, lv := range levels {
		if lv < top-1e-9 && count[l] == 0 {
			t.Errorf("%s: level %.15g below %.15g missing", name, lv, top)
		}
		if count[l] > copies {
			t.Errorf("%s: level %.15g found %d times, multiplicity %d", name, lv, count[l], copies)
		}
		if count[l] > 1 {
			groups++
		}
	}
	if len(res.Warnings) != groups {
		t.Errorf("%s: %d groups of equal values, warnings %q", name, groups, res.Warnings)
	}
	for i, y := range res.Vectors {
		if r := residual(t, h, y, res.Values[i]); r > 1e-9*max(1, math.Abs(res.Values[i])) {
			t.Errorf("%s: residual %d = %g", name, i, r)
		}
		for j := range i {
			if g := inner(res.Vectors[j], y); cmplx.Abs(g) > 1e-10 {
				t.Errorf("%s: <y%d,y%d> = %v", name, j, i, g)
			}
		}
	}

	// Complete multiplicities.
	res, err = Lowest(context.Background(), h, Options[T]{K: k, Multiplicities: true, Vectors: true, Seed: 5, Reorthogonalization: mode})
	if err != nil {
		t.Fatal(err)
	}
	compareValues(t, name+" Multiplicities", res.Values, ref[:k], 1e-9)
	if !res.Converged || len(res.Warnings) != 0 {
		t.Errorf("%s Multiplicities: converged %v, warnings %q", name, res.Converged, res.Warnings)
	}
	for i, y := range res.Vectors {
		if r := residual(t, h, y, res.Values[i]); r > 1e-9*max(1, math.Abs(res.Values[i])) {
			t.Errorf("%s Multiplicities: residual %d = %g", name, i, r)
		}
		for j := range i {
			if g := inner(res.Vectors[j], y); cmplx.Abs(g) > 1e-10 {
				t.Errorf("%s Multiplicities: <y%d,y%d> = %v", name, j, i, g)
			}
		}
	}
}

// dotSparse is a sparse matrix that is a DotOperator: ApplyDot forms the
// product and sums Re <src, dst> and ||dst||^2 in index order.
type dotSparse[T Scalar] struct {
	*sparse[T]
	calls int
}

func (a *dotSparse[T]) ApplyDot(ctx context.Context, dst, src []T) (float64, float64, error) {
	if err := a.Apply(ctx, dst, src); err != nil {
		return 0, 0, err
	}
	a.calls++
	var dot, n2 float64
	x, y := floats(src), floats(dst)
	for i := range x {
		dot += x[i] * y[i]
		n2 += y[i] * y[i]
	}
	return dot, n2, nil
}

// With a DotOperator Lowest takes alpha and ||H q||^2 from the product;
// the results must be those of the plain operator to the tolerances of
// TestLowestRandomSparse (the same matrices, both reorthogonalizations, with
// and without Multiplicities, whose verification passes go through Apply),
// the product path must have been used, and runs must be reproducible.
func TestLowestDotOperator(t *testing.T) {
	testLowestDot(t, randomSparse[float64](400, 8, 41), 4)
	testLowestDot(t, randomSparse[complex128](300, 8, 43), 3)
}

func testLowestDot[T Scalar](t *testing.T, a *sparse[T], k int) {
	ref := denseEigenvalues(t, a.dense(), a.n)
	for _, mode := range []Reorthogonalization{Partial, Full} {
		for _, multi := range []bool{false, true} {
			name := fmt.Sprintf("complex %v, %v, multiplicities %v", isComplex[T](), mode, multi)
			opt := Options[T]{K: k, Vectors: true, Seed: 5, Reorthogonalization: mode, Multiplicities: multi}
			d := &dotSparse[T]{sparse: a}
			res, err := Lowest[T](context.Background(), d, opt)
			if err != nil {
				t.Fatal(err)
			}
			if d.calls == 0 {
				t.Errorf("%s: ApplyDot not used", name)
			}
			if !res.Converged {
				t.Errorf("%s: not converged: %v", name, res.Warnings)
			}
			compareValues(t, name, res.Values, ref[:k], 1e-9)
			for i, v := range res.Values {
				r := residual(t, a, res.Vectors[i], v)
				if r > 1e-9*max(1, math.Abs(v)) || math.Abs(r-res.Residuals[i]) > 1e-12*max(1, math.Abs(v)) {
					t.Errorf("%s: residual %d = %g, reported %g", name, i, r, res.Residuals[i])
				}
			}
			again, err := Lowest[T](context.Background(), &dotSparse[T]{sparse: a}, opt)
			if err != nil {
				t.Fatal(err)
			}
			sameResult(t, name, res, again)
		}
	}
}

// The same seed gives bit-identical results (derivation: the start vector
// comes from a seeded PCG and every reduction is summed in a fixed chunk
// order); also across GOMAXPROCS for a vector long enough for the parallel
// kernels, with an operator whose rows do not depend on the worker count.
func TestLowestReproducible(t *testing.T) {
	a := randomSparse[complex128](300, 8, 9)
	opt := Options[complex128]{K: 4, Vectors: true, Seed: 77}
	r1, err := Lowest(context.Background(), a, opt)
	if err != nil {
		t.Fatal(err)
	}
	r2, err := Lowest(context.Background(), a, opt)
	if err != nil {
		t.Fatal(err)
	}
	sameResult(t, "complex n=300", r1, r2)

	op := &ring[float64]{n: 1<<17 + 3, v: 1, parallel: true}
	for _, mode := range []Reorthogonalization{Partial, Full} {
		o := Options[float64]{Vectors: true, Seed: 3, Reorthogonalization: mode}
		prev := runtime.GOMAXPROCS(1)
		s1, err1 := Lowest(context.Background(), op, o)
		runtime.GOMAXPROCS(max(2, prev))
		s2, err2 := Lowest(context.Background(), op, o)
		runtime.GOMAXPROCS(prev)
		if err1 != nil || err2 != nil {
			t.Fatal(err1, err2)
		}
		sameResult(t, "ring 2^17+3, GOMAXPROCS 1 and 2, "+mode.String(), s1, s2)
	}
}

func sameResult[T Scalar](t *testing.T, name string, a, b *Result[T]) {
	t.Helper()
	if !slices.Equal(a.Values, b.Values) || !slices.Equal(a.Residuals, b.Residuals) ||
		a.Matvecs != b.Matvecs || a.Restarts != b.Restarts {
		t.Fatalf("%s: results differ: %v %v, %v %v, %d %d", name, a.Values, b.Values, a.Residuals, b.Residuals, a.Matvecs, b.Matvecs)
	}
	for i := range a.Vectors {
		if !slices.Equal(floats(a.Vectors[i]), floats(b.Vectors[i])) {
			t.Fatalf("%s: vector %d differs", name, i)
		}
	}
}

// Cancellation: the context is checked before every application of the
// operator, so a context cancelled during application c stops the run with
// exactly c applications.
func TestLowestCancel(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	op := &ring[float64]{n: 500}
	if _, err := Lowest(ctx, op, Options[float64]{}); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled before start: %v", err)
	}
	if op.applies != 0 {
		t.Errorf("cancelled before start: %d applications", op.applies)
	}

	ctx, cancel = context.WithCancel(context.Background())
	defer cancel()
	op = &ring[float64]{n: 500, onApply: func(c int) {
		if c == 17 {
			cancel()
		}
	}}
	_, err := Lowest(ctx, op, Options[float64]{})
	if !errors.Is(err, context.Canceled) || op.applies != 17 {
		t.Errorf("cancelled at 17: err %v after %d applications", err, op.applies)
	}

	// Sample checks the context in the same way.
	ctx, cancel = context.WithCancel(context.Background())
	defer cancel()
	op = &ring[float64]{n: 500, onApply: func(c int) {
		if c == 5 {
			cancel()
		}
	}}
	_, err = Sample(ctx, op, RandomVector[float64](500, rand.New(rand.NewPCG(1, 1))), 50)
	if !errors.Is(err, context.Canceled) || op.applies != 5 {
		t.Errorf("Sample cancelled at 5: err %v after %d applications", err, op.applies)
	}
}

// An operator error is returned wrapped (errors.Is finds it), as Lowest
// and Sample document.
func TestLowestApplyError(t *testing.T) {
	boom := errors.New("boom")
	op := &failing{ring: ring[float64]{n: 100}, after: 7, err: boom}
	if _, err := Lowest(context.Background(), op, Options[float64]{}); !errors.Is(err, boom) {
		t.Errorf("Lowest: %v", err)
	}
	op.calls = 0
	if _, err := Sample(context.Background(), op, RandomVector[float64](100, rand.New(rand.NewPCG(1, 2))), 20); !errors.Is(err, boom) {
		t.Errorf("Sample: %v", err)
	}
}

type failing struct {
	ring[float64]
	after, calls int
	err          error
}

func (f *failing) Apply(ctx context.Context, dst, src []float64) error {
	f.calls++
	if f.calls > f.after {
		return f.err
	}
	return f.ring.Apply(ctx, dst, src)
}

// A budget too small to converge gives the best values, Converged false and
// a warning, not an error; MaxIterations counts every application. The
// reference is gonum's mat.EigenSym: the best values are upper bounds of
// the eigenvalues (Cauchy interlacing for Rayleigh-Ritz values).
func TestLowestBudget(t *testing.T) {
	a := randomSparse[float64](400, 8, 31)
	ref := denseEigenvalues(t, a.dense(), 400)
	var calls []int
	res, err := Lowest(context.Background(), a, Options[float64]{K: 2, MaxIterations: 25,
		Progress: func(mv, conv int) { calls = append(calls, mv) }})
	if err != nil {
		t.Fatal(err)
	}
	if res.Converged || len(res.Warnings) == 0 || len(res.Values) != 2 || res.Matvecs > 25 {
		t.Fatalf("converged %v, warnings %q, values %v, %d matvecs", res.Converged, res.Warnings, res.Values, res.Matvecs)
	}
	for i, v := range res.Values {
		if v < ref[i]-1e-12 {
			t.Errorf("value %d = %.15g below eigenvalue %.15g", i, v, ref[i])
		}
	}
	if len(calls) == 0 || calls[len(calls)-1] > 25 {
		t.Errorf("progress calls %v", calls)
	}
}

// Invalid options are errors, as Options documents: K outside 1..Dim, a
// negative or NaN Tol, Basis below K+2 (2K+2 with Multiplicities),
// MaxIterations below 2K, a start vector of the wrong length or zero, an
// unknown Reorthogonalization.
func TestLowestOptionErrors(t *testing.T) {
	op := &ring[float64]{n: 50}
	for _, o := range []Options[float64]{
		{K: 51}, {K: -1}, {Tol: -1}, {Tol: math.NaN()}, {K: 5, Basis: 6},
		{K: 5, Basis: 11, Multiplicities: true}, {K: 3, MaxIterations: 5},
		{Start: make([]float64, 49)}, {Start: make([]float64, 50)},
		{Reorthogonalization: Full + 1},
	} {
		if _, err := Lowest(context.Background(), op, o); err == nil {
			t.Errorf("options %+v: no error", o)
		}
	}
}

// A start vector that is an eigenvector: the uniform vector of the ring,
// eigenvalue -2 (plane wave q = 0). One application shows the invariant
// subspace; the pair is returned after that application and the explicit
// check (derivation: the Krylov space is one-dimensional).
func TestLowestStartEigenvector(t *testing.T) {
	op := &ring[float64]{n: 64}
	start := make([]float64, 64)
	for i := range start {
		start[i] = 3
	}
	res, err := Lowest(context.Background(), op, Options[float64]{Start: start, Vectors: true})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(res.Values[0]+2) > 1e-14 || res.Matvecs != 2 || !res.Converged {
		t.Errorf("value %.16g, %d matvecs, converged %v", res.Values[0], res.Matvecs, res.Converged)
	}
	if math.Abs(res.Vectors[0][5]-0.125) > 1e-15 && math.Abs(res.Vectors[0][5]+0.125) > 1e-15 {
		t.Errorf("vector component %g, want +-1/8", res.Vectors[0][5])
	}
}

// Small dimensions, down to 1, and K = Dim: the basis spans the space and
// every eigenvalue is returned (reference gonum's mat.EigenSym).
func TestLowestSmallDimensions(t *testing.T) {
	for _, n := range []int{1, 2, 3, 5, 12} {
		a := randomSparse[complex128](n, 4, uint64(n))
		ref := denseEigenvalues(t, a.dense(), n)
		for _, k := range []int{1, n} {
			for _, multi := range []bool{false, true} {
				res, err := Lowest(context.Background(), a, Options[complex128]{K: k, Multiplicities: multi, Vectors: true})
				if err != nil {
					t.Fatalf("n=%d K=%d: %v", n, k, err)
				}
				compareValues(t, fmt.Sprintf("n=%d K=%d multi=%v", n, k, multi), res.Values, ref[:k], 1e-10)
				if !res.Converged {
					t.Errorf("n=%d K=%d: %q", n, k, res.Warnings)
				}
			}
		}
	}
}

// The smallest allowed bases (K+2, and 2K+2 with Multiplicities) restart
// after every one or two steps and must still converge to the same values
// (reference gonum's mat.EigenSym; tolerance 1e-9).
func TestLowestSmallBasis(t *testing.T) {
	a := randomSparse[float64](200, 8, 123)
	ref := denseEigenvalues(t, a.dense(), 200)
	for _, c := range []struct {
		k, basis int
		multi    bool
	}{{1, 3, false}, {3, 5, false}, {3, 8, true}, {2, 12, false}} {
		res, err := Lowest(context.Background(), a, Options[float64]{K: c.k, Basis: c.basis, Multiplicities: c.multi, MaxIterations: 20000})
		if err != nil {
			t.Fatal(err)
		}
		name := fmt.Sprintf("K=%d Basis=%d multi=%v", c.k, c.basis, c.multi)
		compareValues(t, name, res.Values, ref[:c.k], 1e-9)
		if !res.Converged {
			t.Errorf("%s: %q", name, res.Warnings)
		}
		t.Logf("%s: %d matvecs, %d restarts", name, res.Matvecs, res.Restarts)
	}
}
