package cluster

import (
	"fmt"
	"math"

	frustumv1 "frustum/proto/frustum/v1"
)

// The lattice builders make rings, ladders and patches of the triangular and
// kagome lattices, periodic or with open edges, and a defect spin embedded in
// a kagome patch. Unlike the builders of builders.go they take their sizes
// and couplings from a caller who may have read them from a user, so they
// validate them and return a *ParamError naming the bad one rather than
// panic. Every model they return is valid (FromProto(m.ToProto()) accepts it)
// and carries in Symmetries the translations and point symmetries named in
// each doc, each verified with CheckPermutation; a symmetry that a coupling
// breaks (a DM vector reversed by a mirror) is left out. Automorphisms finds
// the whole group, which on small patches can be larger than the lattice's
// own.
//
// Zero values are defaults: a zero spin means 1/2, a zero g means 2.0 and an
// empty Name a name that describes the model. Couplings are in K and kept as
// given, zero included, except where a doc says that a zero coupling adds no
// bonds. Positions are in units of the nearest-neighbour distance.

// ParamError says that one parameter of a lattice builder is wrong, and why.
type ParamError struct {
	// Param is the name of the argument or of the field of the parameters
	// ("L1", "Spin", "JDefect"), or two names joined by ", " when their
	// combination is wrong ("L1, L2": too many sites).
	Param  string
	Reason string
}

// Error returns Param + ": " + Reason.
func (e *ParamError) Error() string { return e.Param + ": " + e.Reason }

func paramError(param, format string, args ...any) error {
	return &ParamError{Param: param, Reason: fmt.Sprintf(format, args...)}
}

// ChainParams are the parameters of Ring.
type ChainParams struct {
	// Spin is the spin S of every site (0 means 1/2); G its isotropic g (0
	// means 2).
	Spin, G float64
	// J1 is the nearest-neighbour exchange, J2 the next-nearest one, in K.
	// With J2 = 0 (and, for XXZ, Jz2 = 0) there are no next-nearest bonds.
	J1, J2 float64
	// XXZ makes the couplings anisotropic: when it is set, Jz1 and Jz2 are
	// the zz exchange of the nearest and next-nearest bonds (zero included:
	// the XX ring); when it is not, Jz = J on every bond and Jz1, Jz2 must
	// be zero.
	XXZ      bool
	Jz1, Jz2 float64
	// DM is a Dzyaloshinskii-Moriya vector in K on every nearest-neighbour
	// bond, in the order i -> i+1.
	DM [3]float64
	// Name is the model's name.
	Name string
}

// Ring returns n sites "s0".."s{n-1}" on a ring of unit nearest-neighbour
// distance in the xy plane, with
//
//	H = sum_i [ J1 (S_i^x S_{i+1}^x + S_i^y S_{i+1}^y) + Jz1 S_i^z S_{i+1}^z + DM . (S_i x S_{i+1}) ]
//	  + sum_i [ J2 (S_i^x S_{i+2}^x + S_i^y S_{i+2}^y) + Jz2 S_i^z S_{i+2}^z ]
//
// indices mod n, Jz = J unless XXZ: n nearest-neighbour bonds i -> i+1 (in
// the order i = 0..n-1) and, when J2 or Jz2 is nonzero, n next-nearest bonds
// i -> i+2 after them. Its symmetries are the translation "T1" (i -> i+1) and,
// unless DM is nonzero (the reflection reverses every bond, so it would need
// -DM), the reflection "R" (i -> -i, fixing s0). Ring needs n >= 3, and
// n >= 5 with next-nearest bonds (for n = 4 the bonds i -> i+2 and
// i+2 -> i would repeat).
//
// Chain(n, spin, j, true) and ChainJ1J2 are the same Hamiltonians, with
// their own names for the symmetries.
func Ring(n int, p ChainParams) (*Model, error) {
	c, err := ringCluster(n, p, p.J2 != 0 || p.Jz2 != 0)
	if err != nil {
		return nil, err
	}
	return finishModel("Ring", c, []candidate{
		{name: "T1", always: true, image: func(i int) (int, bool) { return (i + 1) % n, true }},
		{name: "R", always: p.DM == [3]float64{}, image: func(i int) (int, bool) { return (n - i) % n, true }},
	})
}

