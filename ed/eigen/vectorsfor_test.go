package eigen

import (
	"context"
	"fmt"
	"slices"
	"testing"
)

// TestVectorsFor checks Job.VectorsFor on every backend of the build.
// Sources: gonum's mat.EigenSym (Dsyev) for the real eigenvalues and the real
// 2n x 2n embedding for the complex ones (as TestLowest), to 1e-10 ||A||_F;
// the eigenpairs by checkPairs (the definition of an eigenpair and of an
// orthonormal set). The contract checked: VectorsFor is called exactly once,
// with every eigenvalue the job returns (all, or the Lowest k), ascending;
// its answer is clamped to [0, k]; every eigenvalue is returned and the
// eigenvectors of the lowest m, n x m; without Vectors it is never called.
// The degenerate spectrum (TestDegenerate's) is cut inside its six-fold
// level -1 (m = 3) and inside the four-fold 0.5 (m = 8): the vectors
// returned must still be orthonormal eigenvectors of their eigenvalues.
func TestVectorsFor(t *testing.T) { forEachBackend(t, testVectorsFor) }

// testVectorsFor is TestVectorsFor on one backend.
func testVectorsFor(t *testing.T, be Backend) {
	ctx := context.Background()
	var ws Workspace
	for _, n := range []int{1, 2, 10, 57, 300} {
		a0, c0, ref, cref := referencePair(t, n, 900+uint64(n))
		for _, lowest := range []int{0, max(1, n/3)} {
			k := n
			if lowest > 0 {
				k = min(lowest, n)
			}
			for _, ask := range []int{-2, 0, 1, 5, k / 2, k, k + 3} {
				want := max(0, min(ask, k))
				calls := 0
				job := Job{Vectors: true, Lowest: lowest, VectorsFor: func(v []float64) int {
					calls++
					if len(v) != k || !slices.IsSorted(v) {
						t.Errorf("VectorsFor got %d values (sorted %v), want %d ascending", len(v), slices.IsSorted(v), k)
					}
					return ask
				}}
				name := fmt.Sprintf("n=%d lowest=%d m=%d", n, lowest, ask)
				vals, vecs, err := be.Symmetric(ctx, lowerOnly(a0, n), n, job, &ws)
				if err != nil {
					t.Fatalf("real %s: %v", name, err)
				}
				matchValues(t, "real "+name, vals, ref, k, frobenius(a0))
				if len(vecs) != n*want {
					t.Fatalf("real %s: len(vecs) = %d, want %d", name, len(vecs), n*want)
				}
				checkPairs(t, "real "+name, toComplex(a0), n, vals[:want], toComplex(vecs), 1e-12)
				cv, cvecs, err := be.Hermitian(ctx, lowerOnlyC(c0, n), n, job, &ws)
				if err != nil {
					t.Fatalf("complex %s: %v", name, err)
				}
				matchValues(t, "complex "+name, cv, cref, k, frobeniusC(c0))
				if len(cvecs) != n*want {
					t.Fatalf("complex %s: len(vecs) = %d, want %d", name, len(cvecs), n*want)
				}
				checkPairs(t, "complex "+name, c0, n, cv[:want], cvecs, 1e-12)
				if calls != 2 {
					t.Errorf("%s: VectorsFor called %d times for two solves", name, calls)
				}
			}
		}
		// Without Vectors, VectorsFor is not consulted.
		job := Job{VectorsFor: func([]float64) int { t.Errorf("n=%d: VectorsFor called without Vectors", n); return 0 }}
		if _, v, err := be.Symmetric(ctx, lowerOnly(a0, n), n, job, &ws); err != nil || v != nil {
			t.Errorf("n=%d values only: vecs %v, err %v", n, v != nil, err)
		}
	}
	spec := []float64{-1, -1, -1, -1, -1, 0.5, 0.5, 0.5, 2, 2, 2, 2, 2, 2, 2, 3, -1, 0.5, 7, 7}
	n := len(spec)
	want := slices.Sorted(slices.Values(spec))
	for _, isReal := range []bool{true, false} {
		ac := fromSpectrum(randUnitary(n, 8, isReal), spec)
		for _, m := range []int{3, 8} {
			name := fmt.Sprintf("degenerate real=%v m=%d", isReal, m)
			vals, vecs := solveAs(t, name, be, ac, n, isReal, Job{Vectors: true, VectorsFor: func([]float64) int { return m }}, &ws)
			matchValues(t, name, vals, want, n, 1e-3)
			checkPairs(t, name, ac, n, vals[:m], vecs, 1e-13)
		}
	}
}
