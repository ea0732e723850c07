package hilbert

import (
	"errors"
	"fmt"
	"math"
	"math/bits"
	"math/cmplx"
	"sort"
)

// Ladder operator kinds of a Term's factors.
const (
	Lower int8 = -1 // S^-: k -> k+1 (m -> m-1)
	Zop   int8 = 0  // S^z: the factor m
	Raise int8 = 1  // S^+: k -> k-1 (m -> m+1)
)

// ZZ is the diagonal term Coeff m_A m_B.
type ZZ struct {
	A, B  int
	Coeff float64
}

// Term is the product Coeff O_A O_B of one or two site operators, O = S^+
// (PA = Raise), S^- (Lower) or S^z (Zop, the factor m); B < 0 makes it the
// one-site term Coeff O_A. A and B must differ.
type Term struct {
	A, B   int
	PA, PB int8
	Coeff  complex128
}

// Hamiltonian is a Hermitian operator on the product space of the sites
// with spins TwoS[i]/2:
//
//	H = sum_ZZ c m_A m_B + sum_i Z[i] m_i + sum_i ZSq[i] m_i^2 + sum_Terms c O_A O_B.
//
// Z and ZSq are nil or of length len(TwoS). It is the exported form of
// package ed's operator, with the same conventions: site i has the local
// states k = 0..TwoS[i], m = S_i - k, and
//
//	S^+ |k> = sqrt(S(S+1) - m(m+1)) |k-1>,   S^- |k> = sqrt(S(S+1) - m(m-1)) |k+1>.
//
// A Hamiltonian is read, never written, by this package.
type Hamiltonian struct {
	TwoS  []int
	ZZ    []ZZ
	Z     []float64
	ZSq   []float64
	Terms []Term
}

// AddExchange appends sum_{mu,nu} S_a^mu K^{mu nu} S_b^nu (K row-major,
// mu, nu = x, y, z) in ladder form, with S^x = (S^+ + S^-)/2 and
// S^y = (S^+ - S^-)/(2i):
//
//	W_{+-} = (Kxx + Kyy)/4 + i (Kxy - Kyx)/4      W_{-+} = conj(W_{+-})
//	W_{++} = (Kxx - Kyy)/4 - i (Kxy + Kyx)/4      W_{--} = conj(W_{++})
//	W_{+z} = (Kxz - i Kyz)/2    W_{-z} = conj(W_{+z})
//	W_{z+} = (Kzx - i Kzy)/2    W_{z-} = conj(W_{z+})    W_{zz} = Kzz.
func (h *Hamiltonian) AddExchange(a, b int, K [9]float64) {
	if K[8] != 0 {
		h.ZZ = append(h.ZZ, ZZ{a, b, K[8]})
	}
	add := func(pa, pb int8, c complex128) {
		if c != 0 {
			h.Terms = append(h.Terms, Term{A: a, B: b, PA: pa, PB: pb, Coeff: c})
		}
	}
	wpm := complex((K[0]+K[4])/4, (K[1]-K[3])/4)
	wpp := complex((K[0]-K[4])/4, -(K[1]+K[3])/4)
	wpz := complex(K[2]/2, -K[5]/2)
	wzp := complex(K[6]/2, -K[7]/2)
	add(Raise, Lower, wpm)
	add(Lower, Raise, cmplx.Conj(wpm))
	add(Raise, Raise, wpp)
	add(Lower, Lower, cmplx.Conj(wpp))
	add(Raise, Zop, wpz)
	add(Lower, Zop, cmplx.Conj(wpz))
	add(Zop, Raise, wzp)
	add(Zop, Lower, cmplx.Conj(wzp))
}

// AddHeisenberg appends J (S_a^x S_b^x + S_a^y S_b^y) + Jz S_a^z S_b^z.
func (h *Hamiltonian) AddHeisenberg(a, b int, J, Jz float64) {
	h.AddExchange(a, b, [9]float64{J, 0, 0, 0, J, 0, 0, 0, Jz})
}

// AddDM appends D . (S_a x S_b), (S_a x S_b)^x = S_a^y S_b^z - S_a^z S_b^y
// and cyclically.
func (h *Hamiltonian) AddDM(a, b int, D [3]float64) {
	h.AddExchange(a, b, [9]float64{
		0, D[2], -D[1],
		-D[2], 0, D[0],
		D[1], -D[0], 0,
	})
}

