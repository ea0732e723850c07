package hilbert_test

import (
	"context"
	"math/rand/v2"
	"sync"
	"testing"

	"frustum/ed/hilbert"
)

// Benchmarks on Heisenberg rings of spins 1/2 at Sz = 0: 24 sites with
// translations and spin inversion (k = 0, +), 24 sites without spatial
// symmetry (dim C(24, 12) = 2704156), 30 sites with translations and spin
// inversion (k = 0, +). Reported: the dimension ("states"), the matrix
// entries ("nnz") and bytes.

type benchSector struct {
	N    int
	sym  bool
	once sync.Once
	s    *hilbert.Sector
	m    *hilbert.CSR[float64]
}

var (
	bench24    = &benchSector{N: 24, sym: true}
	bench24Raw = &benchSector{N: 24}
	bench30    = &benchSector{N: 30, sym: true}
)

func (bs *benchSector) args(b *testing.B) (*hilbert.Hamiltonian, *hilbert.Group, hilbert.Irrep) {
	m := ring(bs.N, 1, 1, 0)
	var gens []hilbert.Generator
	if bs.sym {
		gens = []hilbert.Generator{{Name: "T", Perm: translation(bs.N, 1)}}
	}
	g, err := hilbert.NewGroup(m.twoS, gens, bs.sym)
	if err != nil {
		b.Fatal(err)
	}
	return m.hamiltonian(), g, g.Irreps()[0]
}

func (bs *benchSector) build(b *testing.B) *benchSector {
	bs.once.Do(func() {
		h, g, ir := bs.args(b)
		s, err := hilbert.NewSector(h, 0, g, ir, hilbert.SectorOptions{})
		if err != nil {
			b.Fatal(err)
		}
		bs.s = s
		bs.m, err = s.MatrixReal(context.Background())
		if err != nil {
			b.Fatal(err)
		}
	})
	return bs
}

func benchBasis(b *testing.B, bs *benchSector) {
	h, g, ir := bs.args(b)
	var s *hilbert.Sector
	for b.Loop() {
		var err error
		if s, err = hilbert.NewSector(h, 0, g, ir, hilbert.SectorOptions{}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(s.Dim()), "states")
}

func benchMatrix(b *testing.B, bs *benchSector) {
	s := bs.build(b).s
	var m *hilbert.CSR[float64]
	for b.Loop() {
		var err error
		if m, err = s.MatrixReal(context.Background()); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(m.Nonzeros()), "nnz")
	b.ReportMetric(float64(m.Bytes()), "bytes")
}

func benchApply(b *testing.B, bs *benchSector, csr bool) {
	bs.build(b)
	var op hilbert.Operator[float64] = bs.m
	if !csr {
		op, _ = bs.s.Real()
	}
	n := op.Dim()
	rng := rand.New(rand.NewPCG(1, 1))
	x := make([]float64, n)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	y := make([]float64, n)
	for b.Loop() {
		if err := op.Apply(context.Background(), y, x); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(n), "states")
}

func BenchmarkRing24K0FlipBasis(b *testing.B)           { benchBasis(b, bench24) }
func BenchmarkRing24K0FlipMatrix(b *testing.B)          { benchMatrix(b, bench24) }
func BenchmarkRing24K0FlipApplyMatrixFree(b *testing.B) { benchApply(b, bench24, false) }
func BenchmarkRing24K0FlipApplyCSR(b *testing.B)        { benchApply(b, bench24, true) }

func BenchmarkRing24NoSymmetryBasis(b *testing.B)           { benchBasis(b, bench24Raw) }
func BenchmarkRing24NoSymmetryMatrix(b *testing.B)          { benchMatrix(b, bench24Raw) }
func BenchmarkRing24NoSymmetryApplyMatrixFree(b *testing.B) { benchApply(b, bench24Raw, false) }
func BenchmarkRing24NoSymmetryApplyCSR(b *testing.B)        { benchApply(b, bench24Raw, true) }

func BenchmarkRing30K0FlipBasis(b *testing.B)           { benchBasis(b, bench30) }
func BenchmarkRing30K0FlipMatrix(b *testing.B)          { benchMatrix(b, bench30) }
func BenchmarkRing30K0FlipApplyMatrixFree(b *testing.B) { benchApply(b, bench30, false) }
func BenchmarkRing30K0FlipApplyCSR(b *testing.B)        { benchApply(b, bench30, true) }
