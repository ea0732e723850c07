package eigen

import (
	"context"
	"errors"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"os"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	lapackgonum "gonum.org/v1/gonum/lapack/gonum"
)

// waitGoroutines waits (up to 2 s) for the number of goroutines to come back
// to at most want, and fails the test if it does not: the solvers must not
// leave workers behind (the goroutine of context.AfterFunc, which only sets
// the flag, may need a moment to finish).
func waitGoroutines(t *testing.T, want int) {
	t.Helper()
	deadline := time.Now().Add(2 * time.Second)
	for runtime.NumGoroutine() > want {
		if time.Now().After(deadline) {
			t.Fatalf("goroutines: %d, want <= %d (leak after cancellation)", runtime.NumGoroutine(), want)
		}
		time.Sleep(time.Millisecond)
	}
}

// Source: the API contract of SymmetricContext and HermitianContext: a
// context that is already done returns ctx.Err() at once, without reading or
// writing a.
func TestContextAlreadyDone(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		const n = 300
		canceled, cancel := context.WithCancel(context.Background())
		cancel()
		expired, cancel2 := context.WithDeadline(context.Background(), time.Now().Add(-time.Second))
		defer cancel2()
		for _, ctx := range []context.Context{canceled, expired} {
			want := ctx.Err()
			for _, vectors := range []bool{false, true} {
				a0 := randSym(n, 1)
				a := slices.Clone(a0)
				v, z, err := be.Symmetric(ctx, a, n, Job{Vectors: vectors}, nil)
				if err != want || v != nil || z != nil {
					t.Errorf("Symmetric vectors=%v: err %v (want %v), values %v, vecs nil %v", vectors, err, want, v != nil, z == nil)
				}
				if !slices.Equal(a, a0) {
					t.Errorf("Symmetric vectors=%v: a modified", vectors)
				}
				c0 := randHerm(n, 1)
				c := slices.Clone(c0)
				cv, cz, err := be.Hermitian(ctx, c, n, Job{Vectors: vectors}, nil)
				if err != want || cv != nil || cz != nil {
					t.Errorf("Hermitian vectors=%v: err %v (want %v)", vectors, err, want)
				}
				if !slices.Equal(c, c0) {
					t.Errorf("Hermitian vectors=%v: a modified", vectors)
				}
			}
		}
		// n = 0 and n = 1 too.
		if _, _, err := be.Symmetric(canceled, nil, 0, Job{Vectors: true}, nil); err != context.Canceled {
			t.Errorf("n=0: err %v", err)
		}
		if _, _, err := be.Hermitian(canceled, []complex128{2}, 1, Job{Vectors: true}, nil); err != context.Canceled {
			t.Errorf("n=1: err %v", err)
		}
	})
}

// Source: the API contract: with a live (cancellable, never cancelled)
// context the results are bitwise those of Symmetric and Hermitian (the same
// arithmetic; the polls only read a flag), and no goroutine outlives the
// call.
func TestContextLiveSameResults(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		ctx, cancel := context.WithCancel(context.Background())
		defer cancel()
		start := runtime.NumGoroutine()
		for _, n := range []int{2, 57, 400} {
			for _, vectors := range []bool{false, true} {
				a0 := randSym(n, 3)
				v1, z1, ok := symmetric(be, slices.Clone(a0), n, vectors)
				v2, z2, err := be.Symmetric(ctx, slices.Clone(a0), n, Job{Vectors: vectors}, nil)
				if !ok || err != nil || !slices.Equal(v1, v2) || !slices.Equal(z1, z2) {
					t.Errorf("Symmetric n=%d vectors=%v: ok %v err %v, results differ", n, vectors, ok, err)
				}
				c0 := randHerm(n, 3)
				cv1, cz1, ok := hermitian(be, slices.Clone(c0), n, vectors)
				cv2, cz2, err := be.Hermitian(ctx, slices.Clone(c0), n, Job{Vectors: vectors}, nil)
				if !ok || err != nil || !slices.Equal(cv1, cv2) || !slices.Equal(cz1, cz2) {
					t.Errorf("Hermitian n=%d vectors=%v: ok %v err %v, results differ", n, vectors, ok, err)
				}
			}
		}
		cancel()
		waitGoroutines(t, start)
	})
}

