package hilbert

import (
	"math/rand/v2"
	"testing"
)

// Source: the definition of the group action (derivation): the chunked
// table lookup e(x) = sum_c T[e][c][d_c(x)] equals the site-by-site image
// (the local state of site i moved to perm(i), inverted with the spin
// inversion) for seeded random states, on spins 1/2 (1 to 6 byte chunks),
// and on mixed spins 1/2, 1, 5/2 (chunks of several radices, up to the
// general loop); representative returns the orbit minimum with an element
// that reaches it.
func TestActionAgainstSiteBySite(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	cases := [][]int{
		fill(5, 1), fill(12, 1), fill(20, 1), fill(30, 1), fill(44, 1),
		{2, 1, 2, 1, 2, 1, 2, 1, 2, 1},
		{5, 5, 5, 5, 5, 5, 5, 5, 5, 5, 5, 5, 5, 5, 5, 5},
		{2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2},
	}
	for _, twoS := range cases {
		n := len(twoS)
		// translation by the smallest period that keeps the spins
		d := 1
		for ; d < n; d++ {
			ok := n%d == 0
			for i := 0; ok && i < n; i++ {
				ok = twoS[(i+d)%n] == twoS[i]
			}
			if ok {
				break
			}
		}
		tr := make([]int, n)
		rf := make([]int, n)
		for i := range tr {
			tr[i] = (i + d) % n
			rf[i] = (n - i) % n
		}
		gens := []Generator{{Perm: tr}}
		g, err := NewGroup(twoS, gens, true)
		if err != nil {
			t.Fatal(err)
		}
		a := newActor(g)
		order := testOrder(a, g.sp, -1)
		if len(order) != a.perms()-1 {
			t.Fatalf("test order of %d permutations, want %d", len(order), a.perms()-1)
		}
		phase := make([]int, g.Order())
		sp := g.sp
		k := make([]int, n)
		out := make([]int, n)
		for trial := 0; trial < 200; trial++ {
			x := rng.Uint64N(sp.total)
			sp.digits(x, k)
			best, bestE := x, 0
			for e := 0; e < g.Order(); e++ {
				g.applyDigits(e, k, out)
				y := uint64(0)
				for i, v := range out {
					y += uint64(v) * sp.stride[i]
				}
				if got := a.image(e, x); got != y {
					t.Fatalf("2S=%v: element %d of %d: table %d, site by site %d", twoS, e, x, got, y)
				}
				if y < best {
					best, bestE = y, e
				}
			}
			r, e := a.representative(x)
			if r != best || a.image(e, x) != r {
				t.Fatalf("2S=%v: representative of %d: %d (element %d), want %d (element %d)", twoS, x, r, e, best, bestE)
			}
			stab := 0
			for e := 0; e < g.Order(); e++ {
				if a.image(e, x) == x {
					stab++
				}
			}
			if ok, st := a.isRepresentative(x, phase, order); ok != (best == x) || ok && st != stab {
				t.Fatalf("2S=%v: isRepresentative(%d) = %v, %d; want %v, %d", twoS, x, ok, st, best == x, stab)
			}
			if ok, _ := a.isRepresentative(best, phase, order); !ok {
				t.Fatalf("2S=%v: the minimum %d is not a representative", twoS, best)
			}
		}
	}
}

func fill(n, v int) []int {
	s := make([]int, n)
	for i := range s {
		s[i] = v
	}
	return s
}

// Source: Hermiticity of the ladder form (derivation): AddExchange of a
// real tensor gives terms whose adjoints carry conjugate coefficients, so
// Validate accepts it; a lone S^+ S^- term is refused.
func TestValidateHermitian(t *testing.T) {
	h := &Hamiltonian{TwoS: fill(3, 2)}
	h.AddExchange(0, 1, [9]float64{1, 0.2, -0.3, 0.4, 2, 0.5, -0.6, 0.7, 3})
	h.AddField(2, [3]float64{0.3, -0.2, 0.1})
	h.AddSingleIon(1, 0.5)
	if err := h.Validate(); err != nil {
		t.Fatal(err)
	}
	h.Terms = append(h.Terms, Term{A: 0, B: 2, PA: Raise, PB: Lower, Coeff: 1})
	if err := h.Validate(); err == nil {
		t.Error("non-Hermitian accepted")
	}
	if err := (&Hamiltonian{TwoS: []int{1, 0}}).Validate(); err == nil {
		t.Error("spin 0 accepted")
	}
	if err := (&Hamiltonian{TwoS: fill(64, 1)}).Validate(); err == nil {
		t.Error("2^64 states accepted")
	}
}
