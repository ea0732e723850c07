package cluster

import (
	"fmt"
	"math"

	frustumv1 "frustum/proto/frustum/v1"
)

// The builders make the shapes users start from. Each returns a valid Model
// whose Symmetries hold every site permutation named in its doc that commutes
// with H, each verified with CheckPermutation. Every site has g = 2 unless
// said otherwise, and every energy is in K, with the Hamiltonian of the
// package doc. A builder panics on a programmer error: too few sites, or a
// spin or coupling that FromProto would refuse (NaN, spin 0.7, ...).

// Chain returns n sites "s0".."s{n-1}" of spin S = spin on a line (or a ring
// when periodic), with Heisenberg bonds
//
//	H = J sum_i S_i . S_{i+1}      (i = 0..n-2, and n-1 -> 0 when periodic)
//
// j is J in K. Its symmetries are the reflection i -> n-1-i and, when
// periodic, the translation i -> i+1 mod n. Chain panics if n < 2, or if
// periodic and n < 3.
func Chain(n int, spin float64, j float64, periodic bool) *Model {
	if n < 2 {
		panic(fmt.Sprintf("cluster.Chain: n = %d, want n >= 2", n))
	}
	if periodic && n < 3 {
		panic(fmt.Sprintf("cluster.Chain: periodic with n = %d, want n >= 3", n))
	}
	if !(spin > 0) {
		panic(fmt.Sprintf("cluster.Chain: spin %s, want a positive multiple of 1/2", formatFloat(spin)))
	}
	kind := "open"
	if periodic {
		kind = "periodic"
	}
	name := fmt.Sprintf("%s chain of %d spins %s", kind, n, spinName(spin))
	if periodic {
		// The ring of Ring, with the symmetries named as here.
		c, err := ringCluster(n, ChainParams{Spin: spin, J1: j, Name: name}, false)
		if err != nil {
			panic(fmt.Sprintf("cluster.Chain: %v", err))
		}
		c.Symmetries = append(c.Symmetries,
			symmetry("translation", n, func(i int) int { return (i + 1) % n }, chainLabel),
			symmetry("reflection", n, func(i int) int { return (n - i) % n }, chainLabel))
		return mustModel("Chain", c)
	}
	c := &frustumv1.Cluster{Name: name}
	for i := range n {
		c.Sites = append(c.Sites, &frustumv1.Site{Label: chainLabel(i), Spin: ptr(spin), Position: chainPosition(i, n, false)})
	}
	for i := range n - 1 {
		c.Bonds = append(c.Bonds, heisenberg(chainLabel(i), chainLabel(i+1), j))
	}
	c.Symmetries = append(c.Symmetries, symmetry("reflection", n, func(i int) int { return n - 1 - i }, chainLabel))
	return mustModel("Chain", c)
}

// ChainJ1J2 returns a ring of n spins 1/2, "s0".."s{n-1}", with nearest- and
// next-nearest-neighbour Heisenberg bonds
//
//	H = J1 sum_i S_i . S_{i+1} + J2 sum_i S_i . S_{i+2}      (indices mod n)
//
// j1 and j2 in K; the next-nearest bonds are there even when j2 = 0. At
// J2 = J1/2 and even n this is the Majumdar-Ghosh point, whose two dimer
// coverings are exact degenerate ground states of energy -3 n J1 / 8. Its
// symmetries are the translation i -> i+1 and the reflection i -> -i (mod
// n). ChainJ1J2 panics if n < 5 (for n = 4 the next-nearest bonds would
// repeat). Ring builds the same Hamiltonian with spin S, XXZ and DM terms.
func ChainJ1J2(n int, j1, j2 float64) *Model {
	if n < 5 {
		panic(fmt.Sprintf("cluster.ChainJ1J2: n = %d, want n >= 5", n))
	}
	c, err := ringCluster(n, ChainParams{J1: j1, J2: j2, Name: fmt.Sprintf("J1-J2 ring of %d spins 1/2", n)}, true)
	if err != nil {
		panic(fmt.Sprintf("cluster.ChainJ1J2: %v", err))
	}
	c.Symmetries = append(c.Symmetries,
		symmetry("translation", n, func(i int) int { return (i + 1) % n }, chainLabel),
		symmetry("reflection", n, func(i int) int { return (n - i) % n }, chainLabel))
	return mustModel("ChainJ1J2", c)
}

