package hilbert

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/bits"
	"runtime"
	"sync"
	"sync/atomic"
)

// SectorOptions tunes NewSector. The zero value is the default.
type SectorOptions struct {
	// Workers bounds the goroutines of the sector's builds and products:
	// 0 means runtime.GOMAXPROCS(0), and more than GOMAXPROCS is reduced to
	// it.
	Workers int
}

// Sector is the basis of one symmetry sector and the Hamiltonian's action
// on it. The basis states are
//
//	|r~> = (1/sqrt(N_r)) sum_{g in G} conj(chi(g)) g|r>,   N_r = |G| |Stab_r| = |G|^2 / |orbit_r|,
//
// for every representative r: a product state of the S^z sector that is the
// smallest (as a mixed-radix index) of its orbit and on whose stabilizer chi
// is trivial (otherwise the sum vanishes). Equivalently
// |r~> = |orbit_r|^{-1/2} sum_{s in orbit} conj(chi(g_s)) |s>, s = g_s r.
// They are orthonormal, and g|r~> = chi(g)|r~>. Summed over the
// representations, every product state of the S^z sector is counted once.
//
// # Matrix elements
//
// H commutes with G. If H|r> = sum_s h_s |s> (product states s, including
// the diagonal), and s = g_s r' with r' the representative of s's orbit
// (g_s^{-1} = e_s, the element that maps s to r'), then
//
//	H|r~> = sum_s h_s chi(g_s) sqrt(N_r'/N_r) |r'~>,
//	<r'~|H|r~> = sum_{s -> r'} h_s conj(chi(e_s)) sqrt(|Stab_r'| / |Stab_r|),
//
// (chi(g_s) is the same for every g_s: chi is trivial on Stab_r'; an orbit
// not in the sector contributes nothing). Apply computes row r as the
// conjugate of column r (H is Hermitian):
//
//	(H x)_r = sum_s conj(h_s) chi(e_s) sqrt(|Stab_r'| / |Stab_r|) x_r'.
//
// A Sector is immutable after NewSector and safe for concurrent use.
type Sector struct {
	h       *compiled
	sp      *spins
	grp     *Group
	act     actor
	order   []int32 // permutations in the order isRepresentative tries them
	ir      Irrep
	twoSz   int
	real    bool
	workers int

	states []uint64
	stab   []uint16
	// index lookup: bucket[x >> shift] .. bucket[(x >> shift) + 1] is the
	// range of states with those high bits.
	shift  uint
	bucket []uint32
	// rank tables (complete S^z sectors of spins 1/2), see Index
	rankLow, rankHigh []uint32
	rankBits          uint
	rankOnes          int

	kc *kernel[complex128]
	kr *kernel[float64]
}

// MaxDim is the largest sector dimension (columns are int32).
const MaxDim = math.MaxInt32

// ErrNotReal is returned by the real variants on a sector whose matrix is
// complex.
var ErrNotReal = errors.New("hilbert: the sector's matrix is not real")

// NewSector is NewSectorContext with context.Background().
func NewSector(h *Hamiltonian, twoSz int, grp *Group, ir Irrep, opt SectorOptions) (*Sector, error) {
	return NewSectorContext(context.Background(), h, twoSz, grp, ir, opt)
}