// Source: the API contract: a failure of the method is reported as an error
// wrapping ErrNoConvergence (a non-finite entry here), and the old API says
// ok = false for it.
func TestContextNoConvergence(t *testing.T) {
	forEachBackend(t, func(t *testing.T, be Backend) {
		ctx, cancel := context.WithCancel(context.Background())
		defer cancel()
		_, _, err := be.Symmetric(ctx, []float64{1, 0, math.Inf(1), 2}, 2, Job{Vectors: true}, nil)
		if !errors.Is(err, ErrNoConvergence) {
			t.Errorf("Symmetric with Inf: err %v", err)
		}
		_, _, err = be.Hermitian(ctx, []complex128{1, 0, cmplx.NaN(), 2}, 2, Job{}, nil)
		if !errors.Is(err, ErrNoConvergence) {
			t.Errorf("Hermitian with NaN: err %v", err)
		}
		// The iteration limit: a stage that gets no sweep at all.
		if err := solveErr(ctx, ErrNoConvergence); !errors.Is(err, ErrNoConvergence) {
			t.Errorf("solveErr: %v", err)
		}
	})
}

// Source: the requirement that a cancelled job stops promptly. n = 2000 with
// vectors takes seconds on any current machine (about 10 s real, 20 s
// complex on the 2-core development machine); cancelled 100 ms in, the
// call must return context.Canceled, and all its goroutines must be gone.
// The latency from cancel() to return is logged, not asserted.
func TestContextCancelPromptly(t *testing.T) {
	const n = 2000
	if testing.Short() {
		t.Skip("n = 2000 matrices")
	}
	start := runtime.NumGoroutine()
	for _, kind := range []string{"real", "complex"} {
		var a []float64
		var c []complex128
		if kind == "real" {
			a = randSym(n, 4)
		} else {
			c = randHerm(n, 4)
		}
		ctx, cancel := context.WithCancel(context.Background())
		done := make(chan error, 1)
		t0 := time.Now()
		go func() {
			var err error
			var vals []float64
			if kind == "real" {
				vals, _, err = PureGo.Symmetric(ctx, a, n, Job{Vectors: true}, nil)
			} else {
				vals, _, err = PureGo.Hermitian(ctx, c, n, Job{Vectors: true}, nil)
			}
			if err != nil && vals != nil {
				err = errors.New("values with an error")
			}
			done <- err
		}()
		time.Sleep(100 * time.Millisecond)
		tc := time.Now()
		cancel()
		err := <-done
		lat := time.Since(tc)
		if !errors.Is(err, context.Canceled) {
			t.Fatalf("%s n=%d: err = %v after %v, want context.Canceled", kind, n, err, time.Since(t0))
		}
		t.Logf("%s n=%d vectors, cancelled after %v: returned %v later", kind, n, tc.Sub(t0).Round(time.Millisecond), lat)
	}
	waitGoroutines(t, start)
}

