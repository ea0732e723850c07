package lanczos

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"
)

// exactThermal is the reference: thermal averages from a complete spectrum
// with sector scalars x (derivation: Z = sum_n e^{-E_n/T} and its
// derivatives), shifted by the lowest level for range safety.
func exactThermal(levels, x []float64, T float64) (lnZ, e, c, s, mx, vx float64) {
	e0 := math.Inf(1)
	for _, l := range levels {
		e0 = min(e0, l)
	}
	var z, z1, zx float64
	for i, l := range levels {
		p := math.Exp(-(l - e0) / T)
		z += p
		z1 += p * l
		zx += p * x[i]
	}
	e = z1 / z
	mx = zx / z
	var v, vxx float64
	for i, l := range levels {
		p := math.Exp(-(l-e0)/T) / z
		v += p * (l - e) * (l - e)
		vxx += p * (x[i] - mx) * (x[i] - mx)
	}
	lnZ = math.Log(z) - e0/T
	return lnZ, e, v / (T * T), lnZ + e/T, mx, vxx
}

func logTemps(lo, hi float64, n int) []float64 {
	ts := make([]float64, n)
	for i := range ts {
		ts[i] = lo * math.Pow(hi/lo, float64(i)/float64(n-1))
	}
	return ts
}

// ftlmSamples runs R samples of M steps from RandomVector on op.
func ftlmSamples[T Scalar](t testing.TB, op Operator[T], r, m int, seed uint64) []*Ritz {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 11))
	sp := NewSampler(op)
	out := make([]*Ritz, r)
	for i := range out {
		rz, err := sp.Sample(context.Background(), RandomVector[T](op.Dim(), rng), m)
		if err != nil {
			t.Fatal(err)
		}
		out[i] = rz
	}
	return out
}

// agreement counts the temperatures where |ftlm - exact| <= 4 error, and
// returns the largest |diff|/error.
func agreement(est []Estimate, exact []float64) (within int, worst float64) {
	for i, e := range est {
		d := math.Abs(e.Value - exact[i])
		if d <= 4*e.Error {
			within++
		}
		if e.Error > 0 {
			worst = max(worst, d/e.Error)
		} else if d > 0 {
			worst = math.Inf(1)
		}
	}
	return within, worst
}

// FTLM against exact diagonalization (gonum's mat.EigenSym, complex via the
// real 2n embedding) on random sparse Hermitian matrices, R = 20 random
// vectors, M = 100 steps, 25 temperatures from 0.05 to 50 (the spectra
// span about [-8, 8]). The estimates are statistical: a point agrees when
// |FTLM - exact| <= 4 error; at least 22 of 25 points must agree for each
// quantity and none may be off by more than 8 errors.
func TestFTLMRandomSparse(t *testing.T) {
	testFTLMRandom[float64](t, 600, 21)
	testFTLMRandom[complex128](t, 400, 22)
}

func testFTLMRandom[T Scalar](t *testing.T, n int, seed uint64) {
	a := randomSparse[T](n, 8, seed)
	levels := denseEigenvalues(t, a.dense(), n)
	temps := logTemps(0.05, 50, 25)
	samples := ftlmSamples[T](t, a, 20, 100, seed)
	th, err := Thermodynamics([]SectorSamples{{Dimension: int64(n), Samples: samples}}, temps, math.NaN())
	if err != nil {
		t.Fatal(err)
	}
	checkThermal(t, th, levels, make([]float64, n), false)
}

func checkThermal(t *testing.T, th *Thermal, levels, x []float64, withX bool) {
	t.Helper()
	nt := len(th.Temperatures)
	ex := make([][]float64, 6)
	for q := range ex {
		ex[q] = make([]float64, nt)
	}
	for i, T := range th.Temperatures {
		ex[0][i], ex[1][i], ex[2][i], ex[3][i], ex[4][i], ex[5][i] = exactThermal(levels, x, T)
	}
	names := []string{"lnZ", "E", "C", "S", "<x>", "Var x"}
	got := [][]Estimate{th.LnZ, th.Energy, th.SpecificHeat, th.Entropy, th.Mean, th.Variance}
	nq := 4
	if withX {
		nq = 6
	}
	for q := range nq {
		within, worst := agreement(got[q], ex[q])
		t.Logf("%s: %d of %d within 4 errors, worst %.2f", names[q], within, nt, worst)
		if within < nt-nt/8 || worst > 8 {
			t.Errorf("%s: %d of %d points within 4 errors, worst %.2f errors", names[q], within, nt, worst)
			for i := range nt {
				t.Logf("  T=%.4g %s: %.10g +- %.3g, exact %.10g", th.Temperatures[i], names[q], got[q][i].Value, got[q][i].Error, ex[q][i])
			}
		}
	}
}

