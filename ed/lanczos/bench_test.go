package lanczos

import (
	"context"
	"math"
	"math/rand/v2"
	"sync"
	"testing"
)

// modes are the reorthogonalizations the Lowest benchmarks compare.
var modes = []Reorthogonalization{Partial, Full}

// benchLowest runs Lowest for K = 1 once per iteration and reports the
// operator applications, the vectors reorthogonalized and the restarts.
func benchLowest[T Scalar](b *testing.B, op Operator[T], opt Options[T], check func(*Result[T]) bool) {
	for b.Loop() {
		res, err := Lowest(context.Background(), op, opt)
		if err != nil {
			b.Fatal(err)
		}
		if !res.Converged || !check(res) {
			b.Fatalf("%v %v", res.Values, res.Warnings)
		}
		b.ReportMetric(float64(res.Matvecs), "matvecs/op")
		b.ReportMetric(float64(res.Reorthogonalizations), "reorths/op")
		b.ReportMetric(float64(res.Restarts), "restarts/op")
	}
}

// Impurity in a tight-binding ring of 10^6 sites, -V |0><0| with V = 1: the
// bound state lies at -sqrt(4 + V^2) (derivation in TestLowestImpurityChain),
// separated from the band edge -2 by 0.236. A cheap operator (two
// neighbours a row): the vector work of Lowest dominates.
func BenchmarkLowestImpurityRing1e6(b *testing.B) {
	op := &ring[float64]{n: 1_000_000, v: 1, parallel: true}
	for _, mode := range modes {
		b.Run(mode.String(), func(b *testing.B) {
			benchLowest(b, op, Options[float64]{K: 1, Reorthogonalization: mode}, func(r *Result[float64]) bool {
				return math.Abs(r.Values[0]+math.Sqrt(5)) <= 1e-9
			})
		})
	}
}

func BenchmarkLowestImpurityRing1e6Complex(b *testing.B) {
	op := &ring[complex128]{n: 1_000_000, v: 1, phi: 1e-6, parallel: true}
	for _, mode := range modes {
		b.Run(mode.String(), func(b *testing.B) {
			benchLowest(b, op, Options[complex128]{K: 1, Reorthogonalization: mode}, func(*Result[complex128]) bool { return true })
		})
	}
}

var (
	heisenberg24     *heisenberg
	heisenberg24Once sync.Once
)

// The S^z = 0 sector of the 24-site periodic Heisenberg ring, dimension
// 2704156 with 33860736 off-diagonal entries: the matrix of
// ed/testdata/eigsh_ring.py, which times scipy's eigsh on it, and the
// engine's case of a sparse spin Hamiltonian. The check E0 =
// -10.6700145165 is the value that both reorthogonalizations and the
// engine's Lanczos route find (TestPartialSemiOrthogonality checks the
// construction of the matrix against mat.EigenSym for 12 sites). Building
// the matrix (about 2 s, 0.4 GB) is not timed.
func BenchmarkLowestHeisenbergRing24(b *testing.B) {
	heisenberg24Once.Do(func() { heisenberg24 = newHeisenberg(24) })
	for _, mode := range modes {
		b.Run(mode.String(), func(b *testing.B) {
			benchLowest(b, heisenberg24, Options[float64]{K: 1, Reorthogonalization: mode}, func(r *Result[float64]) bool {
				return math.Abs(r.Values[0]+10.6700145165) <= 1e-9
			})
		})
	}
}

// One FTLM sample of M = 100 steps on the same ring.
func BenchmarkSampleImpurityRing1e6M100(b *testing.B) {
	op := &ring[float64]{n: 1_000_000, v: 1, parallel: true}
	sp := NewSampler[float64](op)
	r := RandomVector[float64](op.n, rand.New(rand.NewPCG(1, 2)))
	for b.Loop() {
		if _, err := sp.Sample(context.Background(), r, 100); err != nil {
			b.Fatal(err)
		}
	}
}
