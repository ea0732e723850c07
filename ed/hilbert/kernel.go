package hilbert

import (
	"context"
	"fmt"
	"math"
	"math/bits"
	"math/cmplx"
)

// Scalar is the element type of sector vectors: float64 for real sectors,
// complex128 for any.
type Scalar interface{ float64 | complex128 }

// Operator is the method set that Lanczos-type solvers need: the dimension
// and dst = H src. Sector (complex128), RealSector (float64) and CSR[T]
// implement it.
type Operator[T Scalar] interface {
	Dim() int
	Apply(ctx context.Context, dst, src []T) error
}

// entry is one contribution H_{r, col} += val to a row.
type entry[T Scalar] struct {
	col int32
	val T
}

// kernel computes the rows of a sector's matrix in the scalar type T.
type kernel[T Scalar] struct {
	s    *Sector
	coef []T   // conj of the off-diagonal coefficients, in compiled order
	chi  []T   // chi(e)
	sq   []T   // sqrt(stab) by stab
	isq  []T   // 1/sqrt(stab) by stab
	amp  [][]T // general spins: amp[i][(op+1)(2S_i+1)+k] = <O_op k' | k>
}

func fromFloat[T Scalar](f float64) T {
	var z T
	switch p := any(&z).(type) {
	case *float64:
		*p = f
	case *complex128:
		*p = complex(f, 0)
	}
	return z
}

func fromComplex[T Scalar](c complex128) T {
	var z T
	switch p := any(&z).(type) {
	case *float64:
		*p = real(c)
	case *complex128:
		*p = c
	}
	return z
}

func realPart[T Scalar](v T) float64 {
	switch x := any(v).(type) {
	case float64:
		return x
	case complex128:
		return real(x)
	}
	return 0
}

func newKernel[T Scalar](s *Sector) *kernel[T] {
	k := &kernel[T]{s: s}
	c := s.h
	if s.sp.half {
		for _, t := range c.halfTerms {
			k.coef = append(k.coef, fromComplex[T](cmplx.Conj(t.coeff)))
		}
	} else {
		for _, t := range c.off {
			k.coef = append(k.coef, fromComplex[T](cmplx.Conj(t.Coeff)))
		}
		sp := s.sp
		k.amp = make([][]T, sp.n)
		for i := 0; i < sp.n; i++ {
			d := sp.twoS[i] + 1
			a := make([]T, 3*d)
			for kk := 0; kk < d; kk++ {
				a[kk] = fromFloat[T](sp.down[i][kk])
				a[d+kk] = fromFloat[T](sp.m[i][kk])
				a[2*d+kk] = fromFloat[T](sp.up[i][kk])
			}
			k.amp[i] = a
		}
	}
	G := len(s.grp.elems)
	for e := 0; e < G; e++ {
		k.chi = append(k.chi, fromComplex[T](s.ir.Character(e)))
	}
	k.sq = make([]T, G+1)
	k.isq = make([]T, G+1)
	for st := 1; st <= G; st++ {
		k.sq[st] = fromFloat[T](math.Sqrt(float64(st)))
		k.isq[st] = fromFloat[T](1 / math.Sqrt(float64(st)))
	}
	return k
}

// row returns the contributions of the off-diagonal terms to row r,
// (H x)_r = diag x_r + sum val x_col (a column may repeat, and may be r),
// and diag, the diagonal of H in the product basis at r. The entries live
// in sc.buf until the next call.
//
// The representatives of all the states H|r> reaches are found first, and
// looked up together (indexBatch), so that the memory accesses of the
// lookups overlap; without spatial symmetry in a complete S^z sector of
// spins 1/2 the states are their own representatives and the rank tables
// give each column directly.
func (k *kernel[T]) row(r int, sc *scratch[T]) (float64, []entry[T]) {
	kd := sc.kd
	buf := sc.buf[:0]
	sc.reps = sc.reps[:0]
	s := k.s
	c := s.h
	x := s.states[r]
	fr := k.isq[s.stab[r]]
	if s.sp.half {
		d := c.diagonalHalf(x)
		// Select the acting terms without branches (whether a term acts is
		// a coin toss for the branch predictor), then process them.
		terms := c.halfTerms
		if cap(kd) < len(terms) {
			kd = make([]int, len(terms))
		}
		act := kd[:len(terms)]
		na := 0
		for ti := range terms {
			t := &terms[ti]
			act[na] = ti
			miss := x&t.mask ^ t.need
			na += int(1 - (miss|-miss)>>63)
		}
		if s.rankLow != nil {
			// No spatial symmetry, a complete S^z sector: the rank tables
			// give the columns directly.
			for _, ti := range act[:na] {
				t := &terms[ti]
				a := k.coef[ti]
				if bits.OnesCount64(x&t.zmask)&1 == 1 { // m = -1/2 on an odd number of S^z factors
					a = -a
				}
				if j := s.Index(x ^ t.mask); j >= 0 {
					buf = append(buf, entry[T]{int32(j), a})
				}
			}
			sc.buf = buf
			return d, buf
		}
		for _, ti := range act[:na] {
			t := &terms[ti]
			a := k.coef[ti]
			if bits.OnesCount64(x&t.zmask)&1 == 1 { // m = -1/2 on an odd number of S^z factors
				a = -a
			}
			buf = k.push(sc, buf, x^t.mask, a)
		}
		return d, k.finish(sc, buf, fr)
	}
	sp := s.sp
	sp.digits(x, kd)
	d := c.diagonal(kd)
	for ti := range c.off {
		t := &c.off[ti]
		ka := kd[t.A]
		da := sp.twoS[t.A] + 1
		aa := k.amp[t.A][(int(t.PA)+1)*da+ka]
		if aa == 0 {
			continue
		}
		y := x
		switch t.PA {
		case Raise:
			y -= sp.stride[t.A]
		case Lower:
			y += sp.stride[t.A]
		}
		a := k.coef[ti] * aa
		if t.B >= 0 {
			kb := kd[t.B]
			db := sp.twoS[t.B] + 1
			ab := k.amp[t.B][(int(t.PB)+1)*db+kb]
			if ab == 0 {
				continue
			}
			switch t.PB {
			case Raise:
				y -= sp.stride[t.B]
			case Lower:
				y += sp.stride[t.B]
			}
			a *= ab
		}
		buf = k.push(sc, buf, y, a)
	}
	return d, k.finish(sc, buf, fr)
}