// ringCluster makes the sites and bonds of Ring, Chain(periodic) and
// ChainJ1J2, without symmetries.
func ringCluster(n int, p ChainParams, nextNearest bool) (*frustumv1.Cluster, error) {
	spin, g, err := spinAndG("Spin", p.Spin, "G", p.G)
	if err != nil {
		return nil, err
	}
	if err := finite([]string{"J1", "J2", "Jz1", "Jz2", "DM[0]", "DM[1]", "DM[2]"}, p.J1, p.J2, p.Jz1, p.Jz2, p.DM[0], p.DM[1], p.DM[2]); err != nil {
		return nil, err
	}
	if !p.XXZ && (p.Jz1 != 0 || p.Jz2 != 0) {
		return nil, paramError("XXZ", "is false, so Jz = J on every bond, but Jz1 = %s and Jz2 = %s: set XXZ to use them", formatFloat(p.Jz1), formatFloat(p.Jz2))
	}
	switch {
	case n < 3:
		return nil, paramError("n", "a ring needs n >= 3 sites, not %d", n)
	case nextNearest && n < 5:
		return nil, paramError("n", "a ring with next-nearest bonds needs n >= 5, not %d (on %d sites the bonds i -> i+2 join sites that are already bonded or the same)", n, n)
	}
	if err := checkDimension("n", fmt.Sprintf("a ring of %d sites", n), n, spin); err != nil {
		return nil, err
	}
	jz1, jz2 := p.J1, p.J2
	if p.XXZ {
		jz1, jz2 = p.Jz1, p.Jz2
	}
	name := p.Name
	if name == "" {
		kind := "ring"
		if nextNearest {
			kind = "J1-J2 ring"
		}
		name = fmt.Sprintf("%s of %d spins %s", kind, n, spinName(spin))
	}
	c := &frustumv1.Cluster{Name: name}
	for i := range n {
		c.Sites = append(c.Sites, &frustumv1.Site{Label: chainLabel(i), Spin: ptr(spin), G: ptr(g), Position: chainPosition(i, n, true)})
	}
	for i := range n {
		c.Bonds = append(c.Bonds, xxz(chainLabel(i), chainLabel((i+1)%n), p.J1, jz1, p.DM))
	}
	if nextNearest {
		for i := range n {
			c.Bonds = append(c.Bonds, xxz(chainLabel(i), chainLabel((i+2)%n), p.J2, jz2, [3]float64{}))
		}
	}
	return c, nil
}

// LadderParams are the parameters of Ladder.
type LadderParams struct {
	// Spin is the spin S of every site (0 means 1/2); G its isotropic g (0
	// means 2).
	Spin, G float64
	// JLeg is the Heisenberg exchange along the legs, JRung that along the
	// rungs, in K.
	JLeg, JRung float64
	// Name is the model's name.
	Name string
}

// Ladder returns legs x rungs sites "s{r}_{l}" (rung r = 0..rungs-1, leg
// l = 0..legs-1, site index r*legs + l, position (r, l, 0)) with
//
//	H = JLeg  sum_{l, r} S_{r,l} . S_{r+1,l}  +  JRung sum_{l < legs-1, r} S_{r,l} . S_{r,l+1}
//
// the legs running along r, open or periodic (r + 1 mod rungs), and the
// rungs always open (legs > 2 is a strip, not a tube). Its bonds are the leg
// bonds, leg by leg, legs*(rungs-1) of them when open and legs*rungs when
// periodic, then the (legs-1)*rungs rung bonds. Its symmetries are, when
// periodic, the translation "T1" (r -> r+1), and always the reflection "R"
// along the legs (r -> -r mod rungs when periodic, rungs-1-r when open; not
// with a single rung) and the swap of the legs "Rleg" (l -> legs-1-l).
// Ladder needs legs >= 2, rungs >= 1, and rungs >= 3 when periodic.
//
// An open ladder, and a periodic one with an even number of rungs, is
// bipartite, by the colour (r + l) mod 2; a periodic ladder with an odd
// number of rungs is frustrated.
func Ladder(legs, rungs int, p LadderParams, periodic bool) (*Model, error) {
	spin, g, err := spinAndG("Spin", p.Spin, "G", p.G)
	if err != nil {
		return nil, err
	}
	if err := finite([]string{"JLeg", "JRung"}, p.JLeg, p.JRung); err != nil {
		return nil, err
	}
	switch {
	case legs < 2:
		return nil, paramError("legs", "a ladder needs legs >= 2, not %d", legs)
	case rungs < 1:
		return nil, paramError("rungs", "a ladder needs rungs >= 1, not %d", rungs)
	case periodic && rungs < 3:
		return nil, paramError("rungs", "a periodic ladder needs rungs >= 3, not %d (with 2 rungs the leg bonds r -> r+1 and r+1 -> r join the same two sites)", rungs)
	}
	kind := "open"
	if periodic {
		kind = "periodic"
	}
	shape := fmt.Sprintf("%s %d-leg ladder of %d rungs", kind, legs, rungs)
	if err := checkDimension("legs, rungs", "a "+shape, legs*rungs, spin); err != nil {
		return nil, err
	}
	name := p.Name
	if name == "" {
		name = fmt.Sprintf("%s, spins %s", shape, spinName(spin))
	}
	label := func(r, l int) string { return fmt.Sprintf("s%d_%d", r, l) }
	c := &frustumv1.Cluster{Name: name}
	for r := range rungs {
		for l := range legs {
			c.Sites = append(c.Sites, &frustumv1.Site{Label: label(r, l), Spin: ptr(spin), G: ptr(g),
				Position: []float64{float64(r), float64(l), 0}})
		}
	}
	last := rungs - 1
	if periodic {
		last = rungs
	}
	for l := range legs {
		for r := range last {
			c.Bonds = append(c.Bonds, heisenberg(label(r, l), label((r+1)%rungs, l), p.JLeg))
		}
	}
	for r := range rungs {
		for l := range legs - 1 {
			c.Bonds = append(c.Bonds, heisenberg(label(r, l), label(r, l+1), p.JRung))
		}
	}
	site := func(r, l int) int { return r*legs + l }
	cands := []candidate{
		{name: "R", always: true, image: func(i int) (int, bool) {
			r, l := i/legs, i%legs
			if periodic {
				return site((rungs-r)%rungs, l), true
			}
			return site(rungs-1-r, l), true
		}},
		{name: "Rleg", always: true, image: func(i int) (int, bool) { return site(i/legs, legs-1-i%legs), true }},
	}
	if periodic {
		cands = append([]candidate{{name: "T1", always: true, image: func(i int) (int, bool) {
			return site((i/legs+1)%rungs, i%legs), true
		}}}, cands...)
	}
	return finishModel("Ladder", c, cands)
}