// NewSectorContext builds the sector of the states with 2 S^z = twoSz (or
// all states for NoSz) that transform as ir under grp (nil: no spatial
// symmetry, ir may be the zero Irrep). It checks that h is valid and
// Hermitian, conserves S^z (unless NoSz), and that every generator of grp
// maps h onto itself; the spin inversion needs twoSz = 0 or NoSz.
//
// The S^z sector is enumerated in increasing order (combinations by
// Gosper's rule for spins 1/2, mixed radix with pruning on the partial sum
// otherwise), split by the digits of the highest sites into pieces that run
// in parallel; a state is kept when it is its orbit's representative, which
// is decided with an early exit at the first element that maps it lower (or
// onto itself with chi != 1).
//
// Memory: the basis takes 10 bytes per state plus the lookup table (at
// most 8 bytes per state), and transiently twice the 10 bytes while it is
// assembled; see EstimateMemory.
func NewSectorContext(ctx context.Context, h *Hamiltonian, twoSz int, grp *Group, ir Irrep, opt SectorOptions) (*Sector, error) {
	c, err := compile(h)
	if err != nil {
		return nil, err
	}
	sp := c.sp
	if grp == nil {
		if ir.group != nil {
			grp = ir.group
		} else {
			grp, _ = NewGroup(h.TwoS, nil, false)
			ir = grp.Irreps()[0]
		}
	}
	if ir.group != grp {
		return nil, errors.New("hilbert: the representation is not one of the group's")
	}
	if !sameSpins(sp, grp.sp) {
		return nil, errors.New("hilbert: the group is for other sites or spins")
	}
	if twoSz != NoSz {
		if !c.conserves {
			return nil, errors.New("hilbert: the Hamiltonian does not conserve S^z")
		}
		if _, ok := sp.kSum(twoSz); !ok {
			return nil, fmt.Errorf("hilbert: no state has 2 S^z = %d", twoSz)
		}
	}
	if grp.SpinInversion() && twoSz != 0 && twoSz != NoSz {
		return nil, fmt.Errorf("hilbert: spin inversion needs S^z = 0 (2 S^z = %d)", twoSz)
	}
	for i, gen := range grp.gens {
		if err := c.commutes(gen.perm, gen.flip, twoSz == 0); err != nil {
			return nil, fmt.Errorf("hilbert: generator %d (%s) is not a symmetry of H: %v", i, grp.names[i], err)
		}
	}
	dim, err := Dimension(h.TwoS, twoSz, ir)
	if err != nil {
		return nil, err
	}
	if dim > MaxDim {
		return nil, fmt.Errorf("hilbert: sector dimension %d over %d", dim, MaxDim)
	}
	s := &Sector{h: c, sp: sp, grp: grp, ir: ir, twoSz: twoSz, real: c.real && ir.Real, workers: workers(opt.Workers)}
	grp.once.Do(func() { grp.action = newActor(grp) })
	s.act = grp.action
	K := -1
	if twoSz != NoSz {
		K, _ = sp.kSum(twoSz)
	}
	s.order = testOrder(s.act, sp, K)
	if err := s.enumerate(ctx, int(dim)); err != nil {
		return nil, err
	}
	s.buildLookup()
	s.kc = newKernel[complex128](s)
	if s.real {
		s.kr = newKernel[float64](s)
	}
	return s, nil
}

func workers(w int) int {
	p := runtime.GOMAXPROCS(0)
	if w <= 0 || w > p {
		return p
	}
	return w
}

// Dim returns the number of basis states.
func (s *Sector) Dim() int { return len(s.states) }

// TwoSz returns 2 S^z of the sector, or NoSz.
func (s *Sector) TwoSz() int { return s.twoSz }

// Irrep returns the sector's representation.
func (s *Sector) Irrep() Irrep { return s.ir }

// Group returns the sector's group.
func (s *Sector) Group() *Group { return s.grp }

// IsReal reports whether the sector's matrix is real (H real in the
// product basis and a real character); then ApplyReal and MatrixReal work.
func (s *Sector) IsReal() bool { return s.real }

// Representative returns the representative product state of basis state i.
func (s *Sector) Representative(i int) uint64 { return s.states[i] }

// OrbitSize returns |orbit_r| = |G| / |Stab_r| of basis state i.
func (s *Sector) OrbitSize(i int) int { return len(s.grp.elems) / int(s.stab[i]) }

