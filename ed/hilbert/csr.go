package hilbert

import (
	"context"
	"fmt"
	"math"
	"sort"
)

// CSR is a sector's matrix stored once, row by row, for fast products:
// the diagonal apart, and the off-diagonal entries of each block of
// csrRows rows as int32 columns with their values in one of three forms:
// a single value when every entry of the block has it (4 bytes an entry:
// uniform couplings without symmetry phases, such as the Heisenberg
// model in an S^z sector), uint16 indices into the block's table of
// values when it has at most 65536 distinct values (the usual case: a few
// couplings times a few phases and normalization ratios; 6 bytes an
// entry), or the values themselves (12 bytes an entry real, 20 complex).
// Entries are exact (no rounding beyond the sums of contributions to one
// entry; values are told apart bit for bit); exact zeros are dropped.
//
// A CSR is immutable and safe for concurrent use; it implements
// Operator[T], and with ApplyDot lanczos.DotOperator.
type CSR[T Scalar] struct {
	dim     int
	diag    []T
	blocks  []csrBlock[T]
	nnz     int64
	workers int
}

const csrRows = 2048

// csrBlock holds the off-diagonal entries of csrRows rows (fewer in the
// last block). Entry p has column col[p] and value val[p] when val is not
// nil, tab[idx[p]] when idx is not nil, and tab[0] otherwise.
type csrBlock[T Scalar] struct {
	ptr []uint32 // len rows+1, offsets into col
	col []int32
	idx []uint16
	tab []T
	val []T
}

// Dim returns the matrix dimension.
func (m *CSR[T]) Dim() int { return m.dim }

// Nonzeros returns the number of stored off-diagonal entries.
func (m *CSR[T]) Nonzeros() int64 { return m.nnz }

// Bytes returns the memory held by the matrix.
func (m *CSR[T]) Bytes() int64 {
	var z T
	vb := int64(sizeOf(z))
	b := int64(len(m.diag)) * vb
	for i := range m.blocks {
		blk := &m.blocks[i]
		b += 4*int64(len(blk.ptr)) + 4*int64(len(blk.col)) + 2*int64(len(blk.idx)) + vb*int64(len(blk.tab)+len(blk.val))
	}
	return b
}

func sizeOf[T Scalar](z T) int {
	if _, ok := any(z).(complex128); ok {
		return 16
	}
	return 8
}

// Matrix builds the sector's complex matrix (rows in parallel).
func (s *Sector) Matrix(ctx context.Context) (*CSR[complex128], error) {
	return buildCSR(ctx, s.kc)
}

// MatrixReal builds the sector's real matrix; ErrNotReal unless IsReal.
func (s *Sector) MatrixReal(ctx context.Context) (*CSR[float64], error) {
	if !s.real {
		return nil, ErrNotReal
	}
	return buildCSR(ctx, s.kr)
}

func buildCSR[T Scalar](ctx context.Context, k *kernel[T]) (*CSR[T], error) {
	s := k.s
	n := len(s.states)
	m := &CSR[T]{dim: n, diag: make([]T, n), workers: s.workers}
	nb := (n + csrRows - 1) / csrRows
	m.blocks = make([]csrBlock[T], nb)
	type work struct {
		sc  *scratch[T]
		col []int32
		val []T
	}
	sc := make([]work, s.workers)
	for w := range sc {
		sc[w].sc = newScratch[T](s)
	}
	err := parallelDo(ctx, nb, s.workers, func(w, b int) {
		r0, r1 := b*csrRows, min(n, (b+1)*csrRows)
		wk := &sc[w]
		col, val := wk.col[:0], wk.val[:0]
		ptr := make([]uint32, 0, r1-r0+1)
		ptr = append(ptr, 0)
		for r := r0; r < r1; r++ {
			d, buf := k.row(r, wk.sc)
			dg := fromFloat[T](d)
			// sort the row by column (rows are short: insertion sort)
			if len(buf) > 32 {
				sort.Slice(buf, func(i, j int) bool { return buf[i].col < buf[j].col })
			} else {
				for i := 1; i < len(buf); i++ {
					for j := i; j > 0 && buf[j].col < buf[j-1].col; j-- {
						buf[j], buf[j-1] = buf[j-1], buf[j]
					}
				}
			}
			for i := 0; i < len(buf); {
				c, v := buf[i].col, buf[i].val
				for i++; i < len(buf) && buf[i].col == c; i++ {
					v += buf[i].val
				}
				switch {
				case int(c) == r:
					dg += v
				case v != 0:
					col = append(col, c)
					val = append(val, v)
				}
			}
			// the diagonal of a Hermitian matrix is real
			m.diag[r] = fromFloat[T](realPart(dg))
			ptr = append(ptr, uint32(len(col)))
		}
		m.blocks[b] = newBlock(ptr, col, val)
		wk.col, wk.val = col, val
	})
	if err != nil {
		return nil, err
	}
	for i := range m.blocks {
		m.nnz += int64(len(m.blocks[i].col))
	}
	return m, nil
}