// AddField appends v . S_i = v^z S^z + ((v^x - i v^y)/2) S^+ + ((v^x + i v^y)/2) S^-.
func (h *Hamiltonian) AddField(i int, v [3]float64) {
	if v[2] != 0 {
		if h.Z == nil {
			h.Z = make([]float64, len(h.TwoS))
		}
		h.Z[i] += v[2]
	}
	if c := complex(v[0]/2, -v[1]/2); c != 0 {
		h.Terms = append(h.Terms, Term{A: i, B: -1, PA: Raise, Coeff: c},
			Term{A: i, B: -1, PA: Lower, Coeff: cmplx.Conj(c)})
	}
}

// AddSingleIon appends A (S_i^z)^2.
func (h *Hamiltonian) AddSingleIon(i int, A float64) {
	if A == 0 {
		return
	}
	if h.ZSq == nil {
		h.ZSq = make([]float64, len(h.TwoS))
	}
	h.ZSq[i] += A
}

// IsReal reports whether every matrix element of h in the product basis is
// real.
func (h *Hamiltonian) IsReal() bool {
	for _, t := range h.Terms {
		if imag(t.Coeff) != 0 {
			return false
		}
	}
	return true
}

// ConservesSz reports whether every term keeps the total S^z.
func (h *Hamiltonian) ConservesSz() bool {
	for _, t := range h.Terms {
		if termDeltaSz(t) != 0 {
			return false
		}
	}
	return true
}

func termDeltaSz(t Term) int {
	d := int(t.PA)
	if t.B >= 0 {
		d += int(t.PB)
	}
	return d
}

// MaxSites is the largest number of sites; the product space must also
// have fewer than 2^64 states (63 spins 1/2 at most).
const MaxSites = 64