// LatticeParams are the parameters of Triangular and Kagome.
type LatticeParams struct {
	// Spin is the spin S of every site (0 means 1/2); G its isotropic g (0
	// means 2).
	Spin, G float64
	// J is the nearest-neighbour exchange in K; with XXZ set, Jz is the zz
	// exchange (zero included), and without it Jz = J and Jz must be zero.
	J   float64
	XXZ bool
	Jz  float64
	// DM is D^z in K of a DM vector (0, 0, D^z) on every bond of the kagome
	// lattice, each bond oriented counterclockwise around its triangle (up
	// and down triangles alike), the pattern that the lattice's rotations
	// keep. Triangular refuses it: every bond centre of the triangular
	// lattice is an inversion centre, where a DM vector vanishes (Moriya's
	// rules).
	DM float64
	// Name is the model's name.
	Name string
}

// Triangular returns a patch of L1 x L2 sites of the triangular lattice,
// "s{i}_{j}" at r = i a1 + j a2 with a1 = (1, 0, 0), a2 = (1/2, sqrt(3)/2, 0),
// site index i + L1 j, and the nearest-neighbour exchange
//
//	H = sum_<kl> [ J (S_k^x S_l^x + S_k^y S_l^y) + Jz S_k^z S_l^z ]
//
// each bond once, from site (i, j) to (i+1, j), (i, j+1) and (i-1, j+1), in
// that order for each site. On a torus (periodic; both indices mod L)
// that is 3 L1 L2 bonds, z N / 2 with the coordination z = 6, and 2 L1 L2
// triangles; it needs L1, L2 >= 3, since with L = 2 a site's neighbours at
// +a and -a are one site and with L = 1 a site would be its own neighbour.
// An open patch (a rhombus) has (L1-1) L2 + L1 (L2-1) + (L1-1)(L2-1) bonds
// and needs L1 L2 >= 2.
//
// Its symmetries: on a torus the translations "T1" (i -> i+1) and "T2"
// (j -> j+1), the inversion "C2" through s0_0 and, when L1 = L2, the
// rotation "C6" by 60 degrees about s0_0 ((i, j) -> (-j, i+j)) and the
// mirror "R" through s0_0 along a1 + a2 ((i, j) -> (j, i)): all of p6mm on a
// torus of L x L cells, 12 L^2 elements. (The bond graph can have more: the
// 3 x 3 torus is the complete tripartite graph K_{3,3,3}, whose 1296
// automorphisms Automorphisms finds.) An open patch has the inversion
// "C2" through its centre ((i, j) -> (L1-1-i, L2-1-j)) and, when L1 = L2,
// the mirror "R" ((i, j) -> (j, i)).
func Triangular(L1, L2 int, p LatticeParams, periodic bool) (*Model, error) {
	spin, g, jz, err := latticeParams(p)
	if err != nil {
		return nil, err
	}
	if p.DM != 0 {
		return nil, paramError("DM", "is %s, but the triangular builder has no DM term: every bond centre of the triangular lattice is an inversion centre, where a DM vector vanishes", formatFloat(p.DM))
	}
	lat := patch{L1: L1, L2: L2, periodic: periodic}
	if err := lat.check("triangular", 3, 1); err != nil {
		return nil, err
	}
	if !periodic && L1*L2 < 2 {
		return nil, paramError("L1, L2", "an open triangular patch of 1 x 1 cells is a single site with no bonds: give L1 L2 >= 2")
	}
	shape := lat.describe("triangular")
	if err := checkDimension("L1, L2", "a "+shape, L1*L2, spin); err != nil {
		return nil, err
	}
	name := p.Name
	if name == "" {
		name = fmt.Sprintf("%s, %d spins %s", shape, L1*L2, spinName(spin))
	}
	label := func(i, j int) string { return fmt.Sprintf("s%d_%d", i, j) }
	c := &frustumv1.Cluster{Name: name}
	for j := range L2 {
		for i := range L1 {
			c.Sites = append(c.Sites, &frustumv1.Site{Label: label(i, j), Spin: ptr(spin), G: ptr(g),
				Position: []float64{float64(i) + float64(j)/2, float64(j) * math.Sqrt(3) / 2, 0}})
		}
	}
	for j := range L2 {
		for i := range L1 {
			for _, d := range [3][2]int{{1, 0}, {0, 1}, {-1, 1}} {
				if k, ok := lat.cell(i+d[0], j+d[1]); ok {
					c.Bonds = append(c.Bonds, xxz(label(i, j), c.Sites[k].Label, p.J, jz, [3]float64{}))
				}
			}
		}
	}
	site := func(i, j int) (int, bool) { return lat.cell(i, j) }
	at := func(k int) (int, int) { return k % L1, k / L1 }
	var cands []candidate
	if periodic {
		cands = []candidate{
			{name: "T1", always: true, image: func(k int) (int, bool) { i, j := at(k); return site(i+1, j) }},
			{name: "T2", always: true, image: func(k int) (int, bool) { i, j := at(k); return site(i, j+1) }},
			{name: "C2", always: true, image: func(k int) (int, bool) { i, j := at(k); return site(-i, -j) }},
		}
		if L1 == L2 {
			cands = append(cands,
				candidate{name: "C6", always: true, image: func(k int) (int, bool) { i, j := at(k); return site(-j, i+j) }},
				candidate{name: "R", always: true, image: func(k int) (int, bool) { i, j := at(k); return site(j, i) }})
		}
	} else {
		cands = []candidate{{name: "C2", always: true, image: func(k int) (int, bool) { i, j := at(k); return site(L1-1-i, L2-1-j) }}}
		if L1 == L2 {
			cands = append(cands, candidate{name: "R", always: true, image: func(k int) (int, bool) { i, j := at(k); return site(j, i) }})
		}
	}
	return finishModel("Triangular", c, cands)
}