// The statistical errors shrink as 1/sqrt(R) (central limit theorem for
// the average over independent random vectors): with 4 times as many
// samples the mean error over temperatures falls by a factor near 2; the
// test accepts 1.4 to 2.9, since the jackknife errors are themselves
// estimates with about 1/sqrt(2(R-1)) relative scatter.
func TestFTLMErrorsShrink(t *testing.T) {
	a := randomSparse[float64](500, 8, 41)
	temps := logTemps(0.1, 20, 12)
	mean := func(r int, seed uint64) [3]float64 {
		th, err := Thermodynamics([]SectorSamples{{Dimension: 500, Samples: ftlmSamples[float64](t, a, r, 80, seed)}}, temps, math.NaN())
		if err != nil {
			t.Fatal(err)
		}
		var m [3]float64
		for i := range temps {
			m[0] += th.Energy[i].Error / float64(len(temps))
			m[1] += th.SpecificHeat[i].Error / float64(len(temps))
			m[2] += th.Entropy[i].Error / float64(len(temps))
		}
		return m
	}
	small, large := mean(10, 1), mean(40, 2)
	for q, name := range []string{"E", "C", "S"} {
		ratio := small[q] / large[q]
		t.Logf("%s: mean error %.3g (R=10), %.3g (R=40), ratio %.2f", name, small[q], large[q], ratio)
		if ratio < 1.4 || ratio > 2.9 {
			t.Errorf("%s: error ratio %.2f for 4 times the samples, want about 2", name, ratio)
		}
	}
}

// With the R = D vectors of an orthonormal basis as start vectors and M = D
// steps, FTLM is exact to rounding (derivation: each sample's quadrature is
// exact once its Krylov space is invariant, and sum_r |<psi_n|r>|^2 = 1 for
// every eigenvector, so (D/R) sum_r <r|f(H)|r> = Tr f(H)). Reference: the
// spectrum from gonum's mat.EigenSym. Tolerance 1e-9 relative. Marked
// Exact, the sector is not resampled and the errors are zero.
func TestFTLMBasisVectorsExact(t *testing.T) {
	testBasisExact[float64](t, 120, 51)
	testBasisExact[complex128](t, 80, 52)
}

func testBasisExact[T Scalar](t *testing.T, n int, seed uint64) {
	a := randomSparse[T](n, 6, seed)
	levels := denseEigenvalues(t, a.dense(), n)
	sp := NewSampler[T](a)
	var samples []*Ritz
	for i := range n {
		e := make([]T, n)
		e[i] = 1
		rz, err := sp.Sample(context.Background(), e, n)
		if err != nil {
			t.Fatal(err)
		}
		samples = append(samples, rz)
	}
	temps := logTemps(0.05, 100, 15)
	for _, exact := range []bool{false, true} {
		th, err := Thermodynamics([]SectorSamples{{Dimension: int64(n), Exact: exact, Samples: samples}}, temps, math.NaN())
		if err != nil {
			t.Fatal(err)
		}
		for i, T := range temps {
			lnZ, e, c, s, _, _ := exactThermal(levels, make([]float64, n), T)
			for _, q := range []struct {
				name      string
				got       Estimate
				want, ref float64
			}{
				{"lnZ", th.LnZ[i], lnZ, math.Abs(lnZ)}, {"E", th.Energy[i], e, 8},
				{"C", th.SpecificHeat[i], c, math.Abs(c)}, {"S", th.Entropy[i], s, math.Abs(s)},
			} {
				if math.Abs(q.got.Value-q.want) > 1e-9*max(q.ref, 1e-3) {
					t.Errorf("%T exact=%v T=%g %s = %.15g, want %.15g", *new(T), exact, T, q.name, q.got.Value, q.want)
				}
				if exact && q.got.Error != 0 {
					t.Errorf("exact sector: %s error %g", q.name, q.got.Error)
				}
			}
		}
	}
}

