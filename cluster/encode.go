package cluster

import (
	"slices"

	frustumv1 "frustum/proto/frustum/v1"
)

// ToProto returns the Cluster message of m, so that FromProto(m.ToProto())
// gives a Model equal to m (see Equal). Defaults are written out: every site
// has its spin, an isotropic g tensor is written as g and any other as
// gTensor, and every bond has its exchange; exchangeZ, dm, tensor, singleIon
// and position appear only when they differ from their defaults. The result
// shares no memory with m.
//
// An index in m that names no site (only possible in a Model built by hand)
// becomes an empty label, which FromProto refuses.
func (m *Model) ToProto() *frustumv1.Cluster {
	if m == nil {
		return &frustumv1.Cluster{}
	}
	label := func(i int) string {
		if i < 0 || i >= len(m.Sites) {
			return ""
		}
		return m.Sites[i].Label
	}
	c := &frustumv1.Cluster{Name: m.Name}
	for _, s := range m.Sites {
		ps := &frustumv1.Site{
			Label: s.Label,
			Spin:  ptr(s.Spin()),
			Group: s.Group,
		}
		if s.G == IsotropicG(s.G[0]) {
			ps.G = ptr(s.G[0])
		} else {
			ps.GTensor = slices.Clone(s.G[:])
		}
		if len(s.Position) > 0 {
			ps.Position = slices.Clone(s.Position)
		}
		if s.SingleIon != 0 {
			ps.SingleIon = ptr(s.SingleIon)
		}
		c.Sites = append(c.Sites, ps)
	}
	for _, b := range m.Bonds {
		pb := &frustumv1.Bond{A: label(b.A), B: label(b.B), Exchange: ptr(b.J)}
		if b.Jz != b.J {
			pb.ExchangeZ = ptr(b.Jz)
		}
		if b.DM != [3]float64{} {
			pb.Dm = slices.Clone(b.DM[:])
		}
		if b.Tensor != [9]float64{} {
			pb.Tensor = slices.Clone(b.Tensor[:])
		}
		c.Bonds = append(c.Bonds, pb)
	}
	for _, sym := range m.Symmetries {
		ps := &frustumv1.Symmetry{Name: sym.Name}
		for _, p := range sym.Perm {
			ps.Permutation = append(ps.Permutation, label(p))
		}
		c.Symmetries = append(c.Symmetries, ps)
	}
	return c
}

// Equal reports whether m and o describe the same cluster in the same order:
// the same name, sites, bonds and symmetries, numbers compared with ==, and
// a nil list equal to an empty one.
func (m *Model) Equal(o *Model) bool {
	if m == nil || o == nil {
		return m == o
	}
	if m.Name != o.Name ||
		len(m.Sites) != len(o.Sites) || len(m.Bonds) != len(o.Bonds) || len(m.Symmetries) != len(o.Symmetries) {
		return false
	}
	for i, s := range m.Sites {
		t := o.Sites[i]
		if s.Label != t.Label || s.TwoS != t.TwoS || s.G != t.G || s.Group != t.Group ||
			s.SingleIon != t.SingleIon || !slices.Equal(s.Position, t.Position) {
			return false
		}
	}
	for i, b := range m.Bonds {
		if b != o.Bonds[i] {
			return false
		}
	}
	for i, s := range m.Symmetries {
		t := o.Symmetries[i]
		if s.Name != t.Name || !slices.Equal(s.Perm, t.Perm) {
			return false
		}
	}
	return true
}

func ptr(x float64) *float64 { return &x }
