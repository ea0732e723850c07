package ed

import (
	"math"

	"frustum/cluster"
)

// setup is the Hamiltonian of one task in its working frame, and what the
// symmetry analysis decided.
//
// With m_i = g_i^T n (n the unit field direction) the Zeeman term is
//
//	H_Z = -(mu_B/k_B) B sum_i m_i . S_i = -(mu_B/k_B) B M_n
//
// where M_n = sum_i n . (g_i S_i) is the moment along n (mu_B). When the
// field-free Hamiltonian H0 is SU(2) invariant and every m_i is parallel to one
// axis u, the spin quantization axis is turned onto u: then m_i = (0, 0, c_i)
// and total S^z is conserved whatever the field direction.
type setup struct {
	sys *spinSystem
	// h0 is the field-free Hamiltonian (K); moment is M_n (mu_B), so that
	// H(B) = h0 - MuBOverKB * B * moment.
	h0, moment *operator
	// groupMoment[g] is the part of M_n from the sites of group g.
	groups      []string
	groupMoment []*operator
	// su2: H0 commutes with total S (SU(2) invariant).
	su2 bool
	// flipSymmetric: H0 conserves S^z and commutes with the rotation by pi
	// about x (S^y, S^z -> -S^y, -S^z on every site), so the sectors S^z and
	// -S^z have the same spectrum and opposite group moments.
	flipSymmetric bool
	// rotated: the quantization axis was turned onto the common m_i axis,
	// axis (in the lab frame; z otherwise).
	rotated bool
	axis    [3]float64
	// conserveSz: H(B) and M_n conserve total S^z in the working frame.
	conserveSz bool
	// uniform: M_n = mz * S^z_total, so that H(B) = H0 - MuBOverKB B mz S^z
	// commutes with H0 and one zero-field diagonalization serves every field.
	uniform bool
	mz      float64
	// real: every sector matrix is real symmetric for every field.
	real bool
	// saturation = sum_i |m_i| S_i (mu_B); groupSaturation[g] is the same
	// sum over the sites of group g.
	saturation      float64
	groupSaturation []float64
}

// newSetup analyses model for a field along the unit vector n. When withField
// is false the Zeeman and moment operators are irrelevant (a zero-field
// spectrum) and do not constrain the symmetry.
func newSetup(model *cluster.Model, n [3]float64, withField bool) *setup {
	sys := newSpinSystem(model)
	N := len(model.Sites)
	st := &setup{sys: sys, su2: true, flipSymmetric: true, axis: [3]float64{0, 0, 1}}
	for _, s := range model.Sites {
		if s.SingleIon != 0 {
			st.su2 = false
		}
	}
	h0 := &operator{}
	for _, b := range model.Bonds {
		K := b.Coupling()
		if !isIdentityMultiple(K) {
			st.su2 = false
		}
		// In the working frame the pi rotation about x flips the sign of the
		// xy and xz couplings; with S^z conserved only Kxy, Kyx can be set.
		if K[1] != 0 || K[3] != 0 || K[2] != 0 || K[6] != 0 {
			st.flipSymmetric = false
		}
		h0.addBond(b.A, b.B, K)
	}
	for i, s := range model.Sites {
		h0.addSingleIon(N, i, s.SingleIon)
	}
	st.h0 = h0
	st.flipSymmetric = st.flipSymmetric && h0.conservesSz()

	m := siteFields(model, n)
	st.groups = model.Groups()
	st.saturation, st.groupSaturation = saturations(model, st.groups, m)
	if st.su2 && withField {
		if u, ok := commonAxis(m); ok {
			st.rotated = true
			st.axis = u
			for i := range m {
				c := dot3(m[i], u)
				m[i] = [3]float64{0, 0, c}
			}
		}
	}
	st.moment = &operator{}
	for i := range m {
		st.moment.addSiteVector(N, i, m[i])
	}
	for _, g := range st.groups {
		op := &operator{}
		for i, s := range model.Sites {
			if s.Group == g {
				op.addSiteVector(N, i, m[i])
			}
		}
		st.groupMoment = append(st.groupMoment, op)
	}
	st.conserveSz = h0.conservesSz() && (!withField || st.moment.conservesSz())
	st.real = h0.isReal() && (!withField || st.moment.isReal())
	if st.conserveSz && withField {
		st.uniform = true
		st.mz = m[0][2]
		for i := range m {
			if math.Abs(m[i][2]-st.mz) > 1e-12*math.Max(1, math.Abs(st.mz)) {
				st.uniform = false
			}
		}
	}
	if !withField {
		// Without field the spectrum is that of H0 alone.
		st.uniform = st.conserveSz
	}
	return st
}

// siteFields returns m_i = g_i^T n for every site: M_n = sum_i m_i . S_i.
func siteFields(model *cluster.Model, n [3]float64) [][3]float64 {
	m := make([][3]float64, len(model.Sites))
	for i, s := range model.Sites {
		for nu := 0; nu < 3; nu++ {
			for mu := 0; mu < 3; mu++ {
				m[i][nu] += n[mu] * s.G[3*mu+nu]
			}
		}
	}
	return m
}

// saturations returns sum_i |m_i| S_i over every site and over the sites of
// each of groups (mu_B).
func saturations(model *cluster.Model, groups []string, m [][3]float64) (total float64, perGroup []float64) {
	perGroup = make([]float64, len(groups))
	for i, s := range model.Sites {
		x := norm3(m[i]) * s.Spin()
		total += x
		for g, name := range groups {
			if s.Group == name {
				perGroup[g] += x
			}
		}
	}
	return total, perGroup
}

// hamiltonian returns H(B) = H0 - MuBOverKB * B * M_n.
func (st *setup) hamiltonian(B float64) *operator {
	if B == 0 {
		return st.h0
	}
	return st.h0.plus(st.moment.scaled(-MuBOverKB * B))
}

func isIdentityMultiple(K [9]float64) bool {
	return K[1] == 0 && K[2] == 0 && K[3] == 0 && K[5] == 0 && K[6] == 0 && K[7] == 0 &&
		K[0] == K[4] && K[4] == K[8]
}

// commonAxis returns the unit vector u with every v_i = c_i u, if there is one
// (an all-zero set is parallel to z).
func commonAxis(v [][3]float64) ([3]float64, bool) {
	best, bn := -1, 0.0
	for i := range v {
		if nv := norm3(v[i]); nv > bn {
			best, bn = i, nv
		}
	}
	if best < 0 {
		return [3]float64{0, 0, 1}, true
	}
	u := [3]float64{v[best][0] / bn, v[best][1] / bn, v[best][2] / bn}
	for i := range v {
		c := dot3(v[i], u)
		r := [3]float64{v[i][0] - c*u[0], v[i][1] - c*u[1], v[i][2] - c*u[2]}
		if norm3(r) > 1e-12*math.Max(bn, 1) {
			return u, false
		}
	}
	return u, true
}

func dot3(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }
func norm3(a [3]float64) float64   { return math.Sqrt(dot3(a, a)) }

// unit returns v/|v|, or z for the zero vector.
func unit(v [3]float64) ([3]float64, float64) {
	nv := norm3(v)
	if nv == 0 {
		return [3]float64{0, 0, 1}, 0
	}
	return [3]float64{v[0] / nv, v[1] / nv, v[2] / nv}, nv
}