// Index returns the basis index of the product state x if x is a
// representative of the sector, and -1 otherwise.
//
// Two levels: for a complete S^z sector of spins 1/2 (no spatial
// symmetry) the index is the combinatorial rank of x, the sum of two table
// entries, one for the low half of the bits and one for the high half given
// the number of ones below (Lin's tables); otherwise a table on the high
// bits gives the range of representatives that share them, searched by
// bisection.
func (s *Sector) Index(x uint64) int {
	if s.rankLow != nil {
		if x>>uint(s.sp.n) != 0 || bits.OnesCount64(x) != s.rankOnes {
			return -1
		}
		lo := x & (1<<s.rankBits - 1)
		return int(s.rankLow[lo] + s.rankHigh[bits.OnesCount64(lo)<<(uint(s.sp.n)-s.rankBits)+int(x>>s.rankBits)])
	}
	h := x >> s.shift
	if h >= uint64(len(s.bucket)-1) {
		return -1
	}
	lo, hi := int(s.bucket[h]), int(s.bucket[h+1])
	if lo == hi {
		return -1
	}
	// branch-free bisection: st[lo] <= x < st[lo+n] (as far as known)
	st := s.states[lo:hi]
	base, n := 0, len(st)
	for n > 1 {
		half := n >> 1
		if st[base+half] <= x {
			base += half
		}
		n -= half
	}
	if st[base] == x {
		return lo + base
	}
	return -1
}

// indexBatch sets idx[i] = Index(xs[i]), in phases (all bucket ranges,
// then all bisections) so that the memory accesses of different states
// overlap.
func (s *Sector) indexBatch(xs []uint64, idx []int32) {
	if s.rankLow != nil {
		for i, x := range xs {
			idx[i] = int32(s.Index(x))
		}
		return
	}
	nb := uint64(len(s.bucket) - 1)
	for i, x := range xs {
		h := x >> s.shift
		if h >= nb {
			idx[i] = -1
			continue
		}
		idx[i] = int32(s.bucket[h])
	}
	st := s.states
	for i, x := range xs {
		lo := idx[i]
		if lo < 0 {
			continue
		}
		hi := int32(s.bucket[(x>>s.shift)+1])
		if lo == hi {
			idx[i] = -1
			continue
		}
		r := st[lo:hi]
		base, n := 0, len(r)
		for n > 1 {
			half := n >> 1
			if r[base+half] <= x {
				base += half
			}
			n -= half
		}
		if r[base] == x {
			idx[i] = lo + int32(base)
		} else {
			idx[i] = -1
		}
	}
}

// buildLookup fills the two-level index: Lin's rank tables for a complete
// S^z sector of spins 1/2, otherwise one to two buckets per state.
func (s *Sector) buildLookup() {
	n := len(s.states)
	if s.sp.half && len(s.grp.elems) == 1 && s.twoSz != NoSz {
		s.buildRank()
		return
	}
	L := 1
	if n > 0 {
		L = bits.Len64(s.states[n-1])
	}
	B := min(L, max(1, bits.Len(uint(n))), 26)
	s.shift = uint(L - B)
	nb := 1 << uint(B)
	s.bucket = make([]uint32, nb+1)
	j := 0
	for b := 0; b <= nb; b++ {
		for j < n && s.states[j]>>s.shift < uint64(b) {
			j++
		}
		s.bucket[b] = uint32(j)
	}
}

// buildRank fills Lin's tables: the rank of x among the states with K ones
// (in increasing order) is sum_j C(p_j, j) over its ones at positions
// p_1 < p_2 < ... (the combinatorial number system); the low L bits
// contribute rankLow[x_low], the high bits rankHigh[c][x_high] with c the
// ones of x_low.
func (s *Sector) buildRank() {
	n := s.sp.n
	K, _ := s.sp.kSum(s.twoSz)
	var binom [65][65]uint64
	for i := 0; i <= 64; i++ {
		binom[i][0] = 1
		for j := 1; j <= i; j++ {
			binom[i][j] = binom[i-1][j-1] + binom[i-1][j]
		}
	}
	L := uint(n / 2)
	H := uint(n) - L
	s.rankBits, s.rankOnes = L, K
	s.rankLow = make([]uint32, 1<<L)
	for v := range s.rankLow {
		r, j := uint64(0), 0
		for p := 0; p < int(L); p++ {
			if v>>uint(p)&1 != 0 {
				j++
				r += binom[p][j]
			}
		}
		s.rankLow[v] = uint32(r)
	}
	s.rankHigh = make([]uint32, int(L+1)<<H)
	for c := 0; c <= int(L); c++ {
		for u := 0; u < 1<<H; u++ {
			r, j := uint64(0), c
			for q := 0; q < int(H); q++ {
				if u>>uint(q)&1 != 0 {
					j++
					r += binom[int(L)+q][j]
				}
			}
			s.rankHigh[c<<H+u] = uint32(r)
		}
	}
}