// Validate checks the spins, the site indices, the operator kinds, that
// every number is finite and that h is Hermitian (the terms and their
// adjoints carry conjugate coefficients, to 1e-10 of the largest one).
func (h *Hamiltonian) Validate() error {
	if _, err := newSpins(h.TwoS); err != nil {
		return err
	}
	n := len(h.TwoS)
	for i, t := range h.ZZ {
		if t.A < 0 || t.A >= n || t.B < 0 || t.B >= n {
			return fmt.Errorf("hilbert: ZZ[%d]: site out of range 0..%d", i, n-1)
		}
		if !finite(t.Coeff) {
			return fmt.Errorf("hilbert: ZZ[%d]: coefficient %v", i, t.Coeff)
		}
	}
	for name, v := range map[string][]float64{"Z": h.Z, "ZSq": h.ZSq} {
		if v != nil && len(v) != n {
			return fmt.Errorf("hilbert: %s has length %d, want 0 or %d", name, len(v), n)
		}
		for i, c := range v {
			if !finite(c) {
				return fmt.Errorf("hilbert: %s[%d] = %v", name, i, c)
			}
		}
	}
	for i, t := range h.Terms {
		if t.A < 0 || t.A >= n || t.B >= n {
			return fmt.Errorf("hilbert: Terms[%d]: site out of range 0..%d", i, n-1)
		}
		if t.A == t.B {
			return fmt.Errorf("hilbert: Terms[%d]: both factors on site %d", i, t.A)
		}
		if t.PA < Lower || t.PA > Raise || (t.B >= 0 && (t.PB < Lower || t.PB > Raise)) {
			return fmt.Errorf("hilbert: Terms[%d]: operator kind not in {-1, 0, +1}", i)
		}
		if !finite(real(t.Coeff)) || !finite(imag(t.Coeff)) {
			return fmt.Errorf("hilbert: Terms[%d]: coefficient %v", i, t.Coeff)
		}
	}
	coef := termMap(h.Terms)
	scale := 0.0
	for _, c := range coef {
		scale = math.Max(scale, cmplx.Abs(c))
	}
	tol := 1e-10 * scale
	for _, k := range sortedKeys(coef) {
		c := coef[k]
		if d := cmplx.Abs(c - cmplx.Conj(coef[k.adjoint()])); d > tol {
			return fmt.Errorf("hilbert: not Hermitian: %v has coefficient %v, its adjoint %v", k, c, coef[k.adjoint()])
		}
	}
	return nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// termKey identifies the operator O_a O_b of a term, with a < b for two
// sites (the factors commute) and b = -1, pb = 0 for one site.
type termKey struct {
	a, b   int
	pa, pb int8
}

func (k termKey) String() string {
	name := map[int8]string{Lower: "S-", Zop: "Sz", Raise: "S+"}
	if k.b < 0 {
		return fmt.Sprintf("%s_%d", name[k.pa], k.a)
	}
	return fmt.Sprintf("%s_%d %s_%d", name[k.pa], k.a, name[k.pb], k.b)
}

func (k termKey) adjoint() termKey {
	return termKey{k.a, k.b, -k.pa, -k.pb}
}

func canonKey(a, b int, pa, pb int8) termKey {
	if b < 0 {
		return termKey{a, -1, pa, 0}
	}
	if a > b {
		a, b, pa, pb = b, a, pb, pa
	}
	return termKey{a, b, pa, pb}
}

// termMap sums the coefficients of the terms by operator.
func termMap(terms []Term) map[termKey]complex128 {
	m := map[termKey]complex128{}
	for _, t := range terms {
		m[canonKey(t.A, t.B, t.PA, t.PB)] += t.Coeff
	}
	return m
}

func sortedKeys[V any](m map[termKey]V) []termKey {
	keys := make([]termKey, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool {
		a, b := keys[i], keys[j]
		if a.a != b.a {
			return a.a < b.a
		}
		if a.b != b.b {
			return a.b < b.b
		}
		if a.pa != b.pa {
			return a.pa < b.pa
		}
		return a.pb < b.pb
	})
	return keys
}

// spins holds the local tables of the sites.
type spins struct {
	n      int
	twoS   []int
	dim    []uint64 // local dimension 2S+1
	stride []uint64 // mixed-radix strides
	total  uint64   // product dimension
	sumTwo int      // sum of 2S_i
	half   bool     // every site is spin 1/2 (stride 2^i)
	// m[i][k] = S_i - k; up[i][k] = <k-1|S^+|k>; down[i][k] = <k+1|S^-|k>.
	m, up, down [][]float64
}

var errNoSites = errors.New("hilbert: no sites")

func newSpins(twoS []int) (*spins, error) {
	n := len(twoS)
	if n == 0 {
		return nil, errNoSites
	}
	if n > MaxSites {
		return nil, fmt.Errorf("hilbert: %d sites, at most %d", n, MaxSites)
	}
	s := &spins{n: n, twoS: append([]int(nil), twoS...), dim: make([]uint64, n), stride: make([]uint64, n),
		m: make([][]float64, n), up: make([][]float64, n), down: make([][]float64, n), half: true}
	st := uint64(1)
	for i, t := range twoS {
		if t < 1 || t > 254 {
			return nil, fmt.Errorf("hilbert: site %d: 2S = %d, want 1..254", i, t)
		}
		s.dim[i] = uint64(t + 1)
		s.stride[i] = st
		hi, lo := bits.Mul64(st, uint64(t+1))
		if hi != 0 {
			return nil, fmt.Errorf("hilbert: the product space of %d sites has 2^64 states or more", n)
		}
		st = lo
		s.sumTwo += t
		if t != 1 {
			s.half = false
		}
		S := float64(t) / 2
		s.m[i] = make([]float64, t+1)
		s.up[i] = make([]float64, t+1)
		s.down[i] = make([]float64, t+1)
		for k := 0; k <= t; k++ {
			m := S - float64(k)
			s.m[i][k] = m
			if k > 0 {
				s.up[i][k] = math.Sqrt(S*(S+1) - m*(m+1))
			}
			if k < t {
				s.down[i][k] = math.Sqrt(S*(S+1) - m*(m-1))
			}
		}
	}
	s.total = st
	return s, nil
}

// digits decodes the product state x into the local indices k_i.
func (s *spins) digits(x uint64, k []int) {
	if s.half {
		for i := range k[:s.n] {
			k[i] = int(x>>uint(i)) & 1
		}
		return
	}
	for i := range k[:s.n] {
		d := s.dim[i]
		k[i] = int(x % d)
		x /= d
	}
}

// localAmp returns the amplitude of op on site i in local state k and the
// change of k (raising m lowers k); ok is false when the result vanishes.
func (s *spins) localAmp(i int, op int8, k int) (amp float64, dk int, ok bool) {
	switch op {
	case Raise:
		if k == 0 {
			return 0, 0, false
		}
		return s.up[i][k], -1, true
	case Lower:
		if k == s.twoS[i] {
			return 0, 0, false
		}
		return s.down[i][k], 1, true
	}
	m := s.m[i][k]
	return m, 0, m != 0
}
