package lanczos

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"
)

// Impurity in a tight-binding ring of 10^6 sites, -V |0><0| with V = 1: the
// bound state lies at -sqrt(4 + V^2) (derivation in TestLowestImpurityChain),
// separated from the band edge -2 by 0.236.
func BenchmarkLowestImpurityRing1e6(b *testing.B) {
	op := &ring[float64]{n: 1_000_000, v: 1, parallel: true}
	for b.Loop() {
		res, err := Lowest(context.Background(), op, Options[float64]{K: 1})
		if err != nil {
			b.Fatal(err)
		}
		if !res.Converged || math.Abs(res.Values[0]+math.Sqrt(5)) > 1e-9 {
			b.Fatalf("%v %v", res.Values, res.Warnings)
		}
		b.ReportMetric(float64(res.Matvecs), "matvecs/op")
	}
}

func BenchmarkLowestImpurityRing1e6Complex(b *testing.B) {
	op := &ring[complex128]{n: 1_000_000, v: 1, phi: 1e-6, parallel: true}
	for b.Loop() {
		res, err := Lowest(context.Background(), op, Options[complex128]{K: 1})
		if err != nil {
			b.Fatal(err)
		}
		if !res.Converged {
			b.Fatalf("%v %v", res.Values, res.Warnings)
		}
		b.ReportMetric(float64(res.Matvecs), "matvecs/op")
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