// lookupBytes bounds the size of buildLookup's tables for dim states on
// n sites.
func lookupBytes(dim int64, n int) int64 {
	b := max(1, bits.Len64(uint64(dim)))
	rank := int64(0)
	if n <= 40 {
		rank = 4 * (int64(1)<<uint(n/2) + int64(n/2+1)<<uint(n-n/2))
	}
	return max(4*(int64(1)<<uint(min(b, 26))+1), rank)
}

// piece is a contiguous, increasing run of the S^z sector: the highest
// sites fixed to the digits of prefix, the rest (sites 0..low-1) with
// digit sum rem (any when rem < 0).
type piece struct {
	base uint64
	rem  int
}

func (s *Sector) pieces() (low int, ps []piece) {
	sp := s.sp
	n := sp.n
	K := -1
	if s.twoSz != NoSz {
		K, _ = sp.kSum(s.twoSz)
	}
	// the top sites: about 1024 prefixes, at most half of the sites
	top, prod := 0, uint64(1)
	for top < n/2 && prod < 1024 {
		prod *= sp.dim[n-1-top]
		top++
	}
	low = n - top
	maxLow := 0
	for i := 0; i < low; i++ {
		maxLow += sp.twoS[i]
	}
	dig := make([]int, top)
	for u := uint64(0); u < prod; u++ {
		v, base, sum := u, uint64(0), 0
		for j := 0; j < top; j++ {
			site := low + j
			dig[j] = int(v % sp.dim[site])
			v /= sp.dim[site]
			base += uint64(dig[j]) * sp.stride[site]
			sum += dig[j]
		}
		if K < 0 {
			ps = append(ps, piece{base, -1})
			continue
		}
		if r := K - sum; r >= 0 && r <= maxLow {
			ps = append(ps, piece{base, r})
		}
	}
	return low, ps
}

// parallelDo runs fn(w, i) for i = 0..n-1 on up to workers goroutines (w
// the goroutine's number), handing out i in increasing order; it stops
// handing out work when ctx is done and returns ctx.Err() then.
func parallelDo(ctx context.Context, n, workers int, fn func(w, i int)) error {
	workers = max(1, min(workers, n))
	var next atomic.Int64
	var stop atomic.Bool
	done := ctx.Done()
	run := func(w int) {
		for {
			if done != nil {
				select {
				case <-done:
					stop.Store(true)
				default:
				}
			}
			if stop.Load() {
				return
			}
			i := int(next.Add(1) - 1)
			if i >= n {
				return
			}
			fn(w, i)
		}
	}
	if workers == 1 {
		run(0)
	} else {
		var wg sync.WaitGroup
		for w := 1; w < workers; w++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				run(w)
			}()
		}
		run(0)
		wg.Wait()
	}
	if stop.Load() {
		return ctx.Err()
	}
	return nil
}

