package cluster

import (
	"errors"
	"fmt"
	"math"
)

// SymmetryTolerance is the relative tolerance of CheckPermutation: two
// couplings (or single-ion terms) agree when they differ by at most
// SymmetryTolerance times the largest coupling of the model, and two g
// tensors when they differ by at most SymmetryTolerance times the largest g
// element.
const SymmetryTolerance = 1e-12

// axes names the Cartesian components in messages.
var axes = [3]string{"x", "y", "z"}

// CheckPermutation reports whether the site permutation perm (site i maps to
// perm[i]) commutes with the Hamiltonian of m, and if not, why, naming the
// offending site or bond. It does not depend on a field: the Zeeman term is
// covered by comparing g tensors.
//
// P commutes with H exactly when every site i and P(i) have the same spin,
// g tensor and single-ion term, and every bond a -> b with coupling matrix K
// (Bond.Coupling) is matched by the coupling between P(a) and P(b) taken in
// that order:
//
//	K_{P(a) P(b)} = K_{ab}
//
// where a bond stored as (P(a), P(b)) enters with its K, one stored as
// (P(b), P(a)) with K transposed, and a pair with no bond with K = 0. So J
// and Jz keep their values when P reverses a bond, a tensor is transposed,
// and a DM vector (antisymmetric part) changes sign. Since P is a bijection
// of the pairs of sites, checking every bond also covers the pairs with no
// bond.
func (m *Model) CheckPermutation(perm []int) error {
	if m == nil {
		return errNoModel
	}
	n := len(m.Sites)
	if len(perm) != n {
		return fmt.Errorf("the permutation has %d entries, want %d (one image per site)", len(perm), n)
	}
	source := make([]int, n)
	for i := range source {
		source[i] = -1
	}
	for i, p := range perm {
		if p < 0 || p >= n {
			return fmt.Errorf("perm[%d] = %d is not a site index (0 to %d)", i, p, n-1)
		}
		if source[p] >= 0 {
			return fmt.Errorf("perm[%d] = %d repeats perm[%d]: not a bijection", i, p, source[p])
		}
		source[p] = i
	}

	// The scales of the tolerances.
	var energyScale, gScale float64
	for _, s := range m.Sites {
		energyScale = max(energyScale, math.Abs(s.SingleIon))
		for _, g := range s.G {
			gScale = max(gScale, math.Abs(g))
		}
	}
	couplings := make([][9]float64, len(m.Bonds))
	stored := make(map[[2]int]int, len(m.Bonds))
	for i, b := range m.Bonds {
		if b.A < 0 || b.A >= n || b.B < 0 || b.B >= n || b.A == b.B {
			return fmt.Errorf("bonds[%d] joins sites %d and %d, which is not a bond of this model's %d sites", i, b.A, b.B, n)
		}
		couplings[i] = b.Coupling()
		for _, k := range couplings[i] {
			energyScale = max(energyScale, math.Abs(k))
		}
		stored[[2]int{b.A, b.B}] = i
	}
	energyTol := SymmetryTolerance * energyScale
	gTol := SymmetryTolerance * gScale

	for i, s := range m.Sites {
		t := m.Sites[perm[i]]
		if s.TwoS != t.TwoS {
			return fmt.Errorf("site %s (spin %s) maps onto %s (spin %s)", s.Label, spinString(s.TwoS), t.Label, spinString(t.TwoS))
		}
		for k := range s.G {
			if math.Abs(s.G[k]-t.G[k]) > gTol {
				return fmt.Errorf("site %s maps onto %s, but their g tensors differ: g^%s%s is %s on %s and %s on %s",
					s.Label, t.Label, axes[k/3], axes[k%3], formatFloat(s.G[k]), s.Label, formatFloat(t.G[k]), t.Label)
			}
		}
		if math.Abs(s.SingleIon-t.SingleIon) > energyTol {
			return fmt.Errorf("site %s maps onto %s, but their single-ion terms differ: A is %s K on %s and %s K on %s",
				s.Label, t.Label, formatFloat(s.SingleIon), s.Label, formatFloat(t.SingleIon), t.Label)
		}
	}

	for i, b := range m.Bonds {
		pa, pb := perm[b.A], perm[b.B]
		k := couplings[i]
		var image [9]float64
		j, same := stored[[2]int{pa, pb}]
		jr, reversed := stored[[2]int{pb, pa}]
		switch {
		case same:
			image = couplings[j]
		case reversed:
			j = jr
			image = transpose(couplings[j])
		default:
			j = -1
		}
		for e := range k {
			if math.Abs(k[e]-image[e]) <= energyTol {
				continue
			}
			la, lb := m.Sites[b.A].Label, m.Sites[b.B].Label
			ia, ib := m.Sites[pa].Label, m.Sites[pb].Label
			if j < 0 {
				return fmt.Errorf("bond %s-%s (bonds[%d]) maps onto %s-%s, which has no bond", la, lb, i, ia, ib)
			}
			mu, nu := axes[e/3], axes[e%3]
			msg := fmt.Sprintf("bond %s-%s (bonds[%d]) maps onto %s-%s (bonds[%d]), but the coefficient of S_%s^%s S_%s^%s is %s K and that of its image S_%s^%s S_%s^%s is %s K",
				la, lb, i, ia, ib, j, la, mu, lb, nu, formatFloat(k[e]), ia, mu, ib, nu, formatFloat(image[e]))
			imageDM := m.Bonds[j].DM
			if reversed && !same {
				msg += fmt.Sprintf(" (bonds[%d] is stored as %s -> %s, so its coupling enters transposed)", j, ib, ia)
				imageDM = [3]float64{-imageDM[0], -imageDM[1], -imageDM[2]}
			}
			if e/3 != e%3 && (b.DM != [3]float64{} || imageDM != [3]float64{}) {
				msg += fmt.Sprintf("; a DM vector changes sign when a permutation reverses its bond: D = %s along %s -> %s, and D = %s along its image %s -> %s",
					vectorString(b.DM), la, lb, vectorString(imageDM), ia, ib)
			}
			return errors.New(msg)
		}
	}
	return nil
}

func transpose(k [9]float64) [9]float64 {
	return [9]float64{k[0], k[3], k[6], k[1], k[4], k[7], k[2], k[5], k[8]}
}

// vectorString writes (x, y, z).
func vectorString(v [3]float64) string {
	for i, x := range v {
		if x == 0 {
			v[i] = 0 // no "-0"
		}
	}
	return "(" + formatFloat(v[0]) + ", " + formatFloat(v[1]) + ", " + formatFloat(v[2]) + ")"
}

// spinString writes S = twoS/2 as "1/2", "1", "3/2", ...
func spinString(twoS int) string {
	if twoS%2 == 0 {
		return fmt.Sprint(twoS / 2)
	}
	return fmt.Sprintf("%d/2", twoS)
}