// scratch is one goroutine's working memory for rows.
type scratch[T Scalar] struct {
	kd   []int
	buf  []entry[T]
	reps []uint64
	idx  []int32
}

func newScratch[T Scalar](s *Sector) *scratch[T] {
	return &scratch[T]{kd: make([]int, max(s.sp.n, len(s.h.halfTerms)))}
}

// push records the product state y reached with amplitude a (conjugated):
// its representative in sc.reps, the element and amplitude in buf.
func (k *kernel[T]) push(sc *scratch[T], buf []entry[T], y uint64, a T) []entry[T] {
	e := 0
	if len(k.chi) > 1 {
		y, e = k.s.act.representative(y)
	}
	sc.reps = append(sc.reps, y)
	return append(buf, entry[T]{int32(e), a})
}

// finish looks the representatives up and turns buf into the row's
// entries, dropping states outside the sector; fr = 1/sqrt(|Stab_r|).
func (k *kernel[T]) finish(sc *scratch[T], buf []entry[T], fr T) []entry[T] {
	s := k.s
	if cap(sc.idx) < len(buf) {
		sc.idx = make([]int32, len(buf), 2*len(buf))
	}
	idx := sc.idx[:len(buf)]
	s.indexBatch(sc.reps, idx)
	out := buf[:0]
	sym := len(k.chi) > 1
	for i, en := range buf {
		j := idx[i]
		if j < 0 {
			continue
		}
		a := en.val
		if sym {
			a *= k.chi[en.col] * k.sq[s.stab[j]] * fr
		}
		out = append(out, entry[T]{j, a})
	}
	sc.buf = buf
	return out
}

// applyRows computes dst = H src, in parallel over blocks of rows; every
// row is summed in a fixed order, so the result does not depend on the
// scheduling.
func applyRows[T Scalar](ctx context.Context, k *kernel[T], dst, src []T) error {
	s := k.s
	n := len(s.states)
	if len(dst) != n || len(src) != n {
		panic(fmt.Sprintf("hilbert: Apply: lengths %d, %d, want %d", len(dst), len(src), n))
	}
	if n > 0 && &dst[0] == &src[0] {
		panic("hilbert: Apply: dst and src alias")
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	const rows = 1024
	nb := (n + rows - 1) / rows
	sc := make([]*scratch[T], s.workers)
	for w := range sc {
		sc[w] = newScratch[T](s)
	}
	return parallelDo(ctx, nb, s.workers, func(w, b int) {
		for r := b * rows; r < min(n, (b+1)*rows); r++ {
			d, es := k.row(r, sc[w])
			acc := fromFloat[T](d) * src[r]
			for _, e := range es {
				acc += e.val * src[e.col]
			}
			dst[r] = acc
		}
	})
}

// Apply sets dst = H src (complex vectors of length Dim; dst and src must
// not overlap), in parallel over rows (the gather form: each row is
// computed from H applied to its representative, with hermiticity), on at
// most Workers goroutines. It returns ctx.Err() if ctx is done first (dst
// is then partly written).
func (s *Sector) Apply(ctx context.Context, dst, src []complex128) error {
	return applyRows(ctx, s.kc, dst, src)
}

// ApplyReal is Apply for real vectors; it returns ErrNotReal unless
// IsReal.
func (s *Sector) ApplyReal(ctx context.Context, dst, src []float64) error {
	if !s.real {
		return ErrNotReal
	}
	return applyRows(ctx, s.kr, dst, src)
}

// RealSector is a real sector seen as an Operator[float64].
type RealSector struct{ s *Sector }

// Real returns the sector as an Operator[float64], or ErrNotReal.
func (s *Sector) Real() (RealSector, error) {
	if !s.real {
		return RealSector{}, ErrNotReal
	}
	return RealSector{s}, nil
}

// Dim returns the sector's dimension.
func (r RealSector) Dim() int { return r.s.Dim() }

// Apply is Sector.ApplyReal.
func (r RealSector) Apply(ctx context.Context, dst, src []float64) error {
	return r.s.ApplyReal(ctx, dst, src)
}