// Kagome returns a patch of L1 x L2 unit cells of the kagome lattice, three
// sites per cell. With the nearest-neighbour distance 1 and a1 = (2, 0, 0),
// a2 = (1, sqrt(3), 0), cell (i, j) at R = i a1 + j a2 holds
//
//	"u{i}_{j}" at R,  "v{i}_{j}" at R + a1/2,  "w{i}_{j}" at R + a2/2
//
// (site index 3 (i + L1 j) + 0, 1, 2), the corners of its up triangle. The
// Hamiltonian is
//
//	H = sum_<kl> [ J (S_k^x S_l^x + S_k^y S_l^y) + Jz S_k^z S_l^z + DM (S_k x S_l)^z ]
//
// each bond once and oriented counterclockwise around its triangle: for each
// cell, the up triangle u -> v -> w -> u, then the down-triangle bonds
// v(i,j) -> w(i+1,j-1), w(i,j) -> u(i,j+1) and u(i+1,j) -> v(i,j) (the down
// triangle v(i,j), w(i+1,j-1), u(i+1,j)). On a torus (periodic; cell
// indices mod L) there are N = 3 L1 L2 sites, 2N bonds (z N / 2, z = 4) and
// 2 L1 L2 triangles, every bond in one of them; it needs L1, L2 >= 2 (with
// L = 1 a down-triangle bond would repeat an up-triangle one). An open patch
// has 3 L1 L2 + (L1-1) L2 + L1 (L2-1) + (L1-1)(L2-1) bonds.
//
// Its symmetries, written in the half-cell coordinates (m, n) of a site at
// m a1/2 + n a2/2: on a torus the translations "T1" (m -> m+2) and "T2"
// (n -> n+2), the inversion "C2" through the centre of a hexagon
// ((m, n) -> (2-m, 2-n)) and, when L1 = L2, the rotation "C6" by 60 degrees
// about that centre ((m, n) -> (2-n, m+n-1)) and, unless DM is nonzero, the
// mirror "R" ((m, n) -> (n, m)), which reverses the circulation: with DM
// that is the group 6 L^2 of translations and rotations, without it p6mm,
// 12 L^2 elements. (The 3 x 3 torus has twice that: its bond graph is the
// line graph of the Pappus graph, with 216 automorphisms.) An open patch has
// the mirror "R" when L1 = L2 and DM is zero.
func Kagome(L1, L2 int, p LatticeParams, periodic bool) (*Model, error) {
	spin, g, jz, err := latticeParams(p)
	if err != nil {
		return nil, err
	}
	lat := patch{L1: L1, L2: L2, periodic: periodic}
	if err := lat.check("kagome", 2, 1); err != nil {
		return nil, err
	}
	shape := lat.describe("kagome")
	if err := checkDimension("L1, L2", "a "+shape, 3*L1*L2, spin); err != nil {
		return nil, err
	}
	name := p.Name
	if name == "" {
		name = fmt.Sprintf("%s, %d spins %s", shape, 3*L1*L2, spinName(spin))
	}
	c := &frustumv1.Cluster{Name: name}
	c.Sites = kagomeSites(lat, "", spin, g, 0, [2]float64{})
	c.Bonds = kagomeBonds(lat, c.Sites, 0, p.J, jz, p.DM)
	var cands []candidate
	if periodic {
		cands = []candidate{
			{name: "T1", always: true, image: lat.halfMap(0, func(m, n int) (int, int) { return m + 2, n })},
			{name: "T2", always: true, image: lat.halfMap(0, func(m, n int) (int, int) { return m, n + 2 })},
			{name: "C2", always: true, image: lat.halfMap(0, func(m, n int) (int, int) { return 2 - m, 2 - n })},
		}
		if L1 == L2 {
			cands = append(cands, candidate{name: "C6", always: true, image: lat.halfMap(0, func(m, n int) (int, int) { return 2 - n, m + n - 1 })})
		}
	}
	if L1 == L2 {
		cands = append(cands, candidate{name: "R", always: p.DM == 0, image: lat.halfMap(0, func(m, n int) (int, int) { return n, m })})
	}
	return finishModel("Kagome", c, cands)
}

