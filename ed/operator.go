package ed

import (
	"math"
	"math/cmplx"

	"frustum/cluster"
)

// Spin operators are applied in the product basis of S^z eigenstates. Site i
// has local states k = 0 .. 2S_i with m = S_i - k, and a product state is the
// mixed-radix integer x = sum_i k_i * stride_i. In the ladder form
//
//	S^x = (S^+ + S^-)/2,   S^y = (S^+ - S^-)/(2i),
//
// a bond term sum_{mu,nu} Sa^mu K^{mu nu} Sb^nu becomes sum_{p,q} W_pq Sa^p Sb^q
// with p, q in {+, -, z} and
//
//	W_{+-} = (Kxx + Kyy)/4 + i (Kxy - Kyx)/4      W_{-+} = conj(W_{+-})
//	W_{++} = (Kxx - Kyy)/4 - i (Kxy + Kyx)/4      W_{--} = conj(W_{++})
//	W_{+z} = (Kxz - i Kyz)/2    W_{-z} = conj(W_{+z})
//	W_{z+} = (Kzx - i Kzy)/2    W_{z-} = conj(W_{z+})    W_{zz} = Kzz.
//
// A site term v . S_i is v^z S^z + ((v^x - i v^y)/2) S^+ + ((v^x + i v^y)/2) S^-.

// Ladder operator kinds on one site.
const (
	opZ     int8 = 0
	opRaise int8 = 1
	opLower int8 = -1
)

// spinSystem holds the local tables of a cluster's sites.
type spinSystem struct {
	n      int
	twoS   []int
	dim    []int   // local dimension 2S+1
	stride []int64 // mixed-radix strides
	total  int64   // product dimension
	// m[i][k] = S_i - k; up[i][k] = <k-1|S^+|k>; down[i][k] = <k+1|S^-|k>.
	m, up, down [][]float64
	spin1half   bool // every site is spin 1/2 (stride 2^i)
}

