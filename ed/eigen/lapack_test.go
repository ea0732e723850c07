//go:build lapack

package eigen

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"testing"
	"time"
)

// With -tags lapack both backends are compiled in and every shared test
// runs against both.
func init() { testBackends = append(testBackends, LAPACK) }

// spectralScale is max_k |lambda_k|, the 2-norm of A: the scale of the
// rounding of a backward-stable solver.
func spectralScale(vals []float64) float64 {
	s := 0.0
	for _, v := range vals {
		s = math.Max(s, math.Abs(v))
	}
	return s
}

// Source: the pure-Go backend (itself checked against gonum and closed forms
// in eigen_test.go) as the reference for LAPACK: on seeded random real
// symmetric and complex Hermitian matrices, values only and with vectors,
// all of the spectrum and the lowest k, the eigenvalues agree to 1e-10
// relative to ||A||_2 = max |lambda|, and LAPACK's eigenvectors satisfy
// ||A v - lambda v|| <= 1e-12 ||A||_F and V^H V = I to 1e-12 (checkPairs).
func TestLAPACKAgreesWithPureGo(t *testing.T) {
	sizes := []int{1, 2, 3, 10, 57, 200}
	if !testing.Short() {
		sizes = append(sizes, 500)
	}
	ctx := context.Background()
	for _, n := range sizes {
		a0, c0 := randSym(n, 300+uint64(n)), randHerm(n, 300+uint64(n))
		ref, _, err := PureGo.Symmetric(ctx, slices.Clone(a0), n, Job{}, nil)
		if err != nil {
			t.Fatal(err)
		}
		cref, _, err := PureGo.Hermitian(ctx, slices.Clone(c0), n, Job{}, nil)
		if err != nil {
			t.Fatal(err)
		}
		for _, k := range []int{0, 1, 5, n / 3, n} {
			for _, vectors := range []bool{false, true} {
				job := Job{Vectors: vectors, Lowest: k}
				name := fmt.Sprintf("n=%d lowest=%d vectors=%v", n, k, vectors)
				vals, vecs, err := LAPACK.Symmetric(ctx, slices.Clone(a0), n, job, nil)
				if err != nil {
					t.Fatalf("real %s: %v", name, err)
				}
				agree(t, "real "+name, vals, ref, job.count(n))
				if vectors {
					checkPairs(t, "real "+name, toComplex(a0), n, vals, toComplex(vecs), 1e-12)
				}
				cv, cvecs, err := LAPACK.Hermitian(ctx, slices.Clone(c0), n, job, nil)
				if err != nil {
					t.Fatalf("complex %s: %v", name, err)
				}
				agree(t, "complex "+name, cv, cref, job.count(n))
				if vectors {
					checkPairs(t, "complex "+name, c0, n, cv, cvecs, 1e-12)
				}
			}
		}
	}
}

// agree checks that got holds the lowest k values of ref to 1e-10 ||A||_2.
func agree(t *testing.T, name string, got, ref []float64, k int) {
	t.Helper()
	if len(got) != k {
		t.Fatalf("%s: %d values, want %d", name, len(got), k)
	}
	tol := 1e-10 * math.Max(spectralScale(ref), math.SmallestNonzeroFloat64)
	for j := range got {
		if math.Abs(got[j]-ref[j]) > tol {
			t.Errorf("%s: value %d = %.16g, pure Go %.16g", name, j, got[j], ref[j])
		}
	}
}

// Source: as TestLAPACKAgreesWithPureGo, for every routine forced (the
// backend's choice is tested there): divide and conquer, MRRR over the
// whole range and range I, each for k = 1, n/3 and n, values and vectors.
func TestLAPACKRoutines(t *testing.T) {
	ctx := context.Background()
	for _, n := range []int{1, 7, 120} {
		a0, c0 := randSym(n, 400+uint64(n)), randHerm(n, 400+uint64(n))
		ref, _, _ := PureGo.Symmetric(ctx, slices.Clone(a0), n, Job{}, nil)
		cref, _, _ := PureGo.Hermitian(ctx, slices.Clone(c0), n, Job{}, nil)
		for _, r := range []routine{routineD, routineR, routineRI} {
			for _, k := range []int{1, max(1, n/3), n} {
				for _, vectors := range []bool{false, true} {
					job := Job{Vectors: vectors, Lowest: k}
					name := fmt.Sprintf("routine %d n=%d k=%d vectors=%v", r, n, k, vectors)
					vals, vecs, err := symmetricLAPACK(ctx, slices.Clone(a0), n, job, nil, r)
					if err != nil {
						t.Fatalf("real %s: %v", name, err)
					}
					agree(t, "real "+name, vals, ref, k)
					cv, cvecs, err := hermitianLAPACK(ctx, slices.Clone(c0), n, job, nil, r)
					if err != nil {
						t.Fatalf("complex %s: %v", name, err)
					}
					agree(t, "complex "+name, cv, cref, k)
					if vectors {
						checkPairs(t, "real "+name, toComplex(a0), n, vals, toComplex(vecs), 1e-12)
						checkPairs(t, "complex "+name, c0, n, cv, cvecs, 1e-12)
					}
				}
			}
		}
	}
}