// KagomeDefectParams are the parameters of KagomeDefect.
type KagomeDefectParams struct {
	// HostSpin is the spin of the kagome sites, CentreSpin that of the
	// defect (0 means 1/2); GHost and GCentre their isotropic g (0 means 2).
	HostSpin, CentreSpin float64
	GHost, GCentre       float64
	// J is the Heisenberg exchange on the kagome bonds, DM the D^z on them
	// (oriented as in Kagome), JDefect the Heisenberg exchange between the
	// defect and each corner of its triangles, in K.
	J, DM, JDefect float64
	// Layers is 1 (one kagome layer, the defect on one side of a triangle)
	// or 2 (the defect between a triangle of the top layer and the triangle
	// right below it in the bottom layer); 0 means 1.
	Layers int
	// Open gives the layers open edges; by default they are periodic.
	Open bool
	// Name is the model's name.
	Name string
}

// KagomeDefect returns a defect spin "c" (group "impurity", site 0, at the
// origin) coupled to the three corners of an up triangle of a kagome layer
// patch of L1 x L2 cells, or, with two layers, to that triangle in the top
// layer and to the one below it in the bottom layer:
//
//	H = sum over layers, <kl> [ J S_k . S_l + DM (S_k x S_l)^z ]
//	  + JDefect sum_{h in the defect's triangles} S_c . S_h
//
// with no bonds between the layers but through the defect. The layers are
// stacked straight above each other (AA), as in the heptamer of
// DefectMultimer, whose two triangles they extend: the top layer's sites
// are "t" + the label of Kagome ("tu0_0", ...) at z = +1, the bottom
// layer's "b" + that label at z = -1, all in group "host", in the order c,
// top, bottom and within a layer as in Kagome; the defect's triangle is
// that of cell (0, 0), centred on the z axis. The layer bonds come first,
// as in Kagome and layer by layer, then the defect bonds c -> tu0_0, tv0_0,
// tw0_0 (and then to bu0_0, bv0_0, bw0_0).
//
// The layers are periodic unless Open is set. A periodic layer is the
// choice that keeps every host site fourfold coordinated, like in the bulk;
// its price is that the defect repeats with the patch, one per L1 x L2
// cells. An open patch has one defect but under-coordinated edges. With
// L1 = L2 = 1 and Open, one layer is the defect and one triangle, and two
// layers are the heptamer of DefectMultimer (with JPlanar = J, DMPlanar =
// DM; only the labels and groups differ).
//
// Its symmetries fix the defect: the rotation "C3" by 120 degrees about the
// axis through the defect (on a torus with L1 = L2, and on the single open
// cell), in the half-cell coordinates of Kagome (m, n) -> (1-m-n, m); the
// mirror "R" (m, n) -> (n, m), which fixes tu0_0 and swaps tv0_0 and tw0_0,
// when L1 = L2 and DM is zero; and with two layers the swap of the layers
// "Rz" (z -> -z), which keeps the circulation, DM or not. Since the layers
// meet only at the defect, each can also be turned and mirrored on its own:
// Automorphisms finds (3m x 3m) x| Z_2, 72 elements without DM (288 on the
// 3 x 3 torus, whose layers fix a triangle with 12).
func KagomeDefect(L1, L2 int, p KagomeDefectParams) (*Model, error) {
	hostSpin, gHost, err := spinAndG("HostSpin", p.HostSpin, "GHost", p.GHost)
	if err != nil {
		return nil, err
	}
	centreSpin, gCentre, err := spinAndG("CentreSpin", p.CentreSpin, "GCentre", p.GCentre)
	if err != nil {
		return nil, err
	}
	if err := finite([]string{"J", "DM", "JDefect"}, p.J, p.DM, p.JDefect); err != nil {
		return nil, err
	}
	layers := p.Layers
	if layers == 0 {
		layers = 1
	}
	if layers != 1 && layers != 2 {
		return nil, paramError("Layers", "is %d: give 1 (one kagome layer) or 2 (the defect between two layers)", p.Layers)
	}
	lat := patch{L1: L1, L2: L2, periodic: !p.Open}
	if err := lat.check("kagome", 2, 1); err != nil {
		return nil, err
	}
	hosts := 3 * L1 * L2 * layers
	layerWord := "one layer"
	if layers == 2 {
		layerWord = "two layers"
	}
	shape := fmt.Sprintf("defect in %s of %s", layerWord, lat.describe("kagome"))
	log2 := float64(hosts)*math.Log2(2*hostSpin+1) + math.Log2(2*centreSpin+1)
	if log2 > MaxDimensionLog2 {
		return nil, paramError("L1, L2", "a %s has %d host spins %s and a spin %s: a Hilbert space of dimension 2^%.1f, more than the limit of 2^%d",
			shape, hosts, spinName(hostSpin), spinName(centreSpin), log2, MaxDimensionLog2)
	}
	name := p.Name
	if name == "" {
		name = fmt.Sprintf("spin %s %s, spins %s", spinName(centreSpin), shape, spinName(hostSpin))
	}
	c := &frustumv1.Cluster{Name: name}
	c.Sites = append(c.Sites, &frustumv1.Site{Label: "c", Spin: ptr(centreSpin), G: ptr(gCentre), Group: "impurity", Position: []float64{0, 0, 0}})
	// The defect's triangle, the up triangle of cell (0, 0), is centred at
	// half-cell coordinates (1/3, 1/3).
	shift := [2]float64{-0.5, -math.Sqrt(3) / 6}
	prefixes := []string{"t", "b"}[:layers]
	heights := []float64{1, -1}
	for l, prefix := range prefixes {
		sites := kagomeSites(lat, prefix, hostSpin, gHost, heights[l], shift)
		for _, s := range sites {
			s.Group = "host"
		}
		c.Sites = append(c.Sites, sites...)
	}
	perLayer := 3 * L1 * L2
	for l := range prefixes {
		c.Bonds = append(c.Bonds, kagomeBonds(lat, c.Sites, 1+l*perLayer, p.J, p.J, p.DM)...)
	}
	for l := range prefixes {
		for s := range 3 {
			c.Bonds = append(c.Bonds, heisenberg("c", c.Sites[1+l*perLayer+s].Label, p.JDefect))
		}
	}
	// Maps of one layer, applied to each and fixing the defect.
	inLayers := func(f func(m, n int) (int, int), swap bool) func(int) (int, bool) {
		return func(k int) (int, bool) {
			if k == 0 {
				return 0, true
			}
			l, s := (k-1)/perLayer, (k-1)%perLayer
			if swap {
				l = 1 - l
			}
			t, ok := lat.halfMap(0, f)(s)
			return 1 + l*perLayer + t, ok
		}
	}
	var cands []candidate
	if (!p.Open && L1 == L2) || (L1 == 1 && L2 == 1) {
		cands = append(cands, candidate{name: "C3", always: true, image: inLayers(func(m, n int) (int, int) { return 1 - m - n, m }, false)})
	}
	if L1 == L2 {
		cands = append(cands, candidate{name: "R", always: p.DM == 0, image: inLayers(func(m, n int) (int, int) { return n, m }, false)})
	}
	if layers == 2 {
		cands = append(cands, candidate{name: "Rz", always: true, image: inLayers(func(m, n int) (int, int) { return m, n }, true)})
	}
	return finishModel("KagomeDefect", c, cands)
}