// One Ritz holding the complete spectrum with unit weights is the exact
// trace (derivation: sum_n f(E_n) = Tr f(H)). Tolerance 1e-12 relative.
func TestFTLMExactSpectrumSector(t *testing.T) {
	levels := openChainSpectrum(50)
	w := make([]float64, len(levels))
	for i := range w {
		w[i] = 1
	}
	th, err := Thermodynamics([]SectorSamples{{Dimension: 50, Exact: true, Samples: []*Ritz{{Values: levels, Weights: w}}}},
		[]float64{0.01, 0.3, 2, 1e3}, math.NaN())
	if err != nil {
		t.Fatal(err)
	}
	for i, T := range th.Temperatures {
		lnZ, e, c, s, _, _ := exactThermal(levels, make([]float64, 50), T)
		got := []float64{th.LnZ[i].Value, th.Energy[i].Value, th.SpecificHeat[i].Value, th.Entropy[i].Value}
		for q, want := range []float64{lnZ, e, c, s} {
			if math.Abs(got[q]-want) > 1e-12*max(1, math.Abs(want)) {
				t.Errorf("T=%g quantity %d: %.15g, want %.15g", T, q, got[q], want)
			}
		}
	}
}

// High-temperature limit (derivation): at T = +Inf every Boltzmann factor
// is 1 and the weights of a unit vector sum to 1, so Z = sum_s D_s and
// S = ln sum_s D_s for any number of samples, in every jackknife replica
// (zero error); C = 0. At T = 1e10 the same holds to 1e-9.
func TestFTLMHighTemperatureEntropy(t *testing.T) {
	a := randomSparse[complex128](100, 6, 61)
	b := randomSparse[complex128](37, 6, 62)
	sectors := []SectorSamples{
		{Dimension: 100, Value: 1, Samples: ftlmSamples[complex128](t, a, 2, 30, 1)},
		{Dimension: 37, Value: -1, Offset: 0.7, Samples: ftlmSamples[complex128](t, b, 3, 30, 2)},
	}
	th, err := Thermodynamics(sectors, []float64{math.Inf(1), 1e10}, math.NaN())
	if err != nil {
		t.Fatal(err)
	}
	want := math.Log(137)
	if s := th.Entropy[0]; math.Abs(s.Value-want) > 1e-13 || s.Error > 1e-13 {
		t.Errorf("T=Inf: S = %.16g +- %g, want ln 137 = %.16g", s.Value, s.Error, want)
	}
	if math.Abs(th.LnZ[0].Value-want) > 1e-13 || th.SpecificHeat[0].Value != 0 {
		t.Errorf("T=Inf: lnZ %.16g, C %g", th.LnZ[0].Value, th.SpecificHeat[0].Value)
	}
	if s := th.Entropy[1]; math.Abs(s.Value-want) > 1e-9 {
		t.Errorf("T=1e10: S = %.16g, want %.16g", s.Value, want)
	}
	// The sector shares at T = Inf are D_s / D exactly: <x> = (100-37)/137.
	if m := th.Mean[0]; math.Abs(m.Value-63.0/137) > 1e-13 {
		t.Errorf("T=Inf: <x> = %.16g, want %.16g", m.Value, 63.0/137)
	}
}

// Sector-resolved averages: a block-diagonal matrix with three sectors of
// scalar x = -1, 0, 1 and a field term -h x in each sector (Offset),
// against the exact spectrum of the blocks (gonum's mat.EigenSym), with
// <x> and Var(x) as for a magnetization M = <S^z> and chi = Var(S^z)/T.
// Same statistical criterion as TestFTLMRandomSparse.
func TestFTLMSectors(t *testing.T) {
	const h = 0.4
	dims := []int{150, 240, 150}
	var sectors []SectorSamples
	var levels, xs []float64
	for s, d := range dims {
		x := float64(s - 1)
		a := randomSparse[float64](d, 8, uint64(70+s))
		for _, e := range denseEigenvalues(t, a.dense(), d) {
			levels = append(levels, e-h*x)
			xs = append(xs, x)
		}
		sectors = append(sectors, SectorSamples{Dimension: int64(d), Value: x, Offset: -h * x,
			Samples: ftlmSamples[float64](t, a, 16, 90, uint64(80+s))})
	}
	th, err := Thermodynamics(sectors, logTemps(0.05, 50, 25), math.NaN())
	if err != nil {
		t.Fatal(err)
	}
	checkThermal(t, th, levels, xs, true)
}