// newBlock stores the entries col, val of a block of rows (row offsets
// ptr, kept) in the most compact of the three forms; col and val are
// copied.
func newBlock[T Scalar](ptr []uint32, col []int32, val []T) csrBlock[T] {
	blk := csrBlock[T]{ptr: ptr, col: append([]int32(nil), col...)}
	switch idx, tab, ok := encodeValues(val); {
	case ok && idx == nil: // one value for all entries, or none
		blk.tab = tab
		if len(tab) == 0 {
			blk.tab = make([]T, 1)
		}
	case ok:
		blk.idx, blk.tab = idx, tab
	default:
		blk.val = append([]T(nil), val...)
	}
	return blk
}

// Apply sets dst = M src (dst and src of length Dim, not overlapping), in
// parallel over blocks of rows. Each row is summed in a fixed order: the
// off-diagonal entries 0, 4, 8, ..., and those after the last full group
// of four, in one partial sum s0, the entries 1, 5, ..., 2, 6, ... and 3,
// 7, ... in three others (independent additions, which overlap in the
// processor), then (s0 + s1) + (s2 + s3); the diagonal term starts s0, or,
// in a block of one value v, the partial sums add the gathered src
// elements and the row is diag src_r + v ((s0 + s1) + (s2 + s3)).
func (m *CSR[T]) Apply(ctx context.Context, dst, src []T) error {
	return m.apply(ctx, dst, src, nil)
}

// ApplyDot sets dst = M src as Apply does and returns, from the same pass,
// Re <src, dst> = Re sum_i conj(src_i) dst_i and ||dst||^2: the two
// reductions that a Lanczos step needs after its product (it implements
// lanczos.DotOperator). Each is summed over every block of csrRows rows
// in four interleaved partial sums, then over the blocks in order, so the
// results do not depend on the number of workers.
func (m *CSR[T]) ApplyDot(ctx context.Context, dst, src []T) (dot, norm2 float64, err error) {
	part := make([]float64, 2*len(m.blocks))
	if err := m.apply(ctx, dst, src, part); err != nil {
		return 0, 0, err
	}
	for b := range m.blocks {
		dot += part[2*b]
		norm2 += part[2*b+1]
	}
	return dot, norm2, nil
}

