package hilbert

import (
	"fmt"
	"math"
	"math/bits"
	"math/cmplx"
)

// compiled is a validated Hamiltonian in the form the kernels use: the
// diagonal merged per pair and per site, the off-diagonal terms merged per
// operator (in a fixed order) and, for spins 1/2, as bit operations.
type compiled struct {
	sp        *spins
	diagConst float64   // constant part (m^2 = 1/4 of spins 1/2)
	zz        []ZZ      // A < B, merged
	z, zsq    []float64 // length n; zsq is zero on spins 1/2 (folded into diagConst)
	off       []Term    // off-diagonal terms, merged, in key order
	real      bool
	conserves bool
	scale     float64 // largest coefficient magnitude

	// Spins 1/2: diag(x) = halfConst - sum_zz c/2 [bit a xor bit b] - sum_i z_i bit_i,
	// evaluated as sum_g coeff_g popcount((x ^ x >> shift_g) & mask_g): the
	// pairs (a, a + shift) with one coefficient share a group (a ring's
	// nearest-neighbour bonds are two groups), and the field terms with one
	// coefficient form a group of shift 64 (x >> 64 = 0 in the formula
	// below).
	halfConst float64
	halfDiag  []diagGroup
	halfTerms []halfTerm
}

// diagGroup contributes coeff * popcount((x ^ x >> shift) & mask) (shift
// 64: popcount(x & mask)).
type diagGroup struct {
	coeff float64
	shift uint
	mask  uint64
}

// halfTerm is an off-diagonal term on spins 1/2: it acts on x when
// x & mask == need, giving x ^ mask with the amplitude
// coeff (-1)^popcount(x & zmask) (coeff includes 1/2 per S^z factor).
type halfTerm struct {
	mask, need, zmask uint64
	coeff             complex128
}

func compile(h *Hamiltonian) (*compiled, error) {
	if err := h.Validate(); err != nil {
		return nil, err
	}
	sp, _ := newSpins(h.TwoS)
	n := sp.n
	c := &compiled{sp: sp, z: make([]float64, n), zsq: make([]float64, n), real: h.IsReal(), conserves: h.ConservesSz()}
	zz := map[[2]int]float64{}
	addZZ := func(a, b int, v float64) {
		if a == b {
			c.zsq[a] += v
			return
		}
		if a > b {
			a, b = b, a
		}
		zz[[2]int{a, b}] += v
	}
	for _, t := range h.ZZ {
		addZZ(t.A, t.B, t.Coeff)
	}
	for i := range h.Z {
		c.z[i] += h.Z[i]
	}
	for i := range h.ZSq {
		c.zsq[i] += h.ZSq[i]
	}
	tm := termMap(h.Terms)
	for _, k := range sortedKeys(tm) {
		v := tm[k]
		if v == 0 {
			continue
		}
		if k.pa == Zop && k.pb == Zop {
			// Diagonal: Hermiticity (checked) makes the merged coefficient real.
			if k.b < 0 {
				c.z[k.a] += real(v)
			} else {
				addZZ(k.a, k.b, real(v))
			}
			continue
		}
		c.off = append(c.off, Term{A: k.a, B: k.b, PA: k.pa, PB: k.pb, Coeff: v})
	}
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			if v := zz[[2]int{i, j}]; v != 0 {
				c.zz = append(c.zz, ZZ{i, j, v})
			}
		}
	}
	for i := range c.zsq {
		if sp.twoS[i] == 1 {
			c.diagConst += c.zsq[i] / 4
			c.zsq[i] = 0
		}
	}
	for _, t := range c.zz {
		c.scale = math.Max(c.scale, math.Abs(t.Coeff))
	}
	for i := range c.z {
		c.scale = math.Max(c.scale, math.Max(math.Abs(c.z[i]), math.Abs(c.zsq[i])))
	}
	for _, t := range c.off {
		c.scale = math.Max(c.scale, cmplx.Abs(t.Coeff))
	}
	if sp.half {
		c.halfConst = c.diagConst
		type gkey struct {
			coeff float64
			shift uint
		}
		groups := map[gkey]uint64{}
		var keys []gkey
		add := func(k gkey, bit uint64) {
			if _, ok := groups[k]; !ok {
				keys = append(keys, k)
			}
			groups[k] |= bit
		}
		for _, t := range c.zz { // A < B
			c.halfConst += t.Coeff / 4
			add(gkey{-t.Coeff / 2, uint(t.B - t.A)}, 1<<uint(t.A))
		}
		for i, v := range c.z {
			c.halfConst += v / 2
			if v != 0 {
				add(gkey{-v, 64}, 1<<uint(i))
			}
		}
		for _, k := range keys {
			c.halfDiag = append(c.halfDiag, diagGroup{k.coeff, k.shift, groups[k]})
		}
		for _, t := range c.off {
			ht := halfTerm{coeff: t.Coeff}
			for _, f := range [2]struct {
				site int
				op   int8
			}{{t.A, t.PA}, {t.B, t.PB}} {
				if f.site < 0 {
					continue
				}
				bit := uint64(1) << uint(f.site)
				switch f.op {
				case Raise: // k = 1 -> 0
					ht.mask |= bit
					ht.need |= bit
				case Lower: // k = 0 -> 1
					ht.mask |= bit
				case Zop:
					ht.zmask |= bit
					ht.coeff /= 2
				}
			}
			c.halfTerms = append(c.halfTerms, ht)
		}
	}
	return c, nil
}