func newSpinSystem(model *cluster.Model) *spinSystem {
	n := len(model.Sites)
	s := &spinSystem{n: n, twoS: make([]int, n), dim: make([]int, n), stride: make([]int64, n),
		m: make([][]float64, n), up: make([][]float64, n), down: make([][]float64, n), spin1half: true}
	st := int64(1)
	for i, site := range model.Sites {
		t := site.TwoS
		s.twoS[i] = t
		s.dim[i] = t + 1
		s.stride[i] = st
		st *= int64(t + 1)
		if t != 1 {
			s.spin1half = false
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
	return s
}

// digits decodes the product state x into local indices k_i.
func (s *spinSystem) digits(x int64, k []int) {
	if s.spin1half {
		for i := range k {
			k[i] = int(x>>uint(i)) & 1
		}
		return
	}
	for i := range k {
		d := int64(s.dim[i])
		k[i] = int(x % d)
		x /= d
	}
}

// twoSz returns 2 * total S^z of the state with local indices k.
func (s *spinSystem) twoSz(k []int) int {
	t := 0
	for i, ki := range k {
		t += s.twoS[i] - 2*ki
	}
	return t
}

// term is one off-diagonal product of one or two ladder operators:
// coeff * O_a O_b (O_b absent when b < 0). An opZ factor contributes m.
type term struct {
	a, b   int
	pa, pb int8
	coeff  complex128
}

// operator is a Hermitian operator in the product basis: a diagonal part,
// sum over zz pairs and single sites, plus off-diagonal ladder terms.
type operator struct {
	zz    []zzTerm  // coeff * m_a * m_b
	z     []float64 // per site: coeff * m_i (nil when none)
	zsq   []float64 // per site: coeff * m_i^2 (nil when none)
	terms []term
}

type zzTerm struct {
	a, b  int
	coeff float64
}

// isReal reports whether every matrix element of the operator is real.
func (o *operator) isReal() bool {
	for _, t := range o.terms {
		if imag(t.coeff) != 0 {
			return false
		}
	}
	return true
}

// conservesSz reports whether every term keeps total S^z.
func (o *operator) conservesSz() bool {
	for _, t := range o.terms {
		if deltaSz(t) != 0 {
			return false
		}
	}
	return true
}

func deltaSz(t term) int {
	d := int(t.pa)
	if t.b >= 0 {
		d += int(t.pb)
	}
	return d
}

// diagonal returns the diagonal element for the local indices k.
func (o *operator) diagonal(s *spinSystem, k []int) float64 {
	d := 0.0
	for _, t := range o.zz {
		d += t.coeff * s.m[t.a][k[t.a]] * s.m[t.b][k[t.b]]
	}
	if o.z != nil {
		for i, c := range o.z {
			if c != 0 {
				d += c * s.m[i][k[i]]
			}
		}
	}
	if o.zsq != nil {
		for i, c := range o.zsq {
			if c != 0 {
				m := s.m[i][k[i]]
				d += c * m * m
			}
		}
	}
	return d
}

// localAmp returns the amplitude of op on site i in local state k, and the
// change of k (raising m lowers k). ok is false when the result vanishes.
func (s *spinSystem) localAmp(i int, op int8, k int) (amp float64, dk int, ok bool) {
	switch op {
	case opRaise:
		if k == 0 {
			return 0, 0, false
		}
		return s.up[i][k], -1, true
	case opLower:
		if k == s.twoS[i] {
			return 0, 0, false
		}
		return s.down[i][k], 1, true
	}
	m := s.m[i][k]
	return m, 0, m != 0
}

// apply calls f(y, amp) for every off-diagonal element <y|O|x> = amp of the
// state x with local indices k.
func (o *operator) apply(s *spinSystem, x int64, k []int, f func(y int64, amp complex128)) {
	for _, t := range o.terms {
		aa, da, ok := s.localAmp(t.a, t.pa, k[t.a])
		if !ok {
			continue
		}
		amp := aa
		y := x + int64(da)*s.stride[t.a]
		if t.b >= 0 {
			ab, db, ok := s.localAmp(t.b, t.pb, k[t.b])
			if !ok {
				continue
			}
			amp *= ab
			y += int64(db) * s.stride[t.b]
		}
		f(y, t.coeff*complex(amp, 0))
	}
}

// addBond appends sum_{mu,nu} Sa^mu K^{mu nu} Sb^nu (K row-major) to o.
func (o *operator) addBond(a, b int, K [9]float64) {
	kxx, kxy, kxz := K[0], K[1], K[2]
	kyx, kyy, kyz := K[3], K[4], K[5]
	kzx, kzy, kzz := K[6], K[7], K[8]
	if kzz != 0 {
		o.zz = append(o.zz, zzTerm{a, b, kzz})
	}
	add := func(pa, pb int8, c complex128) {
		if c != 0 {
			o.terms = append(o.terms, term{a: a, b: b, pa: pa, pb: pb, coeff: c})
		}
	}
	wpm := complex((kxx+kyy)/4, (kxy-kyx)/4)
	wpp := complex((kxx-kyy)/4, -(kxy+kyx)/4)
	wpz := complex(kxz/2, -kyz/2)
	wzp := complex(kzx/2, -kzy/2)
	add(opRaise, opLower, wpm)
	add(opLower, opRaise, cmplx.Conj(wpm))
	add(opRaise, opRaise, wpp)
	add(opLower, opLower, cmplx.Conj(wpp))
	add(opRaise, opZ, wpz)
	add(opLower, opZ, cmplx.Conj(wpz))
	add(opZ, opRaise, wzp)
	add(opZ, opLower, cmplx.Conj(wzp))
}

// addSiteVector appends v . S_i to o.
func (o *operator) addSiteVector(n, i int, v [3]float64) {
	if v[2] != 0 {
		if o.z == nil {
			o.z = make([]float64, n)
		}
		o.z[i] += v[2]
	}
	c := complex(v[0]/2, -v[1]/2)
	if c != 0 {
		o.terms = append(o.terms, term{a: i, b: -1, pa: opRaise, coeff: c})
		o.terms = append(o.terms, term{a: i, b: -1, pa: opLower, coeff: cmplx.Conj(c)})
	}
}

// addSingleIon appends A (S_i^z)^2 to o.
func (o *operator) addSingleIon(n, i int, A float64) {
	if A == 0 {
		return
	}
	if o.zsq == nil {
		o.zsq = make([]float64, n)
	}
	o.zsq[i] += A
}

// scaled returns c * o for real c.
func (o *operator) scaled(c float64) *operator {
	r := &operator{}
	for _, t := range o.zz {
		r.zz = append(r.zz, zzTerm{t.a, t.b, c * t.coeff})
	}
	if o.z != nil {
		r.z = make([]float64, len(o.z))
		for i, v := range o.z {
			r.z[i] = c * v
		}
	}
	if o.zsq != nil {
		r.zsq = make([]float64, len(o.zsq))
		for i, v := range o.zsq {
			r.zsq[i] = c * v
		}
	}
	for _, t := range o.terms {
		t.coeff *= complex(c, 0)
		r.terms = append(r.terms, t)
	}
	return r
}

// plus returns o + p (p's terms appended).
func (o *operator) plus(p *operator) *operator {
	r := o.scaled(1)
	r.zz = append(r.zz, p.zz...)
	r.terms = append(r.terms, p.terms...)
	for _, pair := range []struct {
		dst *[]float64
		src []float64
	}{{&r.z, p.z}, {&r.zsq, p.zsq}} {
		if pair.src == nil {
			continue
		}
		if *pair.dst == nil {
			*pair.dst = make([]float64, len(pair.src))
		}
		for i, v := range pair.src {
			(*pair.dst)[i] += v
		}
	}
	return r
}
