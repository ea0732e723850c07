package hilbert

import (
	"errors"
	"math/cmplx"
)

// Memory is the plan of a sector's memory, in bytes, made before anything
// is allocated.
type Memory struct {
	// Dim is the exact sector dimension (Dimension).
	Dim int64
	// Basis holds the representatives (8 bytes), their stabilizer orders
	// (2 bytes) and the index lookup table. NewSector needs up to twice the
	// representatives' part transiently while it assembles them.
	Basis int64
	// Tables holds the group-action tables, shared by all sectors of one
	// Group.
	Tables int64
	// RowBound bounds the off-diagonal entries of a row: per pair of sites
	// (and per site), the most terms that can act on one product state.
	RowBound int64
	// Matrix bounds the CSR matrix: MatrixMemory(Dim, Dim*RowBound, complex).
	// The matrix built is usually smaller (rows where fewer terms act, value
	// tables instead of values).
	Matrix int64
	// Vector is one vector of the sector (8 bytes per state real, 16
	// complex).
	Vector int64
	// Real reports whether the sector's matrix is real.
	Real bool
}

// EstimateMemory plans the memory of the sector NewSector(h, twoSz, grp,
// ir, ...) would build, from the exact dimension (the character formula,
// no enumeration) and the terms of h.
func EstimateMemory(h *Hamiltonian, twoSz int, grp *Group, ir Irrep) (Memory, error) {
	c, err := compile(h)
	if err != nil {
		return Memory{}, err
	}
	if grp == nil {
		if ir.group != nil {
			grp = ir.group
		} else {
			grp, _ = NewGroup(h.TwoS, nil, false)
			ir = grp.Irreps()[0]
		}
	}
	if ir.group != grp {
		return Memory{}, errors.New("hilbert: the representation is not one of the group's")
	}
	dim, err := Dimension(h.TwoS, twoSz, ir)
	if err != nil {
		return Memory{}, err
	}
	m := Memory{Dim: dim, Real: c.real && ir.Real}
	m.Basis = 10*dim + lookupBytes(dim, c.sp.n)
	m.Tables = tableBytes(grp)
	m.RowBound = rowBound(c)
	nnz := min(dim*m.RowBound, dim*dim)
	m.Matrix = MatrixMemory(dim, nnz, !m.Real)
	m.Vector = 8 * dim
	if !m.Real {
		m.Vector = 16 * dim
	}
	return m, nil
}

// MatrixMemory bounds the bytes of a CSR matrix of dimension dim with nnz
// off-diagonal entries: the diagonal, the row offsets, and per entry a
// 4-byte column and a value (8 bytes real, 16 complex; the value tables
// usually take much less).
func MatrixMemory(dim, nnz int64, complex bool) int64 {
	vb := int64(8)
	if complex {
		vb = 16
	}
	blocks := (dim + csrRows - 1) / csrRows
	return vb*dim + 4*(dim+blocks) + nnz*(4+vb)
}

// rowBound returns, summed over the pairs of sites and the single sites
// that carry off-diagonal terms, the largest number of them that act on a
// product state (each gives one product state, so at most one column).
func rowBound(c *compiled) int64 {
	sp := c.sp
	type pair struct{ a, b int }
	groups := map[pair][]Term{}
	var order []pair
	for _, t := range c.off {
		p := pair{t.A, t.B}
		if _, ok := groups[p]; !ok {
			order = append(order, p)
		}
		groups[p] = append(groups[p], t)
	}
	total := int64(0)
	for _, p := range order {
		ts := groups[p]
		best := 0
		kbMax := 0
		if p.b >= 0 {
			kbMax = sp.twoS[p.b]
		}
		for ka := 0; ka <= sp.twoS[p.a]; ka++ {
			for kb := 0; kb <= kbMax; kb++ {
				cnt := 0
				for _, t := range ts {
					if cmplx.Abs(t.Coeff) == 0 {
						continue
					}
					if _, _, ok := sp.localAmp(t.A, t.PA, ka); !ok {
						continue
					}
					if t.B >= 0 {
						if _, _, ok := sp.localAmp(t.B, t.PB, kb); !ok {
							continue
						}
					}
					cnt++
				}
				best = max(best, cnt)
			}
		}
		total += int64(best)
	}
	return total
}