// Triangle returns three spins S = spin, "s0", "s1", "s2", at the corners of
// an equilateral triangle of unit side, with
//
//	H = J (S_0 . S_1 + S_1 . S_2 + S_2 . S_0)
//
// j is J in K. Its symmetries are the rotation "C3" (s0 -> s1 -> s2 -> s0)
// and the mirror "mirror" that swaps s1 and s2.
func Triangle(spin, j float64) *Model {
	c := &frustumv1.Cluster{Name: "triangle of spins " + spinName(spin)}
	r := 1 / math.Sqrt(3)
	for i := range 3 {
		phi := math.Pi/2 + 2*math.Pi*float64(i)/3
		c.Sites = append(c.Sites, &frustumv1.Site{Label: chainLabel(i), Spin: ptr(spin),
			Position: []float64{r * math.Cos(phi), r * math.Sin(phi), 0}})
	}
	for i := range 3 {
		c.Bonds = append(c.Bonds, heisenberg(chainLabel(i), chainLabel((i+1)%3), j))
	}
	c.Symmetries = append(c.Symmetries,
		symmetry("C3", 3, func(i int) int { return (i + 1) % 3 }, chainLabel),
		symmetry("mirror", 3, func(i int) int { return (3 - i) % 3 }, chainLabel))
	return mustModel("Triangle", c)
}

// Tetrahedron returns four spins S = spin, "s0".."s3", at the corners of a
// regular tetrahedron of unit edge, every pair bonded (the complete graph,
// six bonds):
//
//	H = J sum_{i<k} S_i . S_k = (J/2) (S_tot^2 - sum_i S_i^2)
//
// j is J in K. Its symmetries are "C3" (s0 fixed, s1 -> s2 -> s3 -> s1),
// "C2" (s0 <-> s1, s2 <-> s3) and "mirror" (s2 <-> s3).
func Tetrahedron(spin, j float64) *Model {
	c := &frustumv1.Cluster{Name: "tetrahedron of spins " + spinName(spin)}
	corners := [4][3]float64{{1, 1, 1}, {1, -1, -1}, {-1, 1, -1}, {-1, -1, 1}}
	scale := 1 / (2 * math.Sqrt2)
	for i, x := range corners {
		c.Sites = append(c.Sites, &frustumv1.Site{Label: chainLabel(i), Spin: ptr(spin),
			Position: []float64{scale * x[0], scale * x[1], scale * x[2]}})
	}
	for a := range 4 {
		for b := a + 1; b < 4; b++ {
			c.Bonds = append(c.Bonds, heisenberg(chainLabel(a), chainLabel(b), j))
		}
	}
	c.Symmetries = append(c.Symmetries,
		symmetry("C3", 4, func(i int) int { return [4]int{0, 2, 3, 1}[i] }, chainLabel),
		symmetry("C2", 4, func(i int) int { return [4]int{1, 0, 3, 2}[i] }, chainLabel),
		symmetry("mirror", 4, func(i int) int { return [4]int{0, 1, 3, 2}[i] }, chainLabel))
	return mustModel("Tetrahedron", c)
}

// MultimerParams are the parameters of DefectMultimer. A zero spin means
// 1/2, a zero g means 2.0 and an empty Name means "defect multimer"; zero
// couplings are kept as zero (the bonds are still there).
type MultimerParams struct {
	// CentreSpin is the spin of the centre "c"; HostSpin that of the six
	// triangle sites.
	CentreSpin, HostSpin float64
	// JPlanar is the exchange on the six in-triangle bonds, JDefect that
	// between the centre and each of the six triangle sites, in K.
	JPlanar, JDefect float64
	// GHost is the isotropic g of the triangle sites, GCentre that of the
	// centre.
	GHost, GCentre float64
	// DMPlanar is D^z in K of a DM vector (0, 0, D^z) on every in-triangle
	// bond, with the same circulation in both triangles: t1 -> t2 -> t3 -> t1
	// and b1 -> b2 -> b3 -> b1.
	DMPlanar float64
	// Name is the model's name.
	Name string
}