// patch is an L1 x L2 patch of cells, periodic or open.
type patch struct {
	L1, L2   int
	periodic bool
}

// check refuses sizes too small for the lattice: a torus needs at least
// minPeriodic cells along each side, an open patch minOpen.
func (p patch) check(lattice string, minPeriodic, minOpen int) error {
	if p.periodic {
		for _, side := range []struct {
			name string
			l    int
		}{{"L1", p.L1}, {"L2", p.L2}} {
			if side.l < minPeriodic {
				why := "a site would be bonded to its own periodic image"
				if side.l > 1 {
					why = "periodic images would bond two sites twice"
				}
				return paramError(side.name, "a periodic %s patch needs %s >= %d, not %d (%s)", lattice, side.name, minPeriodic, side.l, why)
			}
		}
		return nil
	}
	if p.L1 < minOpen {
		return paramError("L1", "an open %s patch needs L1 >= %d, not %d", lattice, minOpen, p.L1)
	}
	if p.L2 < minOpen {
		return paramError("L2", "an open %s patch needs L2 >= %d, not %d", lattice, minOpen, p.L2)
	}
	return nil
}

func (p patch) describe(lattice string) string {
	kind := "open"
	if p.periodic {
		kind = "periodic"
	}
	return fmt.Sprintf("%s %s patch of %d x %d cells", kind, lattice, p.L1, p.L2)
}

