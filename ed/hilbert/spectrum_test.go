package hilbert_test

import (
	"fmt"
	"testing"

	"frustum/ed/hilbert"
)

// symCase is a model with a symmetry group: the site permutations gens,
// the spin inversion at S^z = 0 when flip (or in the NoSz basis when noSz).
type symCase struct {
	name string
	m    *model
	gens []hilbert.Generator
	flip bool
	noSz bool
}

func (c symCase) group(t *testing.T, twoSz int) *hilbert.Group {
	g, err := hilbert.NewGroup(c.m.twoS, c.gens, c.flip && (twoSz == 0 || twoSz == hilbert.NoSz))
	if err != nil {
		t.Fatalf("%s: %v", c.name, err)
	}
	return g
}

func (c symCase) szValues() []int {
	if c.noSz {
		return []int{hilbert.NoSz}
	}
	sum := 0
	for _, v := range c.m.twoS {
		sum += v
	}
	var out []int
	for v := -sum; v <= sum; v += 2 {
		out = append(out, v)
	}
	return out
}

// torus43 is the 4 x 3 periodic square lattice of spins 1/2, site x + 4y,
// with J1 bonds and J2 bonds on one diagonal direction.
func torus43(J1, J2 float64) *model {
	m := &model{twoS: fill(12, 1)}
	s := func(x, y int) int { return (x+4)%4 + 4*((y+3)%3) }
	for y := 0; y < 3; y++ {
		for x := 0; x < 4; x++ {
			m.bonds = append(m.bonds, bond{s(x, y), s(x+1, y), heis(J1, J1)}, bond{s(x, y), s(x, y+1), heis(J1, J1)})
			if J2 != 0 {
				m.bonds = append(m.bonds, bond{s(x, y), s(x+1, y+1), heis(J2, J2)})
			}
		}
	}
	return m
}

func torusPerm(f func(x, y int) (int, int)) []int {
	p := make([]int, 12)
	for y := 0; y < 3; y++ {
		for x := 0; x < 4; x++ {
			u, v := f(x, y)
			p[x+4*y] = (u+4)%4 + 4*((v+3)%3)
		}
	}
	return p
}

// mixedChain is a periodic chain of 2n sites, spin 1 on even and spin 1/2
// on odd sites, Heisenberg J, with single-ion A on the spins 1 and a field
// along z.
func mixedChain(n int, J, A, hz float64) *model {
	N := 2 * n
	m := &model{twoS: make([]int, N), ions: map[int]float64{}, fields: map[int][3]float64{}}
	for i := 0; i < N; i++ {
		m.twoS[i] = 1
		if i%2 == 0 {
			m.twoS[i] = 2
			m.ions[i] = A
		}
		m.fields[i] = [3]float64{0, 0, hz}
		m.bonds = append(m.bonds, bond{i, (i + 1) % N, heis(J, J)})
	}
	return m
}

// dmRing is a ring of N spins 1/2 with J S.S + D (S_i x S_{i+1})^z,
// uniform D: translations are symmetries, reflections and the spin
// inversion are not.
func dmRing(N int, J, D float64) *model {
	m := &model{twoS: fill(N, 1)}
	for i := 0; i < N; i++ {
		m.bonds = append(m.bonds, bond{i, (i + 1) % N, dmz(J, D)})
	}
	return m
}

