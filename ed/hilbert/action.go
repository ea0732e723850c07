package hilbert

import (
	"math"
	"math/rand/v2"
	"sort"
)

// actor applies the group elements to product states by table lookup. The
// sites are split into chunks of consecutive sites whose local states take
// at most 256 values together (8 sites of spin 1/2, 5 of spin 1, ...); a
// chunk's digit is d_c = (x / stride_{first site}) mod radix_c (for spins
// 1/2 a byte of x). For the site permutation p of an element and chunk c the
// table holds
//
//	T[p][c][d] = sum_{i in c} k_i stride_{p(i)},
//
// so that p(x) = sum_c T[p][c][d_c(x)]: one lookup per chunk instead of one
// step per site. The table is stored digit-major (for a chunk digit, the
// entries of all permutations are contiguous), so the orbit of x is
// scanned as the sum of nc contiguous rows. With the spin inversion F (the last generator, so the
// elements are e = p and e = p + |G|/2 for p F), F maps x to M - x, M =
// total - 1 (every digit k to 2S - k, and p keeps the spins), so only the
// permutations have tables and (p F)(x) = M - p(x) costs nothing more. The
// table entries are uint32 when the product space has at most 2^32 states,
// uint64 otherwise.
type actor interface {
	// image returns e(x).
	image(e int, x uint64) uint64
	// representative returns the smallest state of the orbit of x and an
	// element e with e(x) = rep.
	representative(x uint64) (rep uint64, e int)
	// isRepresentative reports whether x is the smallest of its orbit and
	// the character (phases p, mod |G|) is trivial on its stabilizer, and
	// returns the stabilizer's order. It tries the permutations in the given
	// order and stops at the first element with e(x) < x, or e(x) = x and
	// p[e] != 0.
	isRepresentative(x uint64, phase []int, order []int32) (ok bool, stab int)
	// lowers reports, for permutation p, whether p(x) < x or (with the
	// inversion) M - p(x) < x.
	lowers(p int, x uint64) bool
	perms() int
	bytes() int64
}

const maxChunks = 64

type chunking struct {
	nc      int
	half    bool     // chunks are bytes
	cstride []uint64 // stride of the chunk's first site
	cradix  []uint64 // number of values of the chunk
	coff    []int    // offset of chunk c inside a permutation's table
	first   []int    // first site of each chunk, and n
	per     int      // table entries per permutation
}

func newChunking(sp *spins) chunking {
	var c chunking
	c.half = sp.half
	for i := 0; i < sp.n; {
		j, r := i, uint64(1)
		if sp.half {
			j, r = min(i+8, sp.n), 1<<uint(min(8, sp.n-i))
		} else {
			for j < sp.n && (j == i || r*sp.dim[j] <= 256) {
				r *= sp.dim[j]
				j++
			}
		}
		c.first = append(c.first, i)
		c.cstride = append(c.cstride, sp.stride[i])
		c.cradix = append(c.cradix, r)
		c.coff = append(c.coff, c.per)
		c.per += int(r)
		i = j
	}
	c.first = append(c.first, sp.n)
	c.nc = len(c.cradix)
	return c
}

// digits writes the chunk digits of x into d as table offsets.
func (c *chunking) digits(x uint64, d *[maxChunks]int) []int {
	if c.half {
		for k := 0; k < c.nc; k++ {
			d[k] = c.coff[k] + int(x>>(8*uint(k))&0xff)
		}
		return d[:c.nc]
	}
	for k := 0; k < c.nc; k++ {
		d[k] = c.coff[k] + int((x/c.cstride[k])%c.cradix[k])
	}
	return d[:c.nc]
}

type action[U uint32 | uint64] struct {
	chunking
	np   int    // permutations with tables
	flip bool   // elements np..2np-1 are the permutations times F
	M    uint64 // total - 1
	// tab is digit-major: T[p][c][d] at (coff[c] + d) np + p, so that the
	// images of x under all permutations are sums of nc contiguous rows.
	tab []U
}