// cell returns the index i + L1 j of cell (i, j), wrapped on a torus, and
// false when an open patch has no such cell.
func (p patch) cell(i, j int) (int, bool) {
	if p.periodic {
		i, j = mod(i, p.L1), mod(j, p.L2)
	} else if i < 0 || i >= p.L1 || j < 0 || j >= p.L2 {
		return -1, false
	}
	return i + p.L1*j, true
}

// kagomeSite returns the index (from offset) of the kagome site at half-cell
// coordinates (m, n), and false when there is none: (odd, odd) is the centre
// of a hexagon, and an open patch may not have the cell.
func (p patch) kagomeSite(offset, m, n int) (int, bool) {
	i, j := floorDiv(m, 2), floorDiv(n, 2)
	s := 0
	switch {
	case mod(m, 2) == 1 && mod(n, 2) == 1:
		return -1, false
	case mod(m, 2) == 1:
		s = 1
	case mod(n, 2) == 1:
		s = 2
	}
	k, ok := p.cell(i, j)
	return offset + 3*k + s, ok
}

// halfMap turns a map of half-cell coordinates into a map of the kagome
// site indices offset.. of the patch.
func (p patch) halfMap(offset int, f func(m, n int) (int, int)) func(int) (int, bool) {
	return func(k int) (int, bool) {
		k -= offset
		cell, s := k/3, k%3
		m, n := 2*(cell%p.L1), 2*(cell/p.L1)
		switch s {
		case 1:
			m++
		case 2:
			n++
		}
		m, n = f(m, n)
		return p.kagomeSite(offset, m, n)
	}
}

// kagomeSites returns the sites of a kagome patch, labels prefixed, in the
// plane z with the xy positions shifted.
func kagomeSites(p patch, prefix string, spin, g, z float64, shift [2]float64) []*frustumv1.Site {
	var out []*frustumv1.Site
	for j := range p.L2 {
		for i := range p.L1 {
			for s, letter := range []string{"u", "v", "w"} {
				m, n := 2*i, 2*j
				switch s {
				case 1:
					m++
				case 2:
					n++
				}
				x := float64(m) + float64(n)/2 + shift[0]
				y := float64(n)*math.Sqrt(3)/2 + shift[1]
				out = append(out, &frustumv1.Site{Label: fmt.Sprintf("%s%s%d_%d", prefix, letter, i, j),
					Spin: ptr(spin), G: ptr(g), Position: []float64{x, y, z}})
			}
		}
	}
	return out
}

// kagomeBonds returns the bonds of the kagome patch whose sites are
// sites[offset:], in the order and orientation of Kagome's doc.
func kagomeBonds(p patch, sites []*frustumv1.Site, offset int, j, jz, dm float64) []*frustumv1.Bond {
	var out []*frustumv1.Bond
	d := [3]float64{0, 0, dm}
	add := func(a, b int, ok bool) {
		if ok {
			out = append(out, xxz(sites[a].Label, sites[b].Label, j, jz, d))
		}
	}
	for cj := range p.L2 {
		for ci := range p.L1 {
			m, n := 2*ci, 2*cj
			u, _ := p.kagomeSite(offset, m, n)
			v, _ := p.kagomeSite(offset, m+1, n)
			w, _ := p.kagomeSite(offset, m, n+1)
			add(u, v, true)
			add(v, w, true)
			add(w, u, true)
			wNext, ok := p.kagomeSite(offset, m+2, n-1) // w(i+1, j-1)
			add(v, wNext, ok)
			uUp, ok := p.kagomeSite(offset, m, n+2) // u(i, j+1)
			add(w, uUp, ok)
			uNext, ok := p.kagomeSite(offset, m+2, n) // u(i+1, j)
			add(uNext, v, ok)
		}
	}
	return out
}

