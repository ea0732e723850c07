package ed

import (
	"testing"

	"frustum/cluster"
)

func mixedModel(twoS ...int) *cluster.Model {
	m := &cluster.Model{}
	for i, t := range twoS {
		m.Sites = append(m.Sites, cluster.Site{Label: string(rune('a' + i)), TwoS: t, G: cluster.IsotropicG(2)})
	}
	return m
}

// Invariant, no source: summed over the S^z sectors every product state is
// counted exactly once, and the enumerated sectors have the dimensions of the
// generating-function count.
func TestSectorDimensionsAddUp(t *testing.T) {
	for _, spins := range [][]int{{1}, {1, 1, 1, 1, 1, 1, 1}, {2, 1, 3}, {4, 4, 1, 2}, {5}} {
		sys := newSpinSystem(mixedModel(spins...))
		dims := sectorDimensions(sys, true)
		var sum int64
		for _, d := range dims {
			sum += d
		}
		if sum != sys.total {
			t.Errorf("spins %v: sector dimensions add to %d, want %d", spins, sum, sys.total)
		}
		bs := newBasisSet(sys, true)
		seen := make([]bool, sys.total)
		for _, s := range bs.sectors {
			if int64(s.dim()) != dims[s.twoSz] {
				t.Errorf("spins %v: sector %s has %d states, count says %d", spins, s.label, s.dim(), dims[s.twoSz])
			}
			for i, x := range s.states {
				if seen[x] {
					t.Errorf("spins %v: state %d in two sectors", spins, x)
				}
				seen[x] = true
				if bs.index(x) != i {
					t.Errorf("spins %v: position of %d is %d, want %d", spins, x, bs.index(x), i)
				}
			}
		}
		for x, ok := range seen {
			if !ok {
				t.Errorf("spins %v: state %d in no sector", spins, x)
			}
		}
	}
}

// Textbook spin algebra: <m+1|S^+|m> = sqrt(S(S+1) - m(m+1)); for S = 1 both
// ladder elements are sqrt(2), for S = 3/2 they are sqrt(3), 2, sqrt(3).
func TestLadderElements(t *testing.T) {
	sys := newSpinSystem(mixedModel(2, 3))
	want1 := []float64{0, 1.4142135623730951, 1.4142135623730951}
	for k, w := range want1 {
		if d := sys.up[0][k] - w; d > 1e-15 || d < -1e-15 {
			t.Errorf("S=1 up[%d] = %v, want %v", k, sys.up[0][k], w)
		}
	}
	want32 := []float64{0, 1.7320508075688772, 2, 1.7320508075688772}
	for k, w := range want32 {
		if d := sys.up[1][k] - w; d > 1e-15 || d < -1e-15 {
			t.Errorf("S=3/2 up[%d] = %v, want %v", k, sys.up[1][k], w)
		}
	}
}

// FORMAT.md spells out the DM sign: for spins 1/2,
// <up,down| D^z (Sa x Sb)^z |down,up> = +i D^z / 2.
func TestDMMatrixElementSign(t *testing.T) {
	m := mixedModel(1, 1)
	m.Bonds = []cluster.Bond{{A: 0, B: 1, DM: [3]float64{0, 0, 3}}}
	st := newSetup(m, [3]float64{0, 0, 1}, false)
	bs := newBasisSet(st.sys, false)
	a := denseComplex(st.sys, bs, bs.sectors[0], st.h0)
	// k = 0 is up; x = k_a + 2 k_b: |up,down> = 2, |down,up> = 1.
	if got := a[2*4+1]; got != complex(0, 1.5) {
		t.Errorf("<up,down|H|down,up> = %v, want +1.5i", got)
	}
}