func newActor(g *Group) actor {
	if g.sp.total-1 <= math.MaxUint32 {
		return newAction[uint32](g)
	}
	return newAction[uint64](g)
}

func permCount(g *Group) int {
	if g.SpinInversion() {
		return len(g.elems) / 2
	}
	return len(g.elems)
}

func newAction[U uint32 | uint64](g *Group) *action[U] {
	sp := g.sp
	a := &action[U]{chunking: newChunking(sp), np: permCount(g), flip: g.SpinInversion(), M: sp.total - 1}
	a.tab = make([]U, a.per*a.np)
	for p := 0; p < a.np; p++ {
		x := g.elems[p]
		for c := 0; c < a.nc; c++ {
			for d := uint64(0); d < a.cradix[c]; d++ {
				v, y := d, uint64(0)
				for i := a.first[c]; i < a.first[c+1]; i++ {
					y += (v % sp.dim[i]) * sp.stride[x.perm[i]]
					v /= sp.dim[i]
				}
				a.tab[(a.coff[c]+int(d))*a.np+p] = U(y)
			}
		}
	}
	return a
}

// tableBytes returns the size of the action tables of group g.
func tableBytes(g *Group) int64 {
	c := newChunking(g.sp)
	b := int64(8)
	if g.sp.total-1 <= math.MaxUint32 {
		b = 4
	}
	return int64(c.per) * int64(permCount(g)) * b
}

func (a *action[U]) perms() int { return a.np }

func (a *action[U]) bytes() int64 {
	var z U
	b := int64(8)
	if any(z) == any(uint32(0)) {
		b = 4
	}
	return int64(len(a.tab)) * b
}

// rows writes the start of the table row of every chunk digit of x.
func (a *action[U]) rows(x uint64, d *[maxChunks]int) []int {
	a.digits(x, d)
	for c := 0; c < a.nc; c++ {
		d[c] *= a.np
	}
	return d[:a.nc]
}

func (a *action[U]) permImage(p int, d []int) uint64 {
	y := uint64(0)
	for _, o := range d {
		y += uint64(a.tab[o+p])
	}
	return y
}

func (a *action[U]) image(e int, x uint64) uint64 {
	var buf [maxChunks]int
	d := a.rows(x, &buf)
	if e >= a.np {
		return a.M - a.permImage(e-a.np, d)
	}
	return a.permImage(e, d)
}

func (a *action[U]) lowers(p int, x uint64) bool {
	var buf [maxChunks]int
	y := a.permImage(p, a.rows(x, &buf))
	return y < x || a.flip && a.M-y < x
}

func (a *action[U]) representative(x uint64) (uint64, int) {
	var buf [maxChunks]int
	d := a.rows(x, &buf)
	np := a.np
	best, be := x, 0
	// with the inversion: M - y < best  <=>  y > M - best
	hiBest, hiE := uint64(0), -1
	if a.flip {
		hiBest, hiE = x, 0
	}
	tab := a.tab
	switch len(d) {
	case 1:
		r0 := tab[d[0] : d[0]+np]
		for p := 1; p < len(r0); p++ {
			y := uint64(r0[p])
			if y < best {
				best, be = y, p
			}
			if y > hiBest {
				hiBest, hiE = y, p
			}
		}
	case 2:
		r0 := tab[d[0] : d[0]+np]
		r1 := tab[d[1] : d[1]+np][:len(r0)]
		for p := 1; p < len(r0); p++ {
			y := uint64(r0[p]) + uint64(r1[p])
			if y < best {
				best, be = y, p
			}
			if y > hiBest {
				hiBest, hiE = y, p
			}
		}
	case 3:
		r0 := tab[d[0] : d[0]+np]
		r1 := tab[d[1] : d[1]+np][:len(r0)]
		r2 := tab[d[2] : d[2]+np][:len(r0)]
		for p := 1; p < len(r0); p++ {
			y := uint64(r0[p]) + uint64(r1[p]) + uint64(r2[p])
			if y < best {
				best, be = y, p
			}
			if y > hiBest {
				hiBest, hiE = y, p
			}
		}
	case 4:
		r0 := tab[d[0] : d[0]+np]
		r1 := tab[d[1] : d[1]+np][:len(r0)]
		r2 := tab[d[2] : d[2]+np][:len(r0)]
		r3 := tab[d[3] : d[3]+np][:len(r0)]
		for p := 1; p < len(r0); p++ {
			y := uint64(r0[p]) + uint64(r1[p]) + uint64(r2[p]) + uint64(r3[p])
			if y < best {
				best, be = y, p
			}
			if y > hiBest {
				hiBest, hiE = y, p
			}
		}
	default:
		for p := 1; p < np; p++ {
			y := a.permImage(p, d)
			if y < best {
				best, be = y, p
			}
			if y > hiBest {
				hiBest, hiE = y, p
			}
		}
	}
	if a.flip && a.M-hiBest < best {
		best, be = a.M-hiBest, hiE+np
	}
	return best, be
}