// diagonal returns <x|H|x> for the state with local indices k.
func (c *compiled) diagonal(k []int) float64 {
	sp := c.sp
	d := c.diagConst
	for _, t := range c.zz {
		d += t.Coeff * sp.m[t.A][k[t.A]] * sp.m[t.B][k[t.B]]
	}
	for i, v := range c.z {
		if v != 0 {
			d += v * sp.m[i][k[i]]
		}
	}
	for i, v := range c.zsq {
		if v != 0 {
			m := sp.m[i][k[i]]
			d += v * m * m
		}
	}
	return d
}

// diagonalHalf is diagonal for spins 1/2, from the bits of x.
func (c *compiled) diagonalHalf(x uint64) float64 {
	d := c.halfConst
	for _, g := range c.halfDiag {
		y := x
		if g.shift < 64 {
			y ^= x >> g.shift
		}
		d += g.coeff * float64(bits.OnesCount64(y&g.mask))
	}
	return d
}

// commutes returns nil when the site permutation perm (and, when flip, the
// spin inversion m -> -m) maps H onto itself on the sector: exactly the
// same merged coefficients (to 1e-10 of the largest), except that in the
// S^z = 0 sector (zeroSz) a change of Z by a uniform amount is allowed
// (sum_i c m_i = c S^z vanishes there).
func (c *compiled) commutes(perm []int, flip bool, zeroSz bool) error {
	tol := 1e-10 * c.scale
	sp := c.sp
	n := sp.n
	sgn := func(p int8) int8 {
		if flip {
			return -p
		}
		return p
	}
	orig := map[termKey]complex128{}
	for _, t := range c.off {
		orig[canonKey(t.A, t.B, t.PA, t.PB)] += t.Coeff
	}
	img := map[termKey]complex128{}
	for _, t := range c.off {
		v := t.Coeff
		b := -1
		if t.B >= 0 {
			b = perm[t.B]
		}
		if flip {
			if t.PA == Zop {
				v = -v
			}
			if t.B >= 0 && t.PB == Zop {
				v = -v
			}
		}
		img[canonKey(perm[t.A], b, sgn(t.PA), sgn(t.PB))] += v
	}
	for _, m := range []map[termKey]complex128{orig, img} {
		for _, k := range sortedKeys(m) {
			if d := cmplx.Abs(orig[k] - img[k]); d > tol {
				return fmt.Errorf("the coefficient of %v changes from %v to %v", k, orig[k], img[k])
			}
		}
	}
	zzOrig := map[[2]int]float64{}
	zzImg := map[[2]int]float64{}
	for _, t := range c.zz {
		zzOrig[[2]int{t.A, t.B}] += t.Coeff
		a, b := perm[t.A], perm[t.B]
		if a > b {
			a, b = b, a
		}
		zzImg[[2]int{a, b}] += t.Coeff
	}
	for _, t := range c.zz {
		for _, key := range [][2]int{{t.A, t.B}, {min(perm[t.A], perm[t.B]), max(perm[t.A], perm[t.B])}} {
			if d := math.Abs(zzOrig[key] - zzImg[key]); d > tol {
				return fmt.Errorf("the S^z S^z coefficient of sites %d, %d changes from %v to %v", key[0], key[1], zzOrig[key], zzImg[key])
			}
		}
	}
	zImg := make([]float64, n)
	qImg := make([]float64, n)
	for i := 0; i < n; i++ {
		zImg[perm[i]] = c.z[i]
		if flip {
			zImg[perm[i]] = -c.z[i]
		}
		qImg[perm[i]] = c.zsq[i]
	}
	d0 := zImg[0] - c.z[0]
	for i := 0; i < n; i++ {
		d := zImg[i] - c.z[i]
		if zeroSz {
			d -= d0
		}
		if math.Abs(d) > tol {
			return fmt.Errorf("the S^z coefficient of site %d changes from %v to %v", i, c.z[i], zImg[i])
		}
		if math.Abs(qImg[i]-c.zsq[i]) > tol {
			return fmt.Errorf("the (S^z)^2 coefficient of site %d changes from %v to %v", i, c.zsq[i], qImg[i])
		}
	}
	return nil
}
