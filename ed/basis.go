package ed

import (
	"fmt"
	"sort"
)

// sectorBasis is one block of the product basis: every state with a given
// total S^z (twoSz), or all states when S^z is not conserved.
type sectorBasis struct {
	label  string
	hasSz  bool
	twoSz  int
	states []int64 // product-state indices, ascending
}

func (b *sectorBasis) dim() int { return len(b.states) }

func (b *sectorBasis) sz() float64 { return float64(b.twoSz) / 2 }

// basisSet is the partition of the product basis into sectors, with the
// position of every product state inside its sector.
type basisSet struct {
	sectors []*sectorBasis
	// pos[x] is the index of state x inside its sector; nil when there is a
	// single sector of all states (then pos[x] = x).
	pos []int32
}

func (bs *basisSet) index(x int64) int {
	if bs.pos == nil {
		return int(x)
	}
	return int(bs.pos[x])
}

// sectorDimensions returns the dimension of every sector, without building
// the basis: the coefficients of prod_i (t^{-S_i} + ... + t^{S_i}).
func sectorDimensions(sys *spinSystem, bySz bool) map[int]int64 {
	if !bySz {
		return map[int]int64{0: sys.total}
	}
	// counts indexed by twoSz + maxTwo
	max := 0
	for _, t := range sys.twoS {
		max += t
	}
	c := make([]int64, 2*max+1)
	c[max] = 1
	reach := 0
	for _, t := range sys.twoS {
		next := make([]int64, len(c))
		for v := -reach; v <= reach; v++ {
			if c[v+max] == 0 {
				continue
			}
			for k := 0; k <= t; k++ {
				next[v+t-2*k+max] += c[v+max]
			}
		}
		c = next
		reach += t
	}
	out := map[int]int64{}
	for v := -max; v <= max; v++ {
		if c[v+max] > 0 {
			out[v] = c[v+max]
		}
	}
	return out
}

// newBasisSet enumerates the product basis into sectors of total S^z when
// bySz, or one sector of all states otherwise.
func newBasisSet(sys *spinSystem, bySz bool) *basisSet {
	if !bySz {
		st := make([]int64, sys.total)
		for x := range st {
			st[x] = int64(x)
		}
		return &basisSet{sectors: []*sectorBasis{{label: "all states", states: st}}}
	}
	dims := sectorDimensions(sys, true)
	keys := make([]int, 0, len(dims))
	for v := range dims {
		keys = append(keys, v)
	}
	sort.Ints(keys)
	bs := &basisSet{pos: make([]int32, sys.total)}
	idx := map[int]*sectorBasis{}
	for _, v := range keys {
		s := &sectorBasis{label: "Sz=" + halfString(v), hasSz: true, twoSz: v, states: make([]int64, 0, dims[v])}
		idx[v] = s
		bs.sectors = append(bs.sectors, s)
	}
	k := make([]int, sys.n)
	for x := int64(0); x < sys.total; x++ {
		sys.digits(x, k)
		s := idx[sys.twoSz(k)]
		bs.pos[x] = int32(len(s.states))
		s.states = append(s.states, x)
	}
	return bs
}

// halfString prints v/2 as an integer or a fraction: 3 -> "3/2", -2 -> "-1".
func halfString(v int) string {
	if v%2 == 0 {
		return fmt.Sprint(v / 2)
	}
	return fmt.Sprintf("%d/2", v)
}

// mirrorSources returns, for every sector, the index of the sector with the
// opposite S^z when the sector's spectrum can be copied from it (flip
// symmetry, S^z < 0), and -1 when the sector must be diagonalized.
func (bs *basisSet) mirrorSources(flip bool) []int {
	src := make([]int, len(bs.sectors))
	byTwoSz := map[int]int{}
	for i, s := range bs.sectors {
		byTwoSz[s.twoSz] = i
	}
	for i, s := range bs.sectors {
		src[i] = -1
		if j, ok := byTwoSz[-s.twoSz]; flip && s.hasSz && s.twoSz < 0 && ok {
			src[i] = j
		}
	}
	return src
}

// solvedSectors returns the indices of the sectors with mirror source -1.
func solvedSectors(src []int) []int {
	var out []int
	for i, j := range src {
		if j < 0 {
			out = append(out, i)
		}
	}
	return out
}
