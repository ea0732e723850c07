package hilbert_test

import (
	"context"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"frustum/ed/hilbert"
)

// fullCorrelations returns <v|S_i.S_j|v>/<v|v> and <v|S_i^mu|v>/<v|v>
// (mu = x, y, z) of a full-space vector, from the Cartesian spin matrices.
func fullCorrelations(m *model, v []complex128) (ss [][]float64, s1 [3][]float64) {
	n := len(m.twoS)
	D, st := m.strides()
	mats := m.spinMats()
	nrm := real(dot(v, v))
	ss = make([][]float64, n)
	for mu := range s1 {
		s1[mu] = make([]float64, n)
	}
	for i := range ss {
		ss[i] = make([]float64, n)
	}
	for x := 0; x < D; x++ {
		if v[x] == 0 {
			continue
		}
		k := m.digits(x)
		for i := 0; i < n; i++ {
			for mu := 0; mu < 3; mu++ {
				for a := 0; a <= m.twoS[i]; a++ {
					if amp := mats[i][mu][a][k[i]]; amp != 0 {
						s1[mu][i] += real(cmplx.Conj(v[x+(a-k[i])*st[i]])*amp*v[x]) / nrm
					}
				}
			}
			for j := 0; j < n; j++ {
				var s complex128
				for mu := 0; mu < 3; mu++ {
					if i == j {
						for a := 0; a <= m.twoS[i]; a++ {
							for b := 0; b <= m.twoS[i]; b++ {
								s += cmplx.Conj(v[x+(b-k[i])*st[i]]) * mats[i][mu][b][a] * mats[i][mu][a][k[i]] * v[x]
							}
						}
						continue
					}
					for a := 0; a <= m.twoS[i]; a++ {
						for b := 0; b <= m.twoS[j]; b++ {
							amp := mats[i][mu][a][k[i]] * mats[j][mu][b][k[j]]
							if amp != 0 {
								s += cmplx.Conj(v[x+(a-k[i])*st[i]+(b-k[j])*st[j]]) * amp * v[x]
							}
						}
					}
				}
				ss[i][j] += real(s) / nrm
			}
		}
	}
	return ss, s1
}

