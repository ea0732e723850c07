package hilbert

import (
	"context"
	"fmt"
	"math"
	"math/cmplx"
)

// Correlations are the spin correlations of one sector vector psi,
// normalized by <psi|psi>.
type Correlations struct {
	N    int
	Sz   []float64 // <S_i^z>
	SzSz []float64 // N*N, <S_i^z S_j^z> (i*N + j)
	SS   []float64 // N*N, <S_i . S_j>; the diagonal is S_i(S_i + 1)
	// Sx, Sy are <S_i^x> and <S_i^y> (from <S_i^+> = <S_i^x> + i <S_i^y>)
	// in a sector without S^z conservation (NoSz); in an S^z sector they
	// vanish exactly and are all zero.
	Sx, Sy []float64
}

// Correlations returns <S_i^z>, <S_i^z S_j^z> and <S_i . S_j> of the
// sector vector psi (coefficients of the basis |r~>).
//
// psi is an eigenvector of every g in G (g|psi> = chi(g)|psi>), so for any
// operator O, <O> = <g^{-1} O g> for every g, and <O> equals its group
// average: <S_i . S_j> is the average over g of <S_{g^{-1} i} . S_{g^{-1} j}>
// (S . S is invariant under spin inversion, S^z changes sign). The average
// commutes with G, which lets it act on representatives only:
//
//	<O_ij> = (1/|G|) sum_g Phi_{g^{-1} i, g^{-1} j},
//	Phi_ab = sum_r sum_{s: O_ab|r> -> o_s |s>} c_r o_s conj(c_r' chi(e_s)) sqrt(|Stab_r'| / |Stab_r|),
//
// with the notation of Sector (r' the representative of s, e_s(s) = r');
// for a diagonal O, Phi_ab = sum_r |c_r|^2 O_ab(r). Phi itself is a sum
// over representatives, not a physical correlation: only its group average
// is. A ground state that is unique in the whole space has the full
// symmetry, so these are its correlations; for a degenerate ground state
// they are those of the chosen sector's vector.
//
// In a NoSz sector, <S_i^+> is the same group average of Phi for O = S_i^+,
// where an element with spin inversion (m -> -m on every site, which maps
// S^+ onto S^-) takes Phi of S^-.
//
// The work is one representative search per pair of sites on which S^+ S^-
// acts, per basis state: about Dim N^2/4 |G| table lookups for spins 1/2
// (and 2 N more per state in a NoSz sector).
func (s *Sector) Correlations(ctx context.Context, psi []complex128) (*Correlations, error) {
	return correlations(ctx, s, psi)
}

// CorrelationsReal is Correlations for a real vector.
func (s *Sector) CorrelationsReal(ctx context.Context, psi []float64) (*Correlations, error) {
	return correlations(ctx, s, psi)
}

func toComplex[T Scalar](v T) complex128 {
	switch x := any(v).(type) {
	case float64:
		return complex(x, 0)
	case complex128:
		return x
	}
	return 0
}