// The tight-binding open chain (closed form eps_k = -2 cos(pi k/(N+1))),
// N = 1500, R = 10, M = 100; same criterion as TestFTLMRandomSparse.
func TestFTLMOpenChain(t *testing.T) {
	const n = 1500
	op := &ring[float64]{n: n, open: true}
	th, err := Thermodynamics([]SectorSamples{{Dimension: n, Samples: ftlmSamples[float64](t, op, 10, 100, 90)}},
		logTemps(0.02, 20, 25), math.NaN())
	if err != nil {
		t.Fatal(err)
	}
	checkThermal(t, th, openChainSpectrum(n), make([]float64, n), false)
}

// The shift only sets a reference (derivation: it cancels from every
// ratio, and ln Z is corrected by -shift/T): any finite shift gives the
// same results to rounding, with no overflow even at T = 1e-3 and a shift
// 50 above the spectrum.
func TestThermodynamicsShift(t *testing.T) {
	a := randomSparse[float64](200, 8, 95)
	sec := []SectorSamples{{Dimension: 200, Samples: ftlmSamples[float64](t, a, 6, 60, 3)}}
	temps := []float64{1e-3, 0.1, 1, 10}
	ref, err := Thermodynamics(sec, temps, math.NaN())
	if err != nil {
		t.Fatal(err)
	}
	for _, shift := range []float64{-20, 0, 50} {
		th, err := Thermodynamics(sec, temps, shift)
		if err != nil {
			t.Fatal(err)
		}
		for i := range temps {
			pairs := [][2]Estimate{{th.LnZ[i], ref.LnZ[i]}, {th.Energy[i], ref.Energy[i]}, {th.SpecificHeat[i], ref.SpecificHeat[i]}, {th.Entropy[i], ref.Entropy[i]}}
			for q, p := range pairs {
				scale := max(1, math.Abs(p[1].Value))
				if math.Abs(p[0].Value-p[1].Value) > 1e-9*scale || math.Abs(p[0].Error-p[1].Error) > 1e-9*scale {
					t.Errorf("shift %g T=%g quantity %d: %v, reference %v", shift, temps[i], q, p[0], p[1])
				}
			}
		}
	}
}

// Input errors documented by Thermodynamics: no sectors, a non-positive
// dimension, no samples, one sample in a stochastic sector, a malformed
// sample, a non-positive or NaN temperature; one sample of an Exact sector
// is fine.
func TestThermodynamicsErrors(t *testing.T) {
	good := &Ritz{Values: []float64{0, 1}, Weights: []float64{0.5, 0.5}}
	for i, c := range []struct {
		sec   []SectorSamples
		temps []float64
	}{
		{nil, []float64{1}},
		{[]SectorSamples{{Dimension: 0, Samples: []*Ritz{good, good}}}, []float64{1}},
		{[]SectorSamples{{Dimension: 2}}, []float64{1}},
		{[]SectorSamples{{Dimension: 2, Samples: []*Ritz{good}}}, []float64{1}},
		{[]SectorSamples{{Dimension: 2, Samples: []*Ritz{good, {Values: []float64{1}}}}}, []float64{1}},
		{[]SectorSamples{{Dimension: 2, Samples: []*Ritz{good, good}}}, []float64{0}},
		{[]SectorSamples{{Dimension: 2, Samples: []*Ritz{good, good}}}, []float64{math.NaN()}},
	} {
		if _, err := Thermodynamics(c.sec, c.temps, math.NaN()); err == nil {
			t.Errorf("case %d: no error", i)
		}
	}
	if _, err := Thermodynamics([]SectorSamples{{Dimension: 2, Exact: true, Samples: []*Ritz{good}}}, []float64{1}, math.NaN()); err != nil {
		t.Errorf("one exact sample: %v", err)
	}
}