// Source: construction, as TestDegenerate: A = U diag(lambda) U^H with
// eigenvalues of multiplicity 60, 40, 30 and 20 (and 50 simple ones), the
// clusters that spin Hamiltonians have; every routine must return its
// spectrum and orthonormal eigenvectors (MRRR and inverse iteration treat
// clusters specially), also when the lowest k cuts a cluster.
func TestLAPACKDegenerateClusters(t *testing.T) {
	var spec []float64
	for _, c := range []struct {
		e float64
		m int
	}{{-3, 60}, {-1, 40}, {0.5, 30}, {2, 20}} {
		for i := 0; i < c.m; i++ {
			spec = append(spec, c.e)
		}
	}
	for i := 0; i < 50; i++ {
		spec = append(spec, 3+float64(i)/7)
	}
	n := len(spec)
	want := slices.Sorted(slices.Values(spec))
	ctx := context.Background()
	for _, isReal := range []bool{true, false} {
		ac := fromSpectrum(randUnitary(n, 21, isReal), spec)
		ar := make([]float64, n*n)
		for i := range ar {
			ar[i] = real(ac[i])
		}
		for _, r := range []routine{routineD, routineR, routineRI} {
			for _, k := range []int{30, 60, 100, n} {
				name := fmt.Sprintf("real=%v routine %d k=%d", isReal, r, k)
				job := Job{Vectors: true, Lowest: k}
				var vals []float64
				var vecs []complex128
				var err error
				if isReal {
					var rv []float64
					vals, rv, err = symmetricLAPACK(ctx, slices.Clone(ar), n, job, nil, r)
					vecs = toComplex(rv)
				} else {
					vals, vecs, err = hermitianLAPACK(ctx, slices.Clone(ac), n, job, nil, r)
				}
				if err != nil {
					t.Fatalf("%s: %v", name, err)
				}
				matchValues(t, name, vals, want, k, 1e-2)
				checkPairs(t, name, ac, n, vals, vecs, 1e-13)
			}
		}
	}
}

// Source: the thread policy of blasThreads: a call of order >=
// threadedOrder runs alone on p = min(GOMAXPROCS, OpenBLAS's count)
// threads, smaller calls side by side on one, and OpenBLAS rests at one
// thread between calls.
func TestLAPACKThreadShare(t *testing.T) {
	leave := blasThreads.enter(10)
	p := blasThreads.p
	if got := openblasThreads(); got != 1 {
		t.Errorf("small call: %d OpenBLAS threads, want 1", got)
	}
	leave2 := blasThreads.enter(10) // small calls share
	leave2()
	leave()
	leave = blasThreads.enter(threadedOrder)
	if got := openblasThreads(); got != p {
		t.Errorf("large call: %d OpenBLAS threads, want p = %d", got, p)
	}
	if blasThreads.mu.TryRLock() {
		t.Error("a small call could start beside a large one")
		blasThreads.mu.RUnlock()
	}
	leave()
	if got := openblasThreads(); got != 1 {
		t.Errorf("after the large call: %d OpenBLAS threads, want 1", got)
	}
	if p != max(1, min(runtime.GOMAXPROCS(0), p)) {
		t.Errorf("p = %d beyond GOMAXPROCS %d", p, runtime.GOMAXPROCS(0))
	}
	if len(LAPACK.Name()) == 0 || Solver != LAPACK.Name() {
		t.Errorf("Solver %q, LAPACK.Name() %q", Solver, LAPACK.Name())
	}
}