func (s *Sector) enumerate(ctx context.Context, dim int) error {
	low, ps := s.pieces()
	if len(s.grp.elems) == 1 && s.sp.half {
		return s.enumerateAll(ctx, dim, low, ps)
	}
	type result struct {
		states []uint64
		stab   []uint16
	}
	res := make([]result, len(ps))
	phase := s.ir.phase
	order := len(s.grp.elems)
	err := parallelDo(ctx, len(ps), s.workers, func(_, i int) {
		var r result
		keep := func(x uint64) {
			if order == 1 {
				r.states = append(r.states, x)
				return
			}
			if ok, st := s.act.isRepresentative(x, phase, s.order); ok {
				r.states = append(r.states, x)
				r.stab = append(r.stab, uint16(st))
			}
		}
		s.enumeratePiece(low, ps[i], keep)
		res[i] = r
	})
	if err != nil {
		return err
	}
	total := 0
	for _, r := range res {
		total += len(r.states)
	}
	if total != dim {
		return fmt.Errorf("hilbert: internal error: %d representatives, the character formula gives %d", total, dim)
	}
	s.states = make([]uint64, 0, total)
	s.stab = make([]uint16, 0, total)
	for i := range res {
		s.states = append(s.states, res[i].states...)
		if order == 1 {
			for range res[i].states {
				s.stab = append(s.stab, 1)
			}
		} else {
			s.stab = append(s.stab, res[i].stab...)
		}
		res[i] = result{}
	}
	return nil
}

// enumerateAll is enumerate without a group, for spins 1/2: every state of
// a piece is kept, so the pieces' sizes are binomial coefficients and each
// piece is written in place.
func (s *Sector) enumerateAll(ctx context.Context, dim, low int, ps []piece) error {
	off := make([]int, len(ps)+1)
	for i, p := range ps {
		n := 1 << uint(low)
		if p.rem >= 0 {
			n = 1
			for j := 0; j < p.rem; j++ { // C(low, rem), exact at every step
				n = n * (low - j) / (j + 1)
			}
		}
		off[i+1] = off[i] + n
	}
	if off[len(ps)] != dim {
		return fmt.Errorf("hilbert: internal error: %d states, the character formula gives %d", off[len(ps)], dim)
	}
	s.states = make([]uint64, dim)
	var short atomic.Bool
	err := parallelDo(ctx, len(ps), s.workers, func(_, i int) {
		seg := s.states[off[i]:off[i+1]]
		k := 0
		s.enumeratePiece(low, ps[i], func(x uint64) {
			seg[k] = x
			k++
		})
		if k != len(seg) {
			short.Store(true)
		}
	})
	if err != nil {
		return err
	}
	if short.Load() {
		return errors.New("hilbert: internal error: a piece of the basis has fewer states than counted")
	}
	s.stab = make([]uint16, dim)
	for i := range s.stab {
		s.stab[i] = 1
	}
	return nil
}

// enumeratePiece calls keep for every state of the piece in increasing
// order.
func (s *Sector) enumeratePiece(low int, p piece, keep func(uint64)) {
	sp := s.sp
	if sp.half {
		L := uint(low)
		if p.rem < 0 {
			for v := uint64(0); v < 1<<L; v++ {
				keep(p.base | v)
			}
			return
		}
		q := uint(p.rem)
		if q == 0 {
			keep(p.base)
			return
		}
		limit := uint64(1) << L
		for v := uint64(1)<<q - 1; v < limit; {
			keep(p.base | v)
			// Gosper: the next larger integer with the same number of ones
			t := v | (v - 1)
			v = (t + 1) | (((^t & -^t) - 1) >> (uint(bits.TrailingZeros64(v)) + 1))
		}
		return
	}
	if low == 0 {
		keep(p.base)
		return
	}
	if p.rem < 0 {
		end := p.base + sp.stride[low-1]*sp.dim[low-1]
		for x := p.base; x < end; x++ {
			keep(x)
		}
		return
	}
	k := make([]int, low)
	fill := func(upto, R int) { // smallest arrangement of digits 0..upto-1 with sum R
		for j := 0; j < upto; j++ {
			k[j] = min(R, sp.twoS[j])
			R -= k[j]
		}
	}
	fill(low, p.rem)
	for {
		x := p.base
		for j := 0; j < low; j++ {
			x += uint64(k[j]) * sp.stride[j]
		}
		keep(x)
		// next: raise the lowest digit i >= 1 that can grow while the
		// digits below it hold something, and refill those minimally
		below := k[0]
		i := 1
		for ; i < low; i++ {
			if below >= 1 && k[i] < sp.twoS[i] {
				break
			}
			below += k[i]
		}
		if i >= low {
			return
		}
		k[i]++
		fill(i, below-1)
	}
}