// candidate is a symmetry a builder proposes: image maps site indices, and
// returns false when a site has no image in the model. When always is set
// the symmetry holds by construction, and a failure is a bug.
type candidate struct {
	name   string
	image  func(int) (int, bool)
	always bool
}

// finishModel validates a builder's cluster and adds the candidate
// symmetries that hold (identities left out).
func finishModel(builder string, c *frustumv1.Cluster, cands []candidate) (*Model, error) {
	m, err := FromProto(c)
	if err != nil {
		// The parameters were checked; this is a bug.
		return nil, fmt.Errorf("cluster.%s built an invalid model: %w", builder, err)
	}
	n := len(m.Sites)
	for _, cs := range cands {
		perm := make(Permutation, n)
		why := ""
		for i := range perm {
			p, ok := cs.image(i)
			if !ok {
				why = fmt.Sprintf("site %s has no image", m.Sites[i].Label)
				break
			}
			perm[i] = p
		}
		if why == "" {
			if err := m.CheckPermutation(perm); err != nil {
				why = err.Error()
			}
		}
		switch {
		case why != "" && cs.always:
			panic(fmt.Sprintf("cluster.%s: symmetry %s of %q does not hold: %s", builder, cs.name, m.Name, why))
		case why == "" && !perm.IsIdentity():
			m.Symmetries = append(m.Symmetries, Symmetry{Name: cs.name, Perm: perm})
		}
	}
	return m, nil
}

// spinAndG applies the defaults to a spin and a g and checks them.
func spinAndG(spinParam string, spin float64, gParam string, g float64) (float64, float64, error) {
	if err := finite([]string{spinParam, gParam}, spin, g); err != nil {
		return 0, 0, err
	}
	if spin == 0 {
		spin = 0.5
	}
	if spin < 0 || 2*spin != math.Trunc(2*spin) {
		return 0, 0, paramError(spinParam, "%s is not a positive multiple of 1/2", formatFloat(spin))
	}
	if 2*spin > MaxTwoS {
		return 0, 0, paramError(spinParam, "%s is too large: the limit is 2S <= %d", formatFloat(spin), MaxTwoS)
	}
	if g == 0 {
		g = 2
	}
	return spin, g, nil
}

func latticeParams(p LatticeParams) (spin, g, jz float64, err error) {
	spin, g, err = spinAndG("Spin", p.Spin, "G", p.G)
	if err != nil {
		return 0, 0, 0, err
	}
	if err := finite([]string{"J", "Jz", "DM"}, p.J, p.Jz, p.DM); err != nil {
		return 0, 0, 0, err
	}
	if !p.XXZ && p.Jz != 0 {
		return 0, 0, 0, paramError("XXZ", "is false, so Jz = J, but Jz = %s: set XXZ to use it", formatFloat(p.Jz))
	}
	jz = p.J
	if p.XXZ {
		jz = p.Jz
	}
	return spin, g, jz, nil
}

// finite refuses the first NaN or infinite value, naming it.
func finite(names []string, xs ...float64) error {
	for k, x := range xs {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return paramError(names[k], "%s is not a finite number", formatFloat(x))
		}
	}
	return nil
}

// checkDimension refuses a model of sites spins S whose Hilbert space
// exceeds 2^MaxDimensionLog2.
func checkDimension(param, shape string, sites int, spin float64) error {
	log2 := float64(sites) * math.Log2(2*spin+1)
	if log2 > MaxDimensionLog2 {
		return paramError(param, "%s has %d spins %s: a Hilbert space of dimension 2^%.1f, more than the limit of 2^%d",
			shape, sites, spinName(spin), log2, MaxDimensionLog2)
	}
	return nil
}

// xxz is a bond with J, Jz (written only when it differs from J) and DM
// (written only when nonzero).
func xxz(a, b string, j, jz float64, dm [3]float64) *frustumv1.Bond {
	bond := heisenberg(a, b, j)
	if jz != j {
		bond.ExchangeZ = ptr(jz)
	}
	if dm != [3]float64{} {
		bond.Dm = []float64{dm[0], dm[1], dm[2]}
	}
	return bond
}

func mod(a, n int) int { return ((a % n) + n) % n }

func floorDiv(a, n int) int {
	if a >= 0 {
		return a / n
	}
	return -((-a + n - 1) / n)
}