// Source: reproducibility, the reason for the thread policy: the same
// matrix solved by concurrent calls (small and large, racing) gives the
// same bits as one call alone.
func TestLAPACKReproducible(t *testing.T) {
	ctx := context.Background()
	for _, n := range []int{100, threadedOrder + 44} {
		c0 := randHerm(n, 77)
		ref, rvec, err := LAPACK.Hermitian(ctx, slices.Clone(c0), n, Job{Vectors: true}, nil)
		if err != nil {
			t.Fatal(err)
		}
		const calls = 4
		errs := make(chan error, calls)
		for g := 0; g < calls; g++ {
			go func() {
				v, z, err := LAPACK.Hermitian(ctx, slices.Clone(c0), n, Job{Vectors: true}, nil)
				if err == nil && (!slices.Equal(v, ref) || !slices.Equal(z, rvec)) {
					err = fmt.Errorf("n=%d: concurrent call differs from the call alone", n)
				}
				errs <- err
			}()
		}
		for g := 0; g < calls; g++ {
			if err := <-errs; err != nil {
				t.Error(err)
			}
		}
	}
}

// Source: the API contract as the package documentation states it for
// LAPACK: a context cancelled while the library call runs does not
// interrupt it; the call returns its complete, correct result (or
// ctx.Err() if the cancellation came before the call), and no goroutine is
// left behind.
func TestLAPACKCancelDuringCall(t *testing.T) {
	const n = 600
	c0 := randHerm(n, 8)
	ref, _, err := LAPACK.Hermitian(context.Background(), slices.Clone(c0), n, Job{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	start := runtime.NumGoroutine()
	for _, delay := range []time.Duration{0, time.Millisecond, 10 * time.Millisecond} {
		ctx, cancel := context.WithCancel(context.Background())
		timer := time.AfterFunc(delay, cancel)
		vals, vecs, err := LAPACK.Hermitian(ctx, slices.Clone(c0), n, Job{Vectors: true}, nil)
		timer.Stop()
		cancel()
		switch {
		case errors.Is(err, context.Canceled):
			if vals != nil || vecs != nil {
				t.Errorf("delay %v: results with the error", delay)
			}
		case err != nil:
			t.Errorf("delay %v: %v", delay, err)
		default:
			agree(t, fmt.Sprintf("delay %v", delay), vals, ref, n)
			checkPairs(t, fmt.Sprintf("delay %v", delay), c0, n, vals, vecs, 1e-12)
		}
	}
	waitGoroutines(t, start)
}

// ---- benchmarks ---------------------------------------------------------------

// BenchmarkLAPACKRoutines times the routines on seeded random matrices (a
// reused Workspace), the measurements behind chooseRoutine:
//
//	BenchmarkLAPACKRoutines/{real,complex}/n={1000,2000}/{values,vectors}/{DC,MRRR,lowest10,lowest/6}
//
// DC is dsyevd / zheevd, MRRR dsyevr / zheevr over the whole range,
// lowest10 and lowest/6 dsyevr / zheevr with range I for the lowest 10 and
// n/6 (the subset is kept by the backend's choice up to n/10 values and n/6
// vectors).
func BenchmarkLAPACKRoutines(b *testing.B) {
	for _, kind := range []string{"real", "complex"} {
		for _, n := range []int{1000, 2000} {
			for _, vectors := range []bool{false, true} {
				job := map[bool]string{false: "values", true: "vectors"}[vectors]
				for _, c := range []struct {
					name string
					r    routine
					k    int
				}{{"DC", routineD, 0}, {"MRRR", routineR, 0}, {"lowest10", routineRI, 10}, {"lowest/6", routineRI, n / 6}} {
					b.Run(fmt.Sprintf("%s/n=%d/%s/%s", kind, n, job, c.name), func(b *testing.B) {
						benchLAPACK(b, kind == "complex", n, Job{Vectors: vectors, Lowest: c.k}, c.r)
					})
				}
			}
		}
	}
}

func benchLAPACK(b *testing.B, complexMatrix bool, n int, job Job, r routine) {
	ctx := context.Background()
	var ws Workspace
	if complexMatrix {
		c0 := randHerm(n, 1)
		c := make([]complex128, n*n)
		for b.Loop() {
			b.StopTimer()
			copy(c, c0)
			b.StartTimer()
			if _, _, err := hermitianLAPACK(ctx, c, n, job, &ws, r); err != nil {
				b.Fatal(err)
			}
		}
		return
	}
	a0 := randSym(n, 1)
	a := make([]float64, n*n)
	for b.Loop() {
		b.StopTimer()
		copy(a, a0)
		b.StartTimer()
		if _, _, err := symmetricLAPACK(ctx, a, n, job, &ws, r); err != nil {
			b.Fatal(err)
		}
	}
}

// TestVectorsForBisection is TestVectorsFor on the LAPACK backend with its
// fallback for a failed dstemr (dstebz and dstein) forced.
func TestVectorsForBisection(t *testing.T) {
	forceBisection = true
	defer func() { forceBisection = false }()
	testVectorsFor(t, LAPACK)
}