// Source: the requirement that every stage stops when cancelled. One
// uncancelled run is timed, then the same problem is cancelled at fractions
// of that time, so that every stage (reduction, Q or back-transformation,
// QL/QR sweeps and rotation flushes, sterf) is hit; each cancelled call must
// return context.Canceled (or, if it had finished, the right answer) and no
// goroutine may be left. Latencies are logged.
func TestContextCancelEveryStage(t *testing.T) {
	n := 500
	if testing.Short() {
		n = 200
	}
	start := runtime.NumGoroutine()
	for _, kind := range []string{"real", "complex"} {
		for _, vectors := range []bool{true, false} {
			a0, c0 := randSym(n, 5), randHerm(n, 5)
			run := func(ctx context.Context) ([]float64, error) {
				if kind == "real" {
					v, _, err := PureGo.Symmetric(ctx, slices.Clone(a0), n, Job{Vectors: vectors}, nil)
					return v, err
				}
				v, _, err := PureGo.Hermitian(ctx, slices.Clone(c0), n, Job{Vectors: vectors}, nil)
				return v, err
			}
			t0 := time.Now()
			ref, err := run(context.Background())
			full := time.Since(t0)
			if err != nil {
				t.Fatal(err)
			}
			var lats []string
			for _, f := range []float64{0.05, 0.2, 0.4, 0.6, 0.8, 0.95} {
				ctx, cancel := context.WithCancel(context.Background())
				at := time.Duration(f * float64(full))
				var tc time.Time
				timer := time.AfterFunc(at, func() { tc = time.Now(); cancel() })
				vals, err := run(ctx)
				end := time.Now()
				fired := !timer.Stop()
				cancel()
				switch {
				case err == nil:
					if !slices.Equal(vals, ref) {
						t.Errorf("%s vectors=%v cancel at %.0f%%: finished with other values", kind, vectors, 100*f)
					}
					lats = append(lats, "finished first")
				case errors.Is(err, context.Canceled) && fired:
					lats = append(lats, end.Sub(tc).Round(10*time.Microsecond).String())
				default:
					t.Errorf("%s vectors=%v cancel at %.0f%%: err %v", kind, vectors, 100*f, err)
				}
			}
			t.Logf("%s n=%d vectors=%v (full run %v): latency at 5..95%%: %s", kind, n, vectors, full.Round(time.Millisecond), strings.Join(lats, " "))
		}
	}
	waitGoroutines(t, start)
}

// Source: every stage polls its stopper: with a stopper that has fired,
// each returns errStopped (and a fired stopper is not confused with a
// failure).
func TestStagesStop(t *testing.T) {
	const n = 300
	fired := new(stopper)
	fired.flag.Store(true)
	a := randSym(n, 6)
	d, e, tau := make([]float64, n), make([]float64, n-1), make([]float64, n)
	if err := sytrd(slices.Clone(a), n, d, e, tau, fired); err != errStopped {
		t.Errorf("sytrd: %v", err)
	}
	if err := sytrd(a, n, d, e, tau, nil); err != nil {
		t.Fatalf("sytrd: %v", err)
	}
	if _, err := formQ(a, n, tau, fired); err != errStopped {
		t.Errorf("formQ: %v", err)
	}
	if err := sterf(slices.Clone(d), slices.Clone(e), fired); err != errStopped {
		t.Errorf("sterf: %v", err)
	}
	z := make([]float64, n*n)
	if err := tridiagQL(slices.Clone(d), slices.Clone(e), z, n, n, fired); err != errStopped {
		t.Errorf("tridiagQL: %v", err)
	}
	c := randHerm(n, 6)
	ctau := make([]complex128, n)
	if err := hetrd(slices.Clone(c), n, d, e, ctau, fired); err != errStopped {
		t.Errorf("hetrd: %v", err)
	}
	if err := hetrd(c, n, d, e, ctau, nil); err != nil {
		t.Fatalf("hetrd: %v", err)
	}
	if _, err := backTransform(c, n, ctau, z, fired); err != errStopped {
		t.Errorf("backTransform: %v", err)
	}
}

