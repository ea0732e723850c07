package lanczos

import (
	"context"
	"math/rand/v2"
	"runtime"
	"testing"
)

// MemoryEstimate against what the calls really allocate (runtime.MemStats
// TotalAlloc, every byte allocated in between, so an upper bound of the
// peak). Derivation: Lowest allocates its Basis+1 vectors once and only
// O(Basis^2) and per-chunk work besides; a Sampler allocates SampleVectors
// vectors once. The test fails if a call allocates more than 5% above the
// estimate (an extra vector per restart would exceed it) or less than the
// vectors themselves (an estimate that missed them).
func TestMemoryEstimate(t *testing.T) {
	const n = 1 << 18
	for _, cplx := range []bool{false, true} {
		var before, after runtime.MemStats
		var basis int
		runtime.GC()
		runtime.ReadMemStats(&before)
		if cplx {
			op := &ring[complex128]{n: n, v: 1, phi: 0.1}
			res, err := Lowest(context.Background(), op, Options[complex128]{})
			if err != nil || !res.Converged {
				t.Fatal(err, res.Warnings)
			}
		} else {
			op := &ring[float64]{n: n, v: 1}
			res, err := Lowest(context.Background(), op, Options[float64]{})
			if err != nil || !res.Converged {
				t.Fatal(err, res.Warnings)
			}
		}
		runtime.ReadMemStats(&after)
		basis = DefaultBasis(n, 1)
		got := int64(after.TotalAlloc - before.TotalAlloc)
		est := MemoryEstimate(n, basis, cplx, 0)
		elem := int64(8)
		if cplx {
			elem = 16
		}
		floor := int64(basis+1) * n * elem
		t.Logf("Lowest complex=%v: allocated %d, estimate %d, vectors %d", cplx, got, est, floor)
		if got > est+est/20 || est < floor {
			t.Errorf("Lowest complex=%v: allocated %d bytes, estimate %d, basis vectors %d", cplx, got, est, floor)
		}
	}

	op := &ring[float64]{n: n}
	r := RandomVector[float64](n, rand.New(rand.NewPCG(1, 2)))
	sp := NewSampler[float64](op)
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	for range 3 {
		if _, err := sp.Sample(context.Background(), r, 50); err != nil {
			t.Fatal(err)
		}
	}
	runtime.ReadMemStats(&after)
	got := int64(after.TotalAlloc - before.TotalAlloc)
	est := MemoryEstimate(n, 0, false, SampleVectors)
	t.Logf("Sampler: allocated %d over 3 samples, estimate %d", got, est)
	if got > est+est/20 || est < SampleVectors*n*8 {
		t.Errorf("Sampler: allocated %d bytes, estimate %d", got, est)
	}
}