func (a *action[U]) isRepresentative(x uint64, phase []int, order []int32) (bool, int) {
	stab := 1
	M := a.M
	if a.flip {
		y := M - x
		if y < x {
			return false, 0
		}
		if y == x {
			if phase[a.np] != 0 {
				return false, 0
			}
			stab++
		}
	}
	var buf [maxChunks]int
	d := a.rows(x, &buf)
	tab := a.tab
	for _, p32 := range order {
		p := int(p32)
		var y uint64
		switch len(d) {
		case 3:
			y = uint64(tab[d[0]+p]) + uint64(tab[d[1]+p]) + uint64(tab[d[2]+p])
		case 4:
			y = uint64(tab[d[0]+p]) + uint64(tab[d[1]+p]) + uint64(tab[d[2]+p]) + uint64(tab[d[3]+p])
		default:
			for _, o := range d {
				y += uint64(tab[o+p])
			}
		}
		if y < x {
			return false, 0
		}
		if y == x {
			if phase[p] != 0 {
				return false, 0
			}
			stab++
		}
		if a.flip {
			y = M - y
			if y < x {
				return false, 0
			}
			if y == x {
				if phase[p+a.np] != 0 {
					return false, 0
				}
				stab++
			}
		}
	}
	return true, stab
}

// testOrder returns the permutations 1..np-1 ordered by how often they
// map a sample of states of the sector lower (most often first), so that
// isRepresentative rejects early: a heuristic for speed only, the result
// does not depend on it. The sample is seeded: the order is reproducible.
func testOrder(a actor, sp *spins, K int) []int32 {
	np := a.perms()
	order := make([]int32, 0, np)
	for p := 1; p < np; p++ {
		order = append(order, int32(p))
	}
	if np <= 2 {
		return order
	}
	samples := max(64, min(1024, (1<<22)/np))
	rng := rand.New(rand.NewPCG(0x5eed, uint64(np)))
	count := make([]int, np)
	k := make([]int, sp.n)
	for s := 0; s < samples; s++ {
		sum := 0
		for i := range k {
			k[i] = rng.IntN(sp.twoS[i] + 1)
			sum += k[i]
		}
		for K >= 0 && sum != K {
			i := rng.IntN(sp.n)
			if sum > K && k[i] > 0 {
				k[i]--
				sum--
			} else if sum < K && k[i] < sp.twoS[i] {
				k[i]++
				sum++
			}
		}
		x := uint64(0)
		for i, v := range k {
			x += uint64(v) * sp.stride[i]
		}
		for p := 1; p < np; p++ {
			if a.lowers(p, x) {
				count[p]++
			}
		}
	}
	sort.SliceStable(order, func(i, j int) bool { return count[order[i]] > count[order[j]] })
	return order
}