// DefectMultimer returns a centre spin "c" (group "impurity", at the origin)
// between two triangles of host spins, "t1", "t2", "t3" (group "top", at
// z = +1) and "b1", "b2", "b3" (group "bottom", at z = -1), with
//
//	H = JPlanar  sum_{triangle bonds a -> b} S_a . S_b
//	  + DMPlanar sum_{triangle bonds a -> b} (S_a x S_b)^z
//	  + JDefect  sum_{h in t1..b3} S_c . S_h
//
// energies in K, the triangle bonds running t1 -> t2 -> t3 -> t1 and
// b1 -> b2 -> b3 -> b1. Its sites are in the order c, t1, t2, t3, b1, b2,
// b3, and its symmetries are the rotation "C3" (c, t2, t3, t1, b2, b3, b1),
// the mirror "mirror-h" that swaps t_i and b_i (it keeps the circulation, so
// it holds with DM too) and, only when it holds (no DM), the vertical mirror
// "mirror-v" that swaps t2 <-> t3 and b2 <-> b3.
func DefectMultimer(p MultimerParams) *Model {
	orDefault := func(x, d float64) float64 {
		if x == 0 {
			return d
		}
		return x
	}
	name := p.Name
	if name == "" {
		name = "defect multimer"
	}
	c := &frustumv1.Cluster{Name: name}
	c.Sites = append(c.Sites, &frustumv1.Site{Label: "c", Spin: ptr(orDefault(p.CentreSpin, 0.5)),
		G: ptr(orDefault(p.GCentre, 2)), Group: "impurity", Position: []float64{0, 0, 0}})
	hosts := [2]struct {
		prefix, group string
		z             float64
	}{{"t", "top", 1}, {"b", "bottom", -1}}
	for _, h := range hosts {
		for k := range 3 {
			phi := 2 * math.Pi * float64(k) / 3
			c.Sites = append(c.Sites, &frustumv1.Site{Label: fmt.Sprintf("%s%d", h.prefix, k+1),
				Spin: ptr(orDefault(p.HostSpin, 0.5)), G: ptr(orDefault(p.GHost, 2)), Group: h.group,
				Position: []float64{math.Cos(phi), math.Sin(phi), h.z}})
		}
	}
	for _, h := range hosts {
		for k := range 3 {
			b := heisenberg(fmt.Sprintf("%s%d", h.prefix, k+1), fmt.Sprintf("%s%d", h.prefix, (k+1)%3+1), p.JPlanar)
			if p.DMPlanar != 0 {
				b.Dm = []float64{0, 0, p.DMPlanar}
			}
			c.Bonds = append(c.Bonds, b)
		}
	}
	for _, h := range hosts {
		for k := range 3 {
			c.Bonds = append(c.Bonds, heisenberg("c", fmt.Sprintf("%s%d", h.prefix, k+1), p.JDefect))
		}
	}
	label := func(i int) string { return c.Sites[i].Label }
	c.Symmetries = append(c.Symmetries,
		symmetry("C3", 7, func(i int) int { return [7]int{0, 2, 3, 1, 5, 6, 4}[i] }, label))
	m := mustModel("DefectMultimer", c)
	for _, s := range []Symmetry{
		{Name: "mirror-h", Perm: []int{0, 4, 5, 6, 1, 2, 3}},
		{Name: "mirror-v", Perm: []int{0, 1, 3, 2, 4, 6, 5}},
	} {
		if m.CheckPermutation(s.Perm) == nil {
			m.Symmetries = append(m.Symmetries, s)
		}
	}
	return m
}

// spinName writes a spin for a model's name: "1/2", "1", or the number.
func spinName(spin float64) string {
	if two := 2 * spin; two == math.Trunc(two) && two > 0 && two <= MaxTwoS {
		return spinString(int(two))
	}
	return formatFloat(spin)
}

func chainLabel(i int) string { return fmt.Sprintf("s%d", i) }

// chainPosition places site i of n on the x axis at unit spacing, or on a
// ring of unit nearest-neighbour distance.
func chainPosition(i, n int, ring bool) []float64 {
	if !ring {
		return []float64{float64(i), 0, 0}
	}
	r := 1 / (2 * math.Sin(math.Pi/float64(n)))
	phi := 2 * math.Pi * float64(i) / float64(n)
	return []float64{r * math.Cos(phi), r * math.Sin(phi), 0}
}

func heisenberg(a, b string, j float64) *frustumv1.Bond {
	return &frustumv1.Bond{A: a, B: b, Exchange: ptr(j)}
}

func symmetry(name string, n int, image func(int) int, label func(int) string) *frustumv1.Symmetry {
	s := &frustumv1.Symmetry{Name: name}
	for i := range n {
		s.Permutation = append(s.Permutation, label(image(i)))
	}
	return s
}

// mustModel validates a builder's cluster; a failure is a programmer error.
func mustModel(builder string, c *frustumv1.Cluster) *Model {
	m, err := FromProto(c)
	if err != nil {
		panic(fmt.Sprintf("cluster.%s: %v", builder, err))
	}
	return m
}