// Source: the direct evaluation on the full space (derivation): a seeded
// random vector of a sector, expanded to the full space from the
// definition of the basis, has <S_i.S_j> and <S_i> computed there from
// the Cartesian spin matrices; Correlations, which works on
// representatives with the group average, must agree to 1e-12. The vector
// need not be an eigenvector: every vector of the sector transforms by chi.
// In the sectors without S^z conservation (NoSz) a random vector has
// nonzero <S_i^x> and <S_i^y>; in S^z sectors they vanish.
func TestCorrelationsAgainstFullSpace(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 9))
	for _, c := range []sectorCase{
		{"ring 10 k=3 Sz=1", ring(10, 1, 1, 0.3), []hilbert.Generator{{Perm: translation(10, 1)}}, false, 2, "k=3/10"},
		{"ring 10 reflections +-", ring(10, 1, 1, 0.3), []hilbert.Generator{{Perm: reflection(10, 0)}, {Perm: reflection(10, 5)}}, true, 0, "+,-,flip:-"},
		{"mixed chain 8 k=1/4 Sz=1", mixedChain(4, 1, 0.3, 0), []hilbert.Generator{{Perm: translation(8, 2)}}, false, 2, "k=1/4"},
		{"DM ring 9 k=2 Sz=1/2", dmRing(9, 1, 0.3), []hilbert.Generator{{Perm: translation(9, 1)}}, false, 1, "k=2/9"},
		{"no symmetry, spin 1 and 3/2", &model{twoS: []int{2, 3, 2, 1}, bonds: []bond{{0, 1, heis(1, 1)}, {1, 2, heis(1, 1)}, {2, 3, heis(0.5, 1)}}}, nil, false, 2, "trivial"},
		{"ring 8 NoSz k=1 flip -", ring(8, 1, 1, 0.3), []hilbert.Generator{{Perm: translation(8, 1)}}, true, hilbert.NoSz, "k=1/8,flip:-"},
		{"ring 8 NoSz k=0 flip +", ring(8, 1, 1, 0.3), []hilbert.Generator{{Perm: translation(8, 1)}}, true, hilbert.NoSz, "k=0/8,flip:+"},
		{"NoSz no symmetry, spin 1 and 3/2", &model{twoS: []int{2, 3, 2, 1}, bonds: []bond{{0, 1, heis(1, 1)}, {1, 2, heis(1, 1)}, {2, 3, heis(0.5, 1)}}}, nil, false, hilbert.NoSz, "trivial"},
	} {
		s := c.sector(t, hilbert.SectorOptions{})
		psi := make([]complex128, s.Dim())
		for i := range psi {
			psi[i] = complex(rng.NormFloat64(), rng.NormFloat64())
		}
		got, err := s.Correlations(context.Background(), psi)
		if err != nil {
			t.Fatal(err)
		}
		ss, s1 := fullCorrelations(c.m, expand(c.m, s, psi))
		n := len(c.m.twoS)
		transverse := 0.0
		for i := 0; i < n; i++ {
			for mu, v := range [3][]float64{got.Sx, got.Sy, got.Sz} {
				if math.Abs(v[i]-s1[mu][i]) > 1e-12 {
					t.Fatalf("%s: <S^%c_%d> = %v, want %v", c.name, "xyz"[mu], i, v[i], s1[mu][i])
				}
			}
			transverse += math.Abs(s1[0][i]) + math.Abs(s1[1][i])
			for j := 0; j < n; j++ {
				if math.Abs(got.SS[i*n+j]-ss[i][j]) > 1e-12 {
					t.Fatalf("%s: <S_%d.S_%d> = %v, want %v", c.name, i, j, got.SS[i*n+j], ss[i][j])
				}
			}
		}
		if (c.sz == hilbert.NoSz) != (transverse > 1e-6) {
			t.Errorf("%s: sum_i |<S_i^x>| + |<S_i^y>| = %v", c.name, transverse)
		}
	}
}

// Source: H = sum_bonds J S_a.S_b (derivation): for the ground state of
// the 16-site Heisenberg ring (k = 0, flip +, Lanczos-free: the dense
// sector), sum over the bonds of <S_i.S_{i+1}> is E0 = -7.1422963606
// (PHYSICS.md, Bonner and Fisher; RECOMP), so <S_i.S_{i+1}> = E0/16 on
// every bond, and sum_j <S_0.S_j> = <S_0.S_tot> = 0 in a singlet.
func TestCorrelationsGroundState(t *testing.T) {
	m := ring(16, 1, 1, 0)
	c := sectorCase{"ring 16", m, []hilbert.Generator{{Name: "T", Perm: translation(16, 1)}}, true, 0, "T:k=0/16,flip:+"}
	s := c.sector(t, hilbert.SectorOptions{})
	if !s.IsReal() {
		t.Fatal("sector not real")
	}
	n := s.Dim()
	A := sectorDense(t, s)
	vals, vecs := denseEigenReal(t, A, n)
	psi := make([]float64, n)
	for i := range psi {
		psi[i] = vecs[i*n]
	}
	if math.Abs(vals[0]-(-7.1422963606)) > 1e-9 {
		t.Fatalf("E0 = %v", vals[0])
	}
	got, err := s.CorrelationsReal(context.Background(), psi)
	if err != nil {
		t.Fatal(err)
	}
	N := 16
	sum0 := 0.0
	for i := 0; i < N; i++ {
		if v := got.SS[i*N+(i+1)%N]; math.Abs(v-vals[0]/16) > 1e-10 {
			t.Errorf("<S_%d.S_%d> = %v, want %v", i, (i+1)%N, v, vals[0]/16)
		}
		sum0 += got.SS[i]
	}
	if math.Abs(sum0) > 1e-10 {
		t.Errorf("sum_j <S_0.S_j> = %v, want 0", sum0)
	}
}
