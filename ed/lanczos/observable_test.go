package lanczos

import (
	"context"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// Observables: SampleObservable and the Observable estimate of
// Thermodynamics, against exact traces from gonum's dense symmetric
// eigensolver (mat.EigenSym with vectors; complex matrices through their
// real symmetric 2n embedding, where Tr f(R) A_R = 2 Tr f(H) A, so every
// thermal average is that of H).

// embed returns the real symmetric 2n x 2n embedding [[X, -Y], [Y, X]] of
// the Hermitian n x n matrix X + iY (row-major), or d itself for real T.
func embed[T Scalar](d []T, n int) ([]float64, int) {
	if !isComplex[T]() {
		return slices.Clone(floats(d)), n
	}
	c := complexes(d)
	m := 2 * n
	out := make([]float64, m*m)
	for i := range n {
		for j := range n {
			re, im := real(c[i*n+j]), imag(c[i*n+j])
			out[i*m+j] = re
			out[(n+i)*m+n+j] = re
			out[(n+i)*m+j] = im
			out[i*m+n+j] = -im
		}
	}
	return out, m
}

// exactObservable is the reference for a Hermitian h and observable a
// (dense, row-major, n x n): at every temperature <A> = Tr e^{-H/T} A / Z
// and the isothermal derivative d<A>/dlambda of H - lambda A,
//
//	chi = sum_{v,w} |A_vw|^2 (p_v - p_w)/(E_w - E_v) - <A>^2/T,
//
// the degenerate terms taken as p_v/T (Kubo's formula, derivation: second
// order perturbation theory of ln Z), from the eigenpairs of gonum's
// mat.EigenSym.
func exactObservable[T Scalar](t *testing.T, h, a []T, n int, temps []float64) (mean, chi []float64) {
	t.Helper()
	hr, m := embed(h, n)
	ar, _ := embed(a, n)
	var es mat.EigenSym
	if !es.Factorize(mat.NewSymDense(m, hr), true) {
		t.Fatal("reference EigenSym failed")
	}
	e := es.Values(nil)
	var u mat.Dense
	es.VectorsTo(&u)
	// A in the eigenbasis: U^T A U.
	var au, p mat.Dense
	au.Mul(mat.NewDense(m, m, ar), &u)
	p.Mul(u.T(), &au)
	for _, T := range temps {
		var z, za float64
		w := make([]float64, m)
		for v := range m {
			w[v] = math.Exp(-(e[v] - e[0]) / T)
			z += w[v]
			za += w[v] * p.At(v, v)
		}
		avg := za / z
		var k float64
		for v := range m {
			for x := range m {
				a2 := p.At(v, x) * p.At(v, x)
				if a2 == 0 {
					continue
				}
				if d := e[x] - e[v]; math.Abs(d) < 1e-12 {
					k += a2 * w[v] / T
				} else {
					k += a2 * (w[v] - w[x]) / d
				}
			}
		}
		mean = append(mean, avg)
		chi = append(chi, k/z-avg*avg/T)
	}
	return mean, chi
}

// randomObservable returns a random sparse Hermitian matrix like
// randomSparse, with a different seed and so not commuting with it.
func randomObservable[T Scalar](n int, seed uint64) *sparse[T] {
	return randomSparse[T](n, 4, seed^0xa5a5)
}

// Gauss-type exactness (derivation): after M steps V f(T) e_1 = f(H) v_0 for
// every polynomial f of degree below M, so sum_j Observable_j eps_j^p =
// Re <r|H^p A|r> for p < M, and the weights sum to <r|A|r>. The references
// are repeated applications of the matrices. Tolerance 1e-10 relative to
// |r|^2 ||H||^p ||A|| (||H|| <= 10, ||A|| <= 6 here); the start vector has
// norm 2.
func TestSampleObservableMoments(t *testing.T) {
	testObservableMoments[float64](t, 31)
	testObservableMoments[complex128](t, 32)
}

func testObservableMoments[T Scalar](t *testing.T, seed uint64) {
	const n, m = 300, 8
	h := randomSparse[T](n, 8, seed)
	a := randomObservable[T](n, seed)
	r := RandomVector[T](n, rand.New(rand.NewPCG(seed, 2)))
	for i := range r {
		r[i] *= 2
	}
	keep := slices.Clone(r)
	rz, err := NewSampler[T](h).SampleObservable(context.Background(), r, m, a)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(floats(r), floats(keep)) {
		t.Error("SampleObservable modified its start vector")
	}
	if len(rz.Observable) != len(rz.Values) {
		t.Fatalf("%d observable weights for %d Ritz values", len(rz.Observable), len(rz.Values))
	}
	// Plain Sample from the same vector: the same Ritz values and weights.
	plain, err := Sample[T](context.Background(), h, r, m)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(plain.Values, rz.Values) || !slices.Equal(plain.Weights, rz.Weights) || plain.Observable != nil {
		t.Error("SampleObservable changed the Ritz values or weights, or Sample returned observable weights")
	}
	ar := make([]T, n)
	if err := a.Apply(context.Background(), ar, r); err != nil {
		t.Fatal(err)
	}
	x := slices.Clone(r) // H^p r
	y := make([]T, n)
	for p := range m {
		exact := real(inner(x, ar)) // <H^p r|A r> = <r|H^p A|r>
		var q float64
		for j, e := range rz.Values {
			q += rz.Observable[j] * math.Pow(e, float64(p))
		}
		if math.Abs(q-exact) > 1e-10*4*6*math.Pow(10, float64(p)) {
			t.Errorf("%T p=%d: sum_j a_j eps_j^p = %.15g, <r|H^p A|r> = %.15g", *new(T), p, q, exact)
		}
		if err := h.Apply(context.Background(), y, x); err != nil {
			t.Fatal(err)
		}
		x, y = y, x
	}
}

// FTLM <A>(T) against the exact trace (exactObservable, gonum) on random
// sparse Hermitian matrices H and A that do not commute, R = 20 vectors of
// M = 100 steps, 20 temperatures from 0.05 to 50. Statistical criterion as
// in TestFTLMRandomSparse (common practice, no source): at least 7/8 of the
// points within 4 errors, none beyond 8.
func TestFTLMObservableRandom(t *testing.T) {
	testObservableRandom[float64](t, 500, 41)
	testObservableRandom[complex128](t, 300, 42)
}

func testObservableRandom[T Scalar](t *testing.T, n int, seed uint64) {
	h := randomSparse[T](n, 8, seed)
	a := randomObservable[T](n, seed)
	temps := logTemps(0.05, 50, 20)
	mean, _ := exactObservable(t, h.dense(), a.dense(), n, temps)
	rng := rand.New(rand.NewPCG(seed, 5))
	sp := NewSampler[T](h)
	var samples []*Ritz
	for range 20 {
		rz, err := sp.SampleObservable(context.Background(), RandomVector[T](n, rng), 100, a)
		if err != nil {
			t.Fatal(err)
		}
		samples = append(samples, rz)
	}
	th, err := Thermodynamics([]SectorSamples{{Dimension: int64(n), Samples: samples}}, temps, math.NaN())
	if err != nil {
		t.Fatal(err)
	}
	checkEstimates(t, "<A>", th.Temperatures, th.Observable, mean)
}

func checkEstimates(t *testing.T, name string, temps []float64, got []Estimate, exact []float64) {
	t.Helper()
	nt := len(temps)
	within, worst := agreement(got, exact)
	t.Logf("%s: %d of %d within 4 errors, worst %.2f", name, within, nt, worst)
	if within < nt-nt/8 || worst > 8 {
		t.Errorf("%s: %d of %d points within 4 errors, worst %.2f errors", name, within, nt, worst)
		for i := range nt {
			t.Logf("  T=%.4g %s: %.10g +- %.3g, exact %.10g", temps[i], name, got[i].Value, got[i].Error, exact[i])
		}
	}
	nonzero := false
	for _, e := range got {
		nonzero = nonzero || e.Error > 0
	}
	if !nonzero {
		t.Errorf("%s: every error is zero", name)
	}
}

// With the R = D vectors of an orthonormal basis and M = D steps, the
// observable estimate is exact to rounding (derivation: every Krylov space
// is then invariant, so each sample gives <e_i|f(H) A|e_i> exactly, and
// their sum is the trace). Marked Exact, the errors vanish. Reference:
// exactObservable (gonum). Tolerance 1e-9 relative to max(1, |<A>|).
func TestFTLMObservableBasisExact(t *testing.T) {
	testObservableBasisExact[float64](t, 90, 51)
	testObservableBasisExact[complex128](t, 60, 52)
}

func testObservableBasisExact[T Scalar](t *testing.T, n int, seed uint64) {
	h := randomSparse[T](n, 6, seed)
	a := randomObservable[T](n, seed)
	temps := logTemps(0.05, 100, 10)
	mean, _ := exactObservable(t, h.dense(), a.dense(), n, temps)
	sp := NewSampler[T](h)
	var samples []*Ritz
	for i := range n {
		e := make([]T, n)
		e[i] = 1
		rz, err := sp.SampleObservable(context.Background(), e, n, a)
		if err != nil {
			t.Fatal(err)
		}
		samples = append(samples, rz)
	}
	th, err := Thermodynamics([]SectorSamples{{Dimension: int64(n), Exact: true, Samples: samples}}, temps, math.NaN())
	if err != nil {
		t.Fatal(err)
	}
	for i, T := range temps {
		if got := th.Observable[i]; math.Abs(got.Value-mean[i]) > 1e-9*max(1, math.Abs(mean[i])) || got.Error != 0 {
			t.Errorf("%T T=%g: <A> = %.15g +- %g, exact %.15g", *new(T), T, got.Value, got.Error, mean[i])
		}
	}
}

// spinChain is a spin-1/2 ring of n sites in the full 2^n product basis
// (bit i = 1: spin i up),
//
//	H = J sum_i S_i . S_{i+1} + D sum_i (S_i^x S_{i+1}^y - S_i^y S_{i+1}^x) - h M,
//
// with the moment M = sum_i g_i S_i^z (transverse false) or sum_i g_i S_i^x
// (transverse true). The DM term is (i D/2)(S_i^+ S_{i+1}^- - S_i^- S_{i+1}^+)
// (derivation from S^x, S^y = (S^+ +- S^-)/(2, 2i)), so H is real for D = 0.
// It returns H and M.
func spinChain[T Scalar](n int, J, D, h float64, g []float64, transverse bool) (*sparse[T], *sparse[T]) {
	dim := 1 << n
	he := make([]map[int]T, dim)
	me := make([]map[int]T, dim)
	for x := range dim {
		he[x], me[x] = map[int]T{}, map[int]T{}
	}
	sz := func(x, i int) float64 { return float64(x>>i&1) - 0.5 }
	for x := range dim {
		for i := range n {
			j := (i + 1) % n
			he[x][x] += fromReal[T](J * sz(x, i) * sz(x, j))
			if x>>i&1 != x>>j&1 {
				y := x ^ (1 << i) ^ (1 << j)
				amp := complex(J/2, -D/2) // x: i up, j down; y = S_i^- S_j^+ x
				if x>>j&1 == 1 {          // x: i down, j up; y = S_i^+ S_j^- x
					amp = complex(J/2, D/2)
				}
				he[y][x] += fromComplexTest[T](amp)
			}
			if transverse {
				me[x^(1<<i)][x] += fromReal[T](g[i] / 2)
			} else {
				me[x][x] += fromReal[T](g[i] * sz(x, i))
			}
		}
	}
	for x := range dim {
		for y, v := range me[x] {
			he[x][y] -= fromReal[T](h) * v
		}
	}
	return fromEntries(he), fromEntries(me)
}

// fromComplexTest returns c as a T (its real part for real T).
func fromComplexTest[T Scalar](c complex128) T {
	f := make([]T, 1)
	if isComplex[T]() {
		complexes(f)[0] = c
	} else {
		f[0] = fromReal[T](real(c))
	}
	return f[0]
}

// On small spin rings whose moment does not commute with H, FTLM gives
// M(h) = <M> and, by ObservableDifference over h +- 1e-3 with the same
// random vectors, chi = dM/dh; the references are exactObservable's trace
// and Kubo sum (gonum). Real: a 9-site Heisenberg ring with one g of 2.6
// among 2.0 and the field along z; complex: an 8-site ring with D = 0.3 J
// and a transverse field, M = sum g_i S^x_i. R = 16 vectors of M = 80
// steps, T from 0.05 to 20. Criterion as in TestFTLMRandomSparse (common
// practice, no source). The common random numbers are checked too: the
// error of the difference is far below that of two independent estimates,
// sqrt(e_+^2 + e_-^2)/(2 dh) (with the same vectors the noise is nearly
// the same on both sides).
func TestFTLMObservableSpinRing(t *testing.T) {
	g := func(n int) []float64 {
		out := make([]float64, n)
		for i := range out {
			out[i] = 2
		}
		out[0] = 2.6
		return out
	}
	testObservableSpin[float64](t, 9, 0, 0.4, g(9), false, 61)
	testObservableSpin[complex128](t, 8, 0.3, 0.4, g(8), true, 62)
}

func testObservableSpin[T Scalar](t *testing.T, n int, D, h float64, g []float64, transverse bool, seed uint64) {
	const dh = 1e-3
	temps := logTemps(0.05, 20, 16)
	hc, mc := spinChain[T](n, 1, D, h, g, transverse)
	hp, _ := spinChain[T](n, 1, D, h+dh, g, transverse)
	hm, _ := spinChain[T](n, 1, D, h-dh, g, transverse)
	dim := 1 << n
	mean, chi := exactObservable(t, hc.dense(), mc.dense(), dim, temps)
	run := func(op *sparse[T]) []SectorSamples {
		rng := rand.New(rand.NewPCG(seed, 9)) // the same vectors for every field
		sp := NewSampler[T](op)
		var samples []*Ritz
		for range 16 {
			rz, err := sp.SampleObservable(context.Background(), RandomVector[T](dim, rng), 80, mc)
			if err != nil {
				t.Fatal(err)
			}
			samples = append(samples, rz)
		}
		return []SectorSamples{{Dimension: int64(dim), Samples: samples}}
	}
	center, plus, minus := run(hc), run(hp), run(hm)
	th, err := Thermodynamics(center, temps, math.NaN())
	if err != nil {
		t.Fatal(err)
	}
	checkEstimates(t, "M", temps, th.Observable, mean)
	d, err := ObservableDifference(plus, minus, temps, 1/(2*dh))
	if err != nil {
		t.Fatal(err)
	}
	checkEstimates(t, "chi", temps, d, chi)
	tp, err := Thermodynamics(plus, temps, math.NaN())
	if err != nil {
		t.Fatal(err)
	}
	tm, err := Thermodynamics(minus, temps, math.NaN())
	if err != nil {
		t.Fatal(err)
	}
	for i, T := range temps {
		naive := math.Hypot(tp.Observable[i].Error, tm.Observable[i].Error) / (2 * dh)
		if d[i].Error > 0.1*naive {
			t.Errorf("%T T=%g: chi error %.3g with common random numbers, %.3g for independent samples", *new(T), T, d[i].Error, naive)
		}
	}
}

// Input errors: observable weights on some samples only, or of the wrong
// length (Thermodynamics); sets of different layout, no observable weights
// or a non-finite scale (ObservableDifference); a nil or mismatched
// observable (SampleObservable).
func TestObservableErrors(t *testing.T) {
	good := &Ritz{Values: []float64{0, 1}, Weights: []float64{0.5, 0.5}, Observable: []float64{0.1, -0.2}}
	bare := &Ritz{Values: []float64{0, 1}, Weights: []float64{0.5, 0.5}}
	short := &Ritz{Values: []float64{0, 1}, Weights: []float64{0.5, 0.5}, Observable: []float64{0.1}}
	one := []float64{1}
	if _, err := Thermodynamics([]SectorSamples{{Dimension: 2, Samples: []*Ritz{good, bare}}}, one, math.NaN()); err == nil {
		t.Error("mixed observable weights: no error")
	}
	if _, err := Thermodynamics([]SectorSamples{{Dimension: 2, Samples: []*Ritz{good, short}}}, one, math.NaN()); err == nil {
		t.Error("short observable weights: no error")
	}
	set := []SectorSamples{{Dimension: 2, Samples: []*Ritz{good, good}}}
	if _, err := ObservableDifference(set, []SectorSamples{{Dimension: 2, Samples: []*Ritz{good, good, good}}}, one, 1); err == nil {
		t.Error("different numbers of samples: no error")
	}
	if _, err := ObservableDifference(set, append(slices.Clone(set), set...), one, 1); err == nil {
		t.Error("different numbers of sectors: no error")
	}
	plain := []SectorSamples{{Dimension: 2, Samples: []*Ritz{bare, bare}}}
	if _, err := ObservableDifference(plain, plain, one, 1); err == nil {
		t.Error("no observable weights: no error")
	}
	if _, err := ObservableDifference(set, set, one, math.Inf(1)); err == nil {
		t.Error("infinite scale: no error")
	}
	if d, err := ObservableDifference(set, set, one, 1); err != nil || d[0].Value != 0 || d[0].Error != 0 {
		t.Errorf("identical sets: %v, %v (want 0 +- 0)", d, err)
	}
	op := &ring[float64]{n: 10}
	sp := NewSampler[float64](op)
	r := RandomVector[float64](10, rand.New(rand.NewPCG(1, 2)))
	if _, err := sp.SampleObservable(context.Background(), r, 5, nil); err == nil {
		t.Error("nil observable: no error")
	}
	if _, err := sp.SampleObservable(context.Background(), r, 5, &ring[float64]{n: 9}); err == nil {
		t.Error("observable of another dimension: no error")
	}
}