func symCases() []symCase {
	T := func(N int) hilbert.Generator { return hilbert.Generator{Name: "T", Perm: translation(N, 1)} }
	R := func(N, c int) hilbert.Generator {
		return hilbert.Generator{Name: fmt.Sprintf("R%d", c), Perm: reflection(N, c)}
	}
	tx := hilbert.Generator{Name: "Tx", Perm: torusPerm(func(x, y int) (int, int) { return x + 1, y })}
	ty := hilbert.Generator{Name: "Ty", Perm: torusPerm(func(x, y int) (int, int) { return x, y + 1 })}
	rx := hilbert.Generator{Name: "Rx", Perm: torusPerm(func(x, y int) (int, int) { return -x, y })}
	xField := ring(8, 1, 1, 0)
	xField.fields = map[int][3]float64{}
	for i := 0; i < 8; i++ {
		xField.fields[i] = [3]float64{0.7, 0, 0}
	}
	dmx := &model{twoS: fill(8, 1)}
	for i := 0; i < 8; i++ {
		// J S.S + D_x (S_a x S_b)^x: (Sa x Sb)^x = Sa^y Sb^z - Sa^z Sb^y
		dmx.bonds = append(dmx.bonds, bond{i, (i + 1) % 8, [9]float64{1, 0, 0, 0, 1, 0.4, 0, -0.4, 1}})
	}
	return []symCase{
		{name: "Heisenberg ring 8, translations", m: ring(8, 1, 1, 0), gens: []hilbert.Generator{T(8)}, flip: true},
		{name: "Heisenberg ring 8, reflection", m: ring(8, 1, 1, 0), gens: []hilbert.Generator{R(8, 0)}, flip: true},
		{name: "XXZ ring 10 with J2, translations", m: ring(10, 1, 0.6, 0.35), gens: []hilbert.Generator{T(10)}, flip: true},
		{name: "Heisenberg ring 10, T^2 then T", m: ring(10, 1, 1, 0), gens: []hilbert.Generator{{Name: "T2", Perm: translation(10, 2)}, T(10)}},
		{name: "J1-J2 ring 12, two reflections", m: ring(12, 1, 1, 0.4), gens: []hilbert.Generator{R(12, 0), R(12, 6)}, flip: true},
		{name: "XXZ ring 12, translations", m: ring(12, 1, 1.3, 0), gens: []hilbert.Generator{T(12)}, flip: true},
		{name: "4x3 torus, Tx Ty", m: torus43(1, 0.3), gens: []hilbert.Generator{tx, ty}, flip: true},
		{name: "4x3 torus, Ty Rx", m: torus43(1, 0), gens: []hilbert.Generator{ty, rx}, flip: true},
		{name: "mixed 1, 1/2 chain 8, T^2", m: mixedChain(4, 1, 0.4, 0), gens: []hilbert.Generator{{Name: "T2", Perm: translation(8, 2)}}, flip: true},
		{name: "mixed 1, 1/2 chain 8, field, T^2", m: mixedChain(4, 1, -0.3, 0.25), gens: []hilbert.Generator{{Name: "T2", Perm: translation(8, 2)}}},
		{name: "DM ring 8", m: dmRing(8, 1, 0.45), gens: []hilbert.Generator{T(8)}},
		{name: "DM ring 9 (odd)", m: dmRing(9, 1, -0.3), gens: []hilbert.Generator{T(9)}},
		{name: "ring 8 in a transverse field, no Sz", m: xField, gens: []hilbert.Generator{T(8)}, flip: true, noSz: true},
		{name: "DM_x ring 8, no Sz", m: dmx, gens: []hilbert.Generator{T(8)}, noSz: true},
	}
}

// Source: the full product-space Hamiltonian of FORMAT.md, built in the test
// from the Cartesian spin matrices (spinMatrices) and diagonalized by gonum
// (mat.EigenSym; complex blocks through the real 2n embedding). The union of
// the spectra of all sectors (dense, each from Apply on unit vectors) must
// equal it to 1e-10, S^z block by S^z block; the sectors' dimensions must
// add up to the block's (every state counted once), and each sector matrix
// must be Hermitian.
func TestSectorSpectraUnion(t *testing.T) {
	for _, c := range symCases() {
		t.Run(c.name, func(t *testing.T) {
			h := c.m.hamiltonian()
			D, H := c.m.denseFull()
			var blocks map[int][]int
			if c.noSz {
				all := make([]int, D)
				for i := range all {
					all[i] = i
				}
				blocks = map[int][]int{hilbert.NoSz: all}
			} else {
				blocks = c.m.szBlocks(t)
			}
			for _, sz := range c.szValues() {
				g := c.group(t, sz)
				var union []float64
				total := 0
				for _, ir := range g.Irreps() {
					s, err := hilbert.NewSector(h, sz, g, ir, hilbert.SectorOptions{})
					if err != nil {
						t.Fatalf("2Sz=%d %s: %v", sz, ir.Label, err)
					}
					total += s.Dim()
					union = append(union, sectorSpectrum(t, s, 1e-12)...)
				}
				if total != len(blocks[sz]) {
					t.Fatalf("2Sz=%d: dimensions add up to %d, want %d", sz, total, len(blocks[sz]))
				}
				want := blockSpectrum(t, D, H, blocks[sz])
				sameSpectrum(t, fmt.Sprintf("2Sz=%d", sz), union, want, 1e-10)
			}
		})
	}
}