// Source: gonum's Dsterf, of which sterf is a port: same eigenvalues on
// random tridiagonal matrices, with splits and with graded entries.
func TestSterfAgainstDsterf(t *testing.T) {
	r := rand.New(rand.NewPCG(8, 8))
	for _, n := range []int{1, 2, 3, 10, 100, 400} {
		for trial := 0; trial < 3; trial++ {
			d0, e0 := randTridiag(r, n, trial, 20, 5, 2)
			d, e := slices.Clone(d0), slices.Clone(e0)
			if err := sterf(d, e, nil); err != nil {
				t.Fatalf("n=%d: %v", n, err)
			}
			dr, er := slices.Clone(d0), slices.Clone(e0)
			if !(lapackgonum.Implementation{}).Dsterf(n, dr, er) {
				t.Fatalf("n=%d: Dsterf failed", n)
			}
			scale := 0.0
			for _, x := range dr {
				scale = math.Max(scale, math.Abs(x))
			}
			for k := range d {
				if math.Abs(d[k]-dr[k]) > 1e-14*scale {
					t.Errorf("n=%d trial %d: value %d = %.16g, Dsterf %.16g", n, trial, k, d[k], dr[k])
				}
			}
		}
	}
}

// Source: textbook closed form of the tridiagonal Toeplitz matrix (diagonal
// a, off-diagonal b: a + 2|b| cos(k pi/(n+1))), scaled by 1e200 and 1e-200,
// where sterf must rescale each block (up and down) before squaring e.
func TestSterfRescaling(t *testing.T) {
	const n = 40
	for _, sc := range []float64{1e200, 1e-200, 1e-300} {
		want := make([]float64, n)
		for k := 1; k <= n; k++ {
			want[k-1] = sc * (0.3 + 2*1.7*math.Cos(float64(k)*math.Pi/float64(n+1)))
		}
		slices.Sort(want)
		d, e := make([]float64, n), make([]float64, n-1)
		for i := range d {
			d[i] = 0.3 * sc
		}
		for i := range e {
			e[i] = -1.7 * sc
		}
		if err := sterf(d, e, nil); err != nil {
			t.Fatalf("scale %g: %v", sc, err)
		}
		for k := range want {
			if math.Abs(d[k]-want[k]) > 1e-13*sc*float64(n) {
				t.Errorf("scale %g: value %d = %g, closed form %g", sc, k, d[k], want[k])
			}
		}
	}
}

// Source: sytrd's contract, T = Q^T A Q with Q = formQ(...) orthogonal:
// rebuild Q T Q^T and compare with A (and Q^T Q with I).
func TestSytrdFormQ(t *testing.T) {
	for _, n := range []int{1, 2, 3, 33, 70} {
		a0 := randSym(n, uint64(n))
		a := slices.Clone(a0)
		d, e, tau := make([]float64, n), make([]float64, max(n-1, 0)), make([]float64, n)
		if err := sytrd(a, n, d, e, tau, nil); err != nil {
			t.Fatal(err)
		}
		q, err := formQ(a, n, tau, nil)
		if err != nil {
			t.Fatal(err)
		}
		worst, orth := 0.0, 0.0
		for i := 0; i < n; i++ {
			for j := 0; j < n; j++ {
				s, o := 0.0, 0.0
				for k := 0; k < n; k++ {
					tq := d[k] * q[j*n+k] // (T Q^T)[k][j]
					if k > 0 {
						tq += e[k-1] * q[j*n+k-1]
					}
					if k < n-1 {
						tq += e[k] * q[j*n+k+1]
					}
					s += q[i*n+k] * tq
					o += q[k*n+i] * q[k*n+j]
				}
				if i == j {
					o--
				}
				worst = math.Max(worst, math.Abs(s-a0[i*n+j]))
				orth = math.Max(orth, math.Abs(o))
			}
		}
		if worst > 1e-12*math.Max(1, frobenius(a0)) || orth > 1e-13 {
			t.Errorf("n=%d: |Q T Q^T - A| = %.3g, |Q^T Q - I| = %.3g", n, worst, orth)
		}
	}
}

