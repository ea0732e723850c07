package hilbert

import (
	"fmt"
	"math"
)

// NoSz passed as twoSz selects all product states (no S^z conservation).
const NoSz = math.MinInt

// SzDimension returns the number of product states with 2 S^z = twoSz (all
// states for NoSz), the coefficient of t^twoSz in prod_i (t^{-2S_i} + t^{-2S_i+2} + ... + t^{2S_i}).
func SzDimension(twoS []int, twoSz int) (int64, error) {
	sp, err := newSpins(twoS)
	if err != nil {
		return 0, err
	}
	if twoSz == NoSz {
		return int64(sp.total), nil
	}
	K, ok := sp.kSum(twoSz)
	if !ok {
		return 0, nil
	}
	c := []uint64{1}
	for _, t := range sp.twoS {
		next := make([]uint64, len(c)+t)
		for v, x := range c {
			for k := 0; k <= t; k++ {
				next[v+k] += x
			}
		}
		c = next
	}
	return int64(c[K]), nil
}

// kSum returns K = sum_i k_i of the states with 2 S^z = twoSz
// (2 S^z = sum_i (2S_i - 2k_i)), and false when there are none.
func (sp *spins) kSum(twoSz int) (int, bool) {
	d := sp.sumTwo - twoSz
	if d < 0 || d%2 != 0 || d > 2*sp.sumTwo {
		return 0, false
	}
	return d / 2, true
}

// fixedPoints returns the number of product states with sum_i k_i = K
// (any K when K < 0) that element x maps onto themselves. A fixed state
// has, on every cycle of the permutation, one local state (no inversion)
// or alternating k, 2S - k (inversion: even cycles, any k, sum l S; odd
// cycles only k = S, which needs an integer S).
func fixedPoints(sp *spins, x element, K int) float64 {
	n := sp.n
	seen := make([]bool, n)
	// poly[v] = number of choices with partial sum v
	poly := []float64{1}
	for i := 0; i < n; i++ {
		if seen[i] {
			continue
		}
		l := 0
		for j := i; !seen[j]; j = x.perm[j] {
			seen[j] = true
			l++
		}
		t := sp.twoS[i]
		// weights w and counts of the choices of this cycle
		var ws, cs []int
		switch {
		case !x.flip:
			for k := 0; k <= t; k++ {
				ws = append(ws, l*k)
				cs = append(cs, 1)
			}
		case l%2 == 0:
			ws, cs = []int{l * t / 2}, []int{t + 1}
		case t%2 == 0:
			ws, cs = []int{l * t / 2}, []int{1}
		default:
			return 0
		}
		maxW := 0
		for _, w := range ws {
			maxW = max(maxW, w)
		}
		next := make([]float64, len(poly)+maxW)
		for v, p := range poly {
			if p == 0 {
				continue
			}
			for j, w := range ws {
				next[v+w] += p * float64(cs[j])
			}
		}
		poly = next
	}
	if K < 0 {
		s := 0.0
		for _, p := range poly {
			s += p
		}
		return s
	}
	if K >= len(poly) {
		return 0
	}
	return poly[K]
}

// Dimension returns the number of basis states of the sector (2 S^z =
// twoSz, or NoSz; the representation ir of the group), without building
// it, from the character formula
//
//	dim = (1/|G|) sum_g conj(chi(g)) Fix(g),
//
// Fix(g) the number of product states of the S^z sector that g maps onto
// themselves (the trace of the permutation matrix of g); exact for S^z
// sectors of fewer than 2^53 states. It is the number of representatives
// that NewSector keeps: an orbit on which chi is trivial on the stabilizer
// contributes exactly one state, any other none.
func Dimension(twoS []int, twoSz int, ir Irrep) (int64, error) {
	g := ir.group
	if g == nil {
		return 0, fmt.Errorf("hilbert: Dimension: zero Irrep")
	}
	sp, err := newSpins(twoS)
	if err != nil {
		return 0, err
	}
	if !sameSpins(sp, g.sp) {
		return 0, fmt.Errorf("hilbert: the group is for other sites")
	}
	if g.SpinInversion() && twoSz != 0 && twoSz != NoSz {
		return 0, fmt.Errorf("hilbert: spin inversion needs S^z = 0 (2 S^z = %d)", twoSz)
	}
	K := -1
	if twoSz != NoSz {
		var ok bool
		if K, ok = sp.kSum(twoSz); !ok {
			return 0, nil
		}
	}
	G := len(g.elems)
	acc := make([]float64, G)
	for e, x := range g.elems {
		acc[ir.phase[e]] += fixedPoints(sp, x, K)
	}
	re := 0.0
	for p, a := range acc {
		if a != 0 {
			re += a * real(rootOfUnity((G-p)%G, G))
		}
	}
	return int64(math.Round(re / float64(G))), nil
}

func sameSpins(a, b *spins) bool {
	if a.n != b.n {
		return false
	}
	for i := range a.twoS {
		if a.twoS[i] != b.twoS[i] {
			return false
		}
	}
	return true
}
