package lanczos

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// Source: the definition of recurrence (derivation): update(ws, sub, c, w,
// sub, out), w - sum_i c_i s_i with the dots <s_i, w> and ||w||^2. The
// fused loop for one or two real vectors must leave w bit for bit as the
// BLAS path (Daxpy per vector) leaves it, and the sums must agree with the
// BLAS path to 1e-14 of sum |s_i| |w| (of ||w||^2), on vectors of several
// chunks with an odd tail; a zero coefficient (the vector is not read)
// and a third vector take the BLAS path.
func TestRecurrence(t *testing.T) {
	n := 3*chunkLen[float64]() + 7
	rng := rand.New(rand.NewPCG(8, 9))
	vec := func() []float64 {
		v := make([]float64, n)
		fillUniform(v, rng)
		return v
	}
	s0, s1, s2, w0 := vec(), vec(), vec(), vec()
	nan := make([]float64, n)
	for i := range nan {
		nan[i] = math.NaN()
	}
	var ws workspace
	for _, c := range []struct {
		sub [][]float64
		c   []float64
	}{
		{[][]float64{s0}, []float64{0.37}},
		{[][]float64{s0, s1}, []float64{-1.3, 0.21}},
		{[][]float64{s0, s1, s2}, []float64{0.5, 0.25, 0.125}},
		{[][]float64{s0, nan}, []float64{0.5, 0}},
	} {
		w := slices.Clone(w0)
		out := make([]float64, len(c.sub))
		n2 := recurrence(&ws, c.sub, c.c, w, out)

		ref := slices.Clone(w0)
		refOut := make([]float64, len(c.sub))
		refN2 := update(&ws, c.sub, c.c, ref, c.sub, refOut)
		if !slices.Equal(w, ref) {
			t.Errorf("%d vectors: w differs from the BLAS path", len(c.sub))
		}
		if math.Abs(n2-refN2) > 1e-14*refN2 {
			t.Errorf("%d vectors: ||w||^2 = %g, BLAS path %g", len(c.sub), n2, refN2)
		}
		for i, s := range c.sub {
			var scale float64
			for j := range s {
				scale += math.Abs(s[j] * ref[j])
			}
			if math.IsNaN(scale) {
				if !math.IsNaN(out[i]) {
					t.Errorf("%d vectors: <s%d, w> = %g, want NaN", len(c.sub), i, out[i])
				}
				continue
			}
			if math.Abs(out[i]-refOut[i]) > 1e-14*scale {
				t.Errorf("%d vectors: <s%d, w> = %g, BLAS path %g", len(c.sub), i, out[i], refOut[i])
			}
		}
		if math.IsNaN(n2) {
			t.Errorf("%d vectors: a vector with a zero coefficient was subtracted", len(c.sub))
		}
	}
}