// TestCancelLatencyLarge measures, for the orders listed in
// EIGEN_CANCEL_LATENCY (e.g. "2000,4000"; skipped when unset: minutes of
// work), the time from cancel() to return of SymmetricContext and
// HermitianContext with vectors, cancelling inside each stage: the stages
// are timed on an uncancelled run, then cancelled at 20%, 50% and 80% of
// each (and of the whole call, for the allocations and copies in between).
func TestCancelLatencyLarge(t *testing.T) {
	spec := os.Getenv("EIGEN_CANCEL_LATENCY")
	if spec == "" {
		t.Skip("set EIGEN_CANCEL_LATENCY=2000,4000 to measure")
	}
	kinds := []string{"real", "complex"}
	if k := os.Getenv("EIGEN_CANCEL_KINDS"); k != "" {
		kinds = strings.Split(k, ",")
	}
	for _, f := range strings.Split(spec, ",") {
		n, err := strconv.Atoi(f)
		if err != nil {
			t.Fatal(err)
		}
		for _, kind := range kinds {
			total := measureStages(t, n, kind)
			measureCall(t, n, kind, total)
		}
	}
}

// measureStages runs the stages of one solve one after the other, timing
// each, and then cancels each stage, on a copy of its input, at 20, 50 and
// 80% of its time, logging the latencies. It returns the time of the stages
// of a solve with vectors.
func measureStages(t *testing.T, n int, kind string) time.Duration {
	type stage struct {
		name string
		run  func(s *stopper) error
	}
	var stages []stage
	if kind == "real" {
		a0 := randSym(n, 1)
		var a []float64
		d, e, tau := make([]float64, n), make([]float64, n-1), make([]float64, n)
		var q []float64
		stages = []stage{
			{"sytrd", func(s *stopper) error {
				a = slices.Clone(a0)
				return sytrd(a, n, d, e, tau, s)
			}},
			{"formQ", func(s *stopper) error {
				qq, err := formQ(a, n, tau, s)
				if err == nil {
					q = qq
				}
				return err
			}},
			{"tridiagQL", func(s *stopper) error {
				return tridiagQL(slices.Clone(d), slices.Clone(e), q, n, n, s)
			}},
			{"sterf", func(s *stopper) error {
				return sterf(slices.Clone(d), slices.Clone(e), s)
			}},
		}
	} else {
		c0 := randHerm(n, 1)
		var c []complex128
		d, e, tau := make([]float64, n), make([]float64, n-1), make([]complex128, n)
		var z []float64
		stages = []stage{
			{"hetrd", func(s *stopper) error {
				c = slices.Clone(c0)
				return hetrd(c, n, d, e, tau, s)
			}},
			{"tridiagQL", func(s *stopper) error {
				z = make([]float64, n*n)
				for i := 0; i < n; i++ {
					z[i*n+i] = 1
				}
				return tridiagQL(slices.Clone(d), slices.Clone(e), z, n, n, s)
			}},
			{"backTransform", func(s *stopper) error {
				_, err := backTransform(c, n, tau, z, s)
				return err
			}},
			{"sterf", func(s *stopper) error {
				return sterf(slices.Clone(d), slices.Clone(e), s)
			}},
		}
	}
	// Timed, uncancelled pass (it also leaves the inputs of the next stage).
	times := make([]time.Duration, len(stages))
	for i, st := range stages {
		t0 := time.Now()
		if err := st.run(nil); err != nil {
			t.Fatalf("%s %s: %v", kind, st.name, err)
		}
		times[i] = time.Since(t0)
	}
	for i, st := range stages {
		if kind == "real" && st.name == "sytrd" || kind == "complex" && st.name == "hetrd" {
			// Re-running the reduction would destroy the input of the
			// later stages: cancel it last.
			continue
		}
		t.Logf("%s n=%d %s: %v uncancelled; %s", kind, n, st.name, times[i].Round(time.Millisecond), cancelAt(st.run, times[i]))
	}
	for i, st := range stages {
		if kind == "real" && st.name == "sytrd" || kind == "complex" && st.name == "hetrd" {
			t.Logf("%s n=%d %s: %v uncancelled; %s", kind, n, st.name, times[i].Round(time.Millisecond), cancelAt(st.run, times[i]))
		}
	}
	return times[0] + times[1] + times[2]
}

