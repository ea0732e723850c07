package hilbert

import (
	"context"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"slices"
	"testing"
)

// randomCSR returns a CSR of dimension n with perRow to perRow+3 random
// off-diagonal entries a row, stored by newBlock as buildCSR stores them, and the same
// matrix as plain rows. Off-diagonal values are drawn from a set of
// distinct values (distinct 0: every value drawn afresh, uniform in [-1,
// 1), real and imaginary parts), so that distinct 1 gives blocks of one
// value, a few give indexed blocks, and 0 with more than 65536 entries in
// a block gives plain values.
func randomCSR[T Scalar](n, perRow, distinct int, workers int, seed uint64) (*CSR[T], [][]entry[T]) {
	rng := rand.New(rand.NewPCG(seed, 7))
	draw := func() T {
		var z T
		switch p := any(&z).(type) {
		case *float64:
			*p = 2*rng.Float64() - 1
		case *complex128:
			*p = complex(2*rng.Float64()-1, 2*rng.Float64()-1)
		}
		return z
	}
	set := make([]T, distinct)
	for i := range set {
		set[i] = draw()
	}
	m := &CSR[T]{dim: n, diag: make([]T, n), workers: workers}
	rows := make([][]entry[T], n)
	for r := range n {
		m.diag[r] = fromFloat[T](4*rng.Float64() - 2)
		cols := map[int32]bool{}
		for k := perRow + rng.IntN(4); len(cols) < k; {
			if c := int32(rng.IntN(n)); int(c) != r {
				cols[c] = true
			}
		}
		for _, c := range slices.Sorted(func(yield func(int32) bool) {
			for c := range cols {
				if !yield(c) {
					return
				}
			}
		}) {
			v := draw()
			if distinct > 0 {
				v = set[rng.IntN(distinct)]
			}
			rows[r] = append(rows[r], entry[T]{c, v})
		}
	}
	for r0 := 0; r0 < n; r0 += csrRows {
		ptr := []uint32{0}
		var col []int32
		var val []T
		for r := r0; r < min(n, r0+csrRows); r++ {
			for _, e := range rows[r] {
				col = append(col, e.col)
				val = append(val, e.val)
			}
			ptr = append(ptr, uint32(len(col)))
		}
		m.blocks = append(m.blocks, newBlock(ptr, col, val))
		m.nnz += int64(len(col))
	}
	return m, rows
}

// Source: the definition of the three storage forms (derivation): the
// products of a CSR whose blocks hold one value, indexed values or plain
// values equal the plain row sums to 1e-14 of the row's sum of
// magnitudes, in both scalar types; ApplyDot returns the same product,
// bit for bit, and Re <x, Mx> and ||Mx||^2 to 1e-13 of sum |x_r| |(Mx)_r|
// and of ||Mx||^2; one worker and four give bit-identical results.
func TestCSRForms(t *testing.T) {
	testCSRForms[float64](t)
	testCSRForms[complex128](t)
}

func testCSRForms[T Scalar](t *testing.T) {
	for _, c := range []struct {
		name                string
		n, perRow, distinct int
		want                func(b csrBlock[T]) bool
	}{
		{"one value", 5000, 9, 1, func(b csrBlock[T]) bool { return b.idx == nil && b.val == nil && len(b.tab) == 1 }},
		{"indexed", 5000, 9, 5, func(b csrBlock[T]) bool { return b.idx != nil && len(b.tab) == 5 }},
		{"plain", 3 * csrRows, 40, 0, func(b csrBlock[T]) bool { return b.val != nil }},
	} {
		m1, rows := randomCSR[T](c.n, c.perRow, c.distinct, 1, 11)
		m4, _ := randomCSR[T](c.n, c.perRow, c.distinct, 4, 11)
		for i, b := range m1.blocks {
			if !c.want(b) {
				t.Fatalf("%s: block %d not in the expected form", c.name, i)
			}
		}
		rng := rand.New(rand.NewPCG(3, 3))
		x := make([]T, c.n)
		for i := range x {
			x[i] = fromComplex[T](complex(rng.NormFloat64(), rng.NormFloat64()))
		}
		ctx := context.Background()
		y1, y2, y4 := make([]T, c.n), make([]T, c.n), make([]T, c.n)
		if err := m1.Apply(ctx, y1, x); err != nil {
			t.Fatal(err)
		}
		dot, n2, err := m1.ApplyDot(ctx, y2, x)
		if err != nil {
			t.Fatal(err)
		}
		dot4, n24, err := m4.ApplyDot(ctx, y4, x)
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(y1, y2) || !slices.Equal(y1, y4) || dot != dot4 || n2 != n24 {
			t.Errorf("%s: Apply, ApplyDot and four workers differ", c.name)
		}
		absDot, wantDot, wantN2 := 0.0, 0.0, 0.0
		for r, es := range rows {
			want := m1.diag[r] * x[r]
			mag := cmplx.Abs(toC(m1.diag[r] * x[r]))
			for _, e := range es {
				want += e.val * x[e.col]
				mag += cmplx.Abs(toC(e.val * x[e.col]))
			}
			if d := cmplx.Abs(toC(y1[r] - want)); d > 1e-14*mag {
				t.Fatalf("%s: row %d: %v, want %v", c.name, r, y1[r], want)
			}
			wantDot += real(cmplx.Conj(toC(x[r])) * toC(want))
			absDot += cmplx.Abs(toC(x[r])) * cmplx.Abs(toC(want))
			wantN2 += real(cmplx.Conj(toC(want)) * toC(want))
		}
		if math.Abs(dot-wantDot) > 1e-13*absDot || math.Abs(n2-wantN2) > 1e-13*wantN2 {
			t.Errorf("%s: ApplyDot %g %g, want %g %g", c.name, dot, n2, wantDot, wantN2)
		}
	}
}

func toC[T Scalar](v T) complex128 {
	switch x := any(v).(type) {
	case float64:
		return complex(x, 0)
	case complex128:
		return x
	}
	return 0
}
