package cluster

import "sort"

// Site is one spin of a validated cluster.
type Site struct {
	// Label names the site; unique within the cluster.
	Label string
	// TwoS is twice the spin: 1 for S = 1/2, 2 for S = 1, ...
	TwoS int
	// G is the g tensor, row-major: the moment is mu^mu = G[3*mu+nu] S^nu (mu_B).
	G [9]float64
	// Group is the user's free tag ("" when none).
	Group string
	// SingleIon is A of the term A (S^z)^2, in K (0 unless TwoS >= 2).
	SingleIon float64
	// Position is optional geometry (nil or 3 numbers).
	Position []float64
}

// Spin returns S.
func (s Site) Spin() float64 { return float64(s.TwoS) / 2 }

// LocalDimension returns 2S + 1.
func (s Site) LocalDimension() int { return s.TwoS + 1 }

// Bond couples sites A -> B (indices into Model.Sites); its term in H is
//
//	J (Sa^x Sb^x + Sa^y Sb^y) + Jz Sa^z Sb^z + D . (Sa x Sb) + Sa^mu T^{mu nu} Sb^nu
//
// with every energy in K.
type Bond struct {
	A, B int
	// J and Jz are the exchange constants in K.
	J, Jz float64
	// DM is the Dzyaloshinskii-Moriya vector in K, order A -> B.
	DM [3]float64
	// Tensor is the extra coupling T in K, row-major; zero when absent.
	Tensor [9]float64
}

// Coupling returns the bond's whole 3x3 coupling matrix K, row-major, so that
// the bond term is sum_{mu,nu} Sa^mu K[3*mu+nu] Sb^nu. With
// (Sa x Sb)^x = Sa^y Sb^z - Sa^z Sb^y (and cyclically),
//
//	K = diag(J, J, Jz) + T + [[0, Dz, -Dy], [-Dz, 0, Dx], [Dy, -Dx, 0]].
func (b Bond) Coupling() [9]float64 {
	k := b.Tensor
	k[0] += b.J
	k[4] += b.J
	k[8] += b.Jz
	dx, dy, dz := b.DM[0], b.DM[1], b.DM[2]
	k[1] += dz
	k[3] -= dz
	k[5] += dx
	k[7] -= dx
	k[6] += dy
	k[2] -= dy
	return k
}

// Symmetry is a checked site permutation: site i maps to Perm[i].
type Symmetry struct {
	Name string
	Perm []int
}

// Model is a validated cluster: labels resolved to indices, defaults applied.
// Build one with Load, FromProto or a builder; a Model from those is valid.
type Model struct {
	Name       string
	Sites      []Site
	Bonds      []Bond
	Symmetries []Symmetry
}

// Index returns the index of the site with the given label.
func (m *Model) Index(label string) (int, bool) {
	for i, s := range m.Sites {
		if s.Label == label {
			return i, true
		}
	}
	return -1, false
}

// Groups returns the distinct non-empty site groups, sorted.
func (m *Model) Groups() []string {
	seen := map[string]bool{}
	var out []string
	for _, s := range m.Sites {
		if s.Group != "" && !seen[s.Group] {
			seen[s.Group] = true
			out = append(out, s.Group)
		}
	}
	sort.Strings(out)
	return out
}

// Dimension returns the product of the local dimensions 2S_i + 1, and false
// when it does not fit in an int64.
func (m *Model) Dimension() (int64, bool) {
	d := int64(1)
	for _, s := range m.Sites {
		ld := int64(s.LocalDimension())
		if d > (1<<62)/ld {
			return 0, false
		}
		d *= ld
	}
	return d, true
}

// IsotropicG returns the scalar g times the identity matrix.
func IsotropicG(g float64) [9]float64 {
	return [9]float64{g, 0, 0, 0, g, 0, 0, 0, g}
}