// measureCall cancels SymmetricContext or HermitianContext with vectors at
// 5, 15, ..., 95% of total and logs the time from cancel() to return.
func measureCall(t *testing.T, n int, kind string, total time.Duration) {
	var a0 []float64
	var c0 []complex128
	if kind == "real" {
		a0 = randSym(n, 1)
	} else {
		c0 = randHerm(n, 1)
	}
	var out []string
	worst := time.Duration(0)
	for f := 0.05; f < 1; f += 0.1 {
		a, c := slices.Clone(a0), slices.Clone(c0)
		ctx, cancel := context.WithCancel(context.Background())
		var tc time.Time
		timer := time.AfterFunc(time.Duration(f*float64(total)), func() { tc = time.Now(); cancel() })
		var err error
		if kind == "real" {
			_, _, err = PureGo.Symmetric(ctx, a, n, Job{Vectors: true}, nil)
		} else {
			_, _, err = PureGo.Hermitian(ctx, c, n, Job{Vectors: true}, nil)
		}
		end := time.Now()
		if timer.Stop() || !errors.Is(err, context.Canceled) {
			out = append(out, "finished first")
			cancel()
			continue
		}
		lat := end.Sub(tc)
		worst = max(worst, lat)
		out = append(out, lat.Round(10*time.Microsecond).String())
	}
	t.Logf("%s n=%d %sContext with vectors, cancel() to return at 5, 15, ..., 95%% of %v: %s (worst %v)", kind, n, map[string]string{"real": "Symmetric", "complex": "Hermitian"}[kind], total.Round(time.Millisecond), strings.Join(out, ", "), worst.Round(10*time.Microsecond))
}

func benchContext(b *testing.B, n int, complexMatrix, vectors bool) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	a0, c0 := randSym(n, 1), randHerm(n, 1)
	a, c := make([]float64, n*n), make([]complex128, n*n)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		copy(a, a0)
		copy(c, c0)
		b.StartTimer()
		var err error
		if complexMatrix {
			_, _, err = PureGo.Hermitian(ctx, c, n, Job{Vectors: vectors}, nil)
		} else {
			_, _, err = PureGo.Symmetric(ctx, a, n, Job{Vectors: vectors}, nil)
		}
		if err != nil {
			b.Fatal(err)
		}
	}
}

// The Context variants with a live, cancellable context (polls armed),
// against Benchmark{Symmetric,Hermitian}1000* (context.Background: no poll
// reads a flag).
func BenchmarkSymmetricContext1000Values(b *testing.B)  { benchContext(b, 1000, false, false) }
func BenchmarkSymmetricContext1000Vectors(b *testing.B) { benchContext(b, 1000, false, true) }
func BenchmarkHermitianContext1000Values(b *testing.B)  { benchContext(b, 1000, true, false) }
func BenchmarkHermitianContext1000Vectors(b *testing.B) { benchContext(b, 1000, true, true) }

// cancelAt runs fn three times with a stopper fired at 20, 50 and 80% of
// full and reports the latencies from the firing to the return.
func cancelAt(fn func(*stopper) error, full time.Duration) string {
	var out []string
	for _, f := range []float64{0.2, 0.5, 0.8} {
		s := new(stopper)
		var tc time.Time
		timer := time.AfterFunc(time.Duration(f*float64(full)), func() { tc = time.Now(); s.flag.Store(true) })
		err := fn(s)
		end := time.Now()
		if timer.Stop() || err != errStopped {
			out = append(out, "finished first")
			continue
		}
		out = append(out, end.Sub(tc).Round(10*time.Microsecond).String())
	}
	return "stopped after " + strings.Join(out, ", ")
}