// apply is Apply; with part not nil it also stores block b's partial
// Re <src, dst> and ||dst||^2 in part[2b] and part[2b+1].
func (m *CSR[T]) apply(ctx context.Context, dst, src []T, part []float64) error {
	n := m.dim
	if len(dst) != n || len(src) != n {
		panic(fmt.Sprintf("hilbert: CSR.Apply: lengths %d, %d, want %d", len(dst), len(src), n))
	}
	if n > 0 && &dst[0] == &src[0] {
		panic("hilbert: CSR.Apply: dst and src alias")
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	return parallelDo(ctx, len(m.blocks), m.workers, func(_, b int) {
		r0 := b * csrRows
		rows := len(m.blocks[b].ptr) - 1
		m.applyBlock(b, dst, src)
		if part != nil {
			part[2*b], part[2*b+1] = dotParts(src[r0:r0+rows], dst[r0:r0+rows])
		}
	})
}

// applyBlock sets the rows of block b of dst = M src.
func (m *CSR[T]) applyBlock(b int, dst, src []T) {
	blk := &m.blocks[b]
	r0 := b * csrRows
	rows := len(blk.ptr) - 1
	diag := m.diag[r0 : r0+rows]
	x := src[r0 : r0+rows]
	y := dst[r0 : r0+rows]
	ptr := blk.ptr
	switch {
	case blk.val != nil:
		for i := 0; i < rows; i++ {
			p0, p1 := ptr[i], ptr[i+1]
			cs := blk.col[p0:p1]
			vs := blk.val[p0:p1]
			a0 := diag[i] * x[i]
			var a1, a2, a3 T
			for len(cs) >= 4 && len(vs) >= 4 {
				a0 += vs[0] * src[cs[0]]
				a1 += vs[1] * src[cs[1]]
				a2 += vs[2] * src[cs[2]]
				a3 += vs[3] * src[cs[3]]
				cs, vs = cs[4:], vs[4:]
			}
			for j, c := range cs {
				a0 += vs[j] * src[c]
			}
			y[i] = (a0 + a1) + (a2 + a3)
		}
	case blk.idx != nil:
		tab := blk.tab
		for i := 0; i < rows; i++ {
			p0, p1 := ptr[i], ptr[i+1]
			cs := blk.col[p0:p1]
			is := blk.idx[p0:p1]
			a0 := diag[i] * x[i]
			var a1, a2, a3 T
			for len(cs) >= 4 && len(is) >= 4 {
				a0 += tab[is[0]] * src[cs[0]]
				a1 += tab[is[1]] * src[cs[1]]
				a2 += tab[is[2]] * src[cs[2]]
				a3 += tab[is[3]] * src[cs[3]]
				cs, is = cs[4:], is[4:]
			}
			for j, c := range cs {
				a0 += tab[is[j]] * src[c]
			}
			y[i] = (a0 + a1) + (a2 + a3)
		}
	default:
		v := blk.tab[0]
		for i := 0; i < rows; i++ {
			cs := blk.col[ptr[i]:ptr[i+1]]
			var a0, a1, a2, a3 T
			for len(cs) >= 4 {
				a0 += src[cs[0]]
				a1 += src[cs[1]]
				a2 += src[cs[2]]
				a3 += src[cs[3]]
				cs = cs[4:]
			}
			for _, c := range cs {
				a0 += src[c]
			}
			y[i] = diag[i]*x[i] + v*((a0+a1)+(a2+a3))
		}
	}
}

// dotParts returns Re <x, y> = Re sum_i conj(x_i) y_i and ||y||^2, each
// summed in four partial sums over the elements i = 0, 1, 2, 3 mod 4 (the
// real and imaginary parts of complex elements in the same sum), added as
// (s0 + s1) + (s2 + s3).
func dotParts[T Scalar](x, y []T) (dot, norm2 float64) {
	switch xp := any(&x).(type) {
	case *[]float64:
		return dotPartsReal(*xp, *any(&y).(*[]float64))
	case *[]complex128:
		return dotPartsComplex(*xp, *any(&y).(*[]complex128))
	}
	panic("hilbert: unknown scalar type")
}

func dotPartsReal(x, y []float64) (float64, float64) {
	y = y[:len(x)]
	var d0, d1, d2, d3, n0, n1, n2, n3 float64
	i := 0
	for ; i+3 < len(x); i += 4 {
		d0 += x[i] * y[i]
		d1 += x[i+1] * y[i+1]
		d2 += x[i+2] * y[i+2]
		d3 += x[i+3] * y[i+3]
		n0 += y[i] * y[i]
		n1 += y[i+1] * y[i+1]
		n2 += y[i+2] * y[i+2]
		n3 += y[i+3] * y[i+3]
	}
	for ; i < len(x); i++ {
		d0 += x[i] * y[i]
		n0 += y[i] * y[i]
	}
	return (d0 + d1) + (d2 + d3), (n0 + n1) + (n2 + n3)
}

func dotPartsComplex(x, y []complex128) (float64, float64) {
	y = y[:len(x)]
	var d [4]float64
	var n [4]float64
	for i := range x {
		xr, xi, yr, yi := real(x[i]), imag(x[i]), real(y[i]), imag(y[i])
		d[i&3] += xr*yr + xi*yi
		n[i&3] += yr*yr + yi*yi
	}
	return (d[0] + d[1]) + (d[2] + d[3]), (n[0] + n[1]) + (n[2] + n[3])
}

// encodeValues returns the table of the distinct values of val (in order
// of first appearance) and every value's index in it, or false when there
// are more than 65536. Values are compared bit for bit (through a
// direct-mapped cache of 4096 slots in front of a map). When all the
// values are equal the table has one entry and idx is nil.
func encodeValues[T Scalar](val []T) ([]uint16, []T, bool) {
	if len(val) == 0 {
		return nil, nil, true
	}
	first := valueBits(val[0])
	uniform := true
	for _, v := range val[1:] {
		if valueBits(v) != first {
			uniform = false
			break
		}
	}
	if uniform {
		return nil, []T{val[0]}, true
	}
	idx := make([]uint16, len(val))
	var tab []T
	dict := map[[2]uint64]uint16{}
	var cacheKey [4096][2]uint64
	var cacheIdx [4096]int32
	for i := range cacheIdx {
		cacheIdx[i] = -1
	}
	for i, v := range val {
		key := valueBits(v)
		h := (key[0]*0x9E3779B97F4A7C15 ^ key[1]*0xC2B2AE3D27D4EB4F) >> 52
		if j := cacheIdx[h]; j >= 0 && cacheKey[h] == key {
			idx[i] = uint16(j)
			continue
		}
		j, ok := dict[key]
		if !ok {
			if len(tab) == 1<<16 {
				return nil, nil, false
			}
			j = uint16(len(tab))
			dict[key] = j
			tab = append(tab, v)
		}
		cacheKey[h], cacheIdx[h] = key, int32(j)
		idx[i] = j
	}
	return idx, tab, true
}

func valueBits[T Scalar](v T) [2]uint64 {
	switch x := any(v).(type) {
	case float64:
		return [2]uint64{math.Float64bits(x), 0}
	case complex128:
		return [2]uint64{math.Float64bits(real(x)), math.Float64bits(imag(x))}
	}
	return [2]uint64{}
}
