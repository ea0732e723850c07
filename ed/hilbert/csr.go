package hilbert

import (
	"context"
	"fmt"
	"math"
	"sort"
)

// CSR is a sector's matrix stored once, row by row, for fast products:
// the diagonal apart, and the off-diagonal entries of each block of
// csrRows rows as int32 columns with either the values themselves or, when
// the block has at most 65536 distinct values (the usual case: a few
// couplings times a few phases and normalization ratios), uint16 indices
// into the block's table of values (6 bytes an entry instead of 12 real, 20
// complex). Entries are exact (no rounding beyond the sums of
// contributions to one entry; values are told apart bit for bit); exact
// zeros are dropped.
//
// A CSR is immutable and safe for concurrent use; it implements
// Operator[T].
type CSR[T Scalar] struct {
	dim     int
	diag    []T
	blocks  []csrBlock[T]
	nnz     int64
	workers int
}

const csrRows = 2048

type csrBlock[T Scalar] struct {
	ptr []uint32 // len rows+1, offsets into col
	col []int32
	idx []uint16 // nil: plain values in val
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
		blk := csrBlock[T]{ptr: ptr, col: append([]int32(nil), col...)}
		if idx, tab, ok := encodeValues(val); ok {
			blk.idx, blk.tab = idx, tab
		} else {
			blk.val = append([]T(nil), val...)
		}
		m.blocks[b] = blk
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

// Apply sets dst = M src (dst and src of length Dim, not overlapping), in
// parallel over blocks of rows, each row summed in a fixed order.
func (m *CSR[T]) Apply(ctx context.Context, dst, src []T) error {
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
		blk := &m.blocks[b]
		r0 := b * csrRows
		rows := len(blk.ptr) - 1
		diag := m.diag[r0 : r0+rows]
		x := src[r0 : r0+rows]
		y := dst[r0 : r0+rows]
		ptr := blk.ptr
		if blk.idx != nil {
			tab := blk.tab
			for i := 0; i < rows; i++ {
				p0, p1 := ptr[i], ptr[i+1]
				col := blk.col[p0:p1]
				idx := blk.idx[p0:p1]
				acc := diag[i] * x[i]
				for j, c := range col {
					acc += tab[idx[j]] * src[c]
				}
				y[i] = acc
			}
			return
		}
		for i := 0; i < rows; i++ {
			p0, p1 := ptr[i], ptr[i+1]
			col := blk.col[p0:p1]
			val := blk.val[p0:p1]
			acc := diag[i] * x[i]
			for j, c := range col {
				acc += val[j] * src[c]
			}
			y[i] = acc
		}
	})
}

// encodeValues returns the table of the distinct values of val (in order
// of first appearance) and every value's index in it, or false when there
// are more than 65536. Values are compared bit for bit (through a
// direct-mapped cache of 4096 slots in front of a map).
func encodeValues[T Scalar](val []T) ([]uint16, []T, bool) {
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