func correlations[T Scalar](ctx context.Context, s *Sector, psi []T) (*Correlations, error) {
	dim := len(s.states)
	if len(psi) != dim {
		panic(fmt.Sprintf("hilbert: Correlations: length %d, want %d", len(psi), dim))
	}
	sp := s.sp
	n := sp.n
	G := len(s.grp.elems)
	chunk := max(1024, (dim+255)/256)
	nch := (dim + chunk - 1) / chunk
	type part struct {
		norm float64
		w    []float64    // n: sum |c|^2 m_a
		q    []float64    // n: sum |c|^2 m_a^2
		W    []float64    // n*n (a < b): sum |c|^2 m_a m_b
		phi  []complex128 // n*n (a < b): xy part
		up   []complex128 // n: S_a^+ (NoSz only)
		down []complex128 // n: S_a^-
	}
	local := s.twoSz == NoSz
	parts := make([]part, nch)
	chi := make([]complex128, G)
	for e := range chi {
		chi[e] = s.ir.Character(e)
	}
	err := parallelDo(ctx, nch, s.workers, func(_, b int) {
		p := part{w: make([]float64, n), q: make([]float64, n), W: make([]float64, n*n), phi: make([]complex128, n*n)}
		if local {
			p.up, p.down = make([]complex128, n), make([]complex128, n)
		}
		k := make([]int, n)
		m := make([]float64, n)
		// term is c_r amp <s~|y> conj(c_s chi(e_s)) sqrt(|Stab_s|/|Stab_r|)
		// for the product state y = O|r> / amp, 0 when y has no
		// representative in the sector.
		term := func(c complex128, fr float64, y uint64, amp float64) complex128 {
			e := 0
			if G > 1 {
				y, e = s.act.representative(y)
			}
			j := s.Index(y)
			if j < 0 {
				return 0
			}
			return c * complex(amp*math.Sqrt(float64(s.stab[j]))*fr, 0) * cmplx.Conj(toComplex(psi[j])*chi[e])
		}
		for r := b * chunk; r < min(dim, (b+1)*chunk); r++ {
			c := toComplex(psi[r])
			wr := real(c)*real(c) + imag(c)*imag(c)
			if c == 0 {
				continue
			}
			p.norm += wr
			x := s.states[r]
			sp.digits(x, k)
			for a := 0; a < n; a++ {
				m[a] = sp.m[a][k[a]]
				p.w[a] += wr * m[a]
				p.q[a] += wr * m[a] * m[a]
			}
			for a := 0; a < n; a++ {
				if m[a] == 0 {
					continue
				}
				wa := wr * m[a]
				row := p.W[a*n:]
				for bb := a + 1; bb < n; bb++ {
					row[bb] += wa * m[bb]
				}
			}
			fr := 1 / math.Sqrt(float64(s.stab[r]))
			for a := 0; local && a < n; a++ {
				for oi, op := range [2]int8{Raise, Lower} {
					la, da, ok := sp.localAmp(a, op, k[a])
					if !ok {
						continue
					}
					v := term(c, fr, x+uint64(int64(da)*int64(sp.stride[a])), la)
					if oi == 0 {
						p.up[a] += v
					} else {
						p.down[a] += v
					}
				}
			}
			for a := 0; a < n; a++ {
				for bb := a + 1; bb < n; bb++ {
					// (S_a^+ S_b^- + S_a^- S_b^+)/2
					for _, ops := range [2][2]int8{{Raise, Lower}, {Lower, Raise}} {
						la, da, ok := sp.localAmp(a, ops[0], k[a])
						if !ok {
							continue
						}
						lb, db, ok := sp.localAmp(bb, ops[1], k[bb])
						if !ok {
							continue
						}
						y := x + uint64(int64(da)*int64(sp.stride[a])) + uint64(int64(db)*int64(sp.stride[bb]))
						p.phi[a*n+bb] += term(c, fr, y, la*lb/2)
					}
				}
			}
		}
		parts[b] = p
	})
	if err != nil {
		return nil, err
	}
	norm := 0.0
	w := make([]float64, n)
	q := make([]float64, n)
	W := make([]float64, n*n)
	phi := make([]complex128, n*n)
	up := make([]complex128, n)
	down := make([]complex128, n)
	for _, p := range parts {
		if p.w == nil {
			continue
		}
		norm += p.norm
		for i := range p.up {
			up[i] += p.up[i]
			down[i] += p.down[i]
		}
		for i := range w {
			w[i] += p.w[i]
			q[i] += p.q[i]
		}
		for i := range W {
			W[i] += p.W[i]
			phi[i] += p.phi[i]
		}
	}
	if norm == 0 {
		return nil, fmt.Errorf("hilbert: Correlations: zero vector")
	}
	sym := func(M []float64, a, b int) float64 {
		if a > b {
			a, b = b, a
		}
		return M[a*n+b]
	}
	symc := func(M []complex128, a, b int) complex128 {
		if a > b {
			a, b = b, a
		}
		return M[a*n+b]
	}
	out := &Correlations{N: n, Sz: make([]float64, n), SzSz: make([]float64, n*n), SS: make([]float64, n*n),
		Sx: make([]float64, n), Sy: make([]float64, n)}
	splus := make([]complex128, n)
	for e, x := range s.grp.elems {
		inv := s.grp.inverse[e]
		sg := 1.0
		ladder := up
		if x.flip {
			sg = -1
			ladder = down
		}
		for i := 0; i < n; i++ {
			out.Sz[i] += sg * w[inv[i]]
			splus[i] += ladder[inv[i]]
			out.SzSz[i*n+i] += q[inv[i]]
			for j := 0; j < n; j++ {
				if i == j {
					continue
				}
				zz := sym(W, inv[i], inv[j])
				out.SzSz[i*n+j] += zz
				out.SS[i*n+j] += zz + real(symc(phi, inv[i], inv[j]))
			}
		}
	}
	f := 1 / (float64(G) * norm)
	for i := 0; i < n; i++ {
		out.Sz[i] *= f
		out.Sx[i], out.Sy[i] = real(splus[i])*f, imag(splus[i])*f
		out.SzSz[i*n+i] *= f
		S := float64(sp.twoS[i]) / 2
		for j := 0; j < n; j++ {
			if i == j {
				out.SS[i*n+j] = S * (S + 1)
				continue
			}
			out.SzSz[i*n+j] *= f
			out.SS[i*n+j] *= f
		}
	}
	return out, nil
}
