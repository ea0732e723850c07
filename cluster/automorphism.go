package cluster

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"math/big"
	"slices"
)

// Automorphisms returns every site permutation of m that commutes with its
// Hamiltonian at any field: the permutations P with
//
//	spin, g tensor and single-ion term of P(i) = those of i      (every site i)
//	K_{P(a) P(b)} = K_{ab}                                        (every pair a, b)
//
// where K_ab is the coupling matrix of the pair taken in the order a -> b
// (Bond.Coupling for a bond stored a -> b, its transpose for one stored
// b -> a, zero for no bond). These are exactly the permutations that pass
// CheckPermutation, with its tolerance. So a permutation that reverses a DM
// bond is one only where the bond it lands on carries the opposite D, and a
// bond whose coupling is zero counts as no bond. Site groups are not
// compared (they tag outputs and do not enter H); AutomorphismsKeepingGroups
// compares them too.
//
// The result is the whole group, closed under composition, sorted by Perm
// (so the identity, named "E", comes first). An element equal to one of
// m.Symmetries carries its name, the others are named "g1", "g2", ... by
// their place in the list. When the group has more than limit elements
// (DefaultGroupLimit when limit <= 0), Automorphisms lists none and returns
// a *GroupTooLargeError with the order of the group; AutomorphismGenerators
// gives a few generators of any group, however large.
//
// The search individualizes sites and refines the partition of the sites by
// their invariants (spin, g, single-ion term, the multiset of oriented
// couplings to each class of neighbours) until every site is told apart,
// along a stabilizer chain with orbit pruning: the cost grows with the
// number of sites and generators, not with the order of the group: a
// periodic kagome patch of 48 sites takes about a millisecond.
func Automorphisms(m *Model, limit int) ([]Symmetry, error) {
	return automorphisms(m, limit, false)
}

// AutomorphismsKeepingGroups is Automorphisms with one more condition: every
// site maps onto a site of its own group (Site.Group), so that the moments
// of each group are kept too.
func AutomorphismsKeepingGroups(m *Model, limit int) ([]Symmetry, error) {
	return automorphisms(m, limit, true)
}

// AutomorphismGenerators returns generators of the group that Automorphisms
// lists, together with its order, for a group of any size: a strong
// generating set along the stabilizer chain of the search: at most one for
// each point of each orbit of the chain, and in practice a handful. The generators are named as in Automorphisms (a declared name
// where one matches, else "g1", "g2", ...), and the identity group has no
// generators. keepGroups adds the condition of AutomorphismsKeepingGroups.
func AutomorphismGenerators(m *Model, keepGroups bool) ([]Symmetry, *big.Int, error) {
	chain, err := stabilizerChain(m, keepGroups)
	if err != nil {
		return nil, nil, err
	}
	out := make([]Symmetry, len(chain.gens))
	for i, g := range chain.gens {
		out[i] = Symmetry{Name: declaredName(m, g, fmt.Sprintf("g%d", i+1)), Perm: g}
	}
	return out, chain.order(), nil
}

func automorphisms(m *Model, limit int, keepGroups bool) ([]Symmetry, error) {
	if limit <= 0 {
		limit = DefaultGroupLimit
	}
	chain, err := stabilizerChain(m, keepGroups)
	if err != nil {
		return nil, err
	}
	order := chain.order()
	if order.Cmp(big.NewInt(int64(limit))) > 0 {
		return nil, &GroupTooLargeError{Order: order, Limit: limit}
	}
	// Every element is u_1 u_2 ... u_k, one coset representative of each
	// level of the chain, in exactly one way.
	elements := []Permutation{Identity(len(m.Sites))}
	for level := len(chain.transversals) - 1; level >= 0; level-- {
		var next []Permutation
		for _, u := range chain.transversals[level] {
			for _, h := range elements {
				next = append(next, u.Compose(h))
			}
		}
		elements = next
	}
	slices.SortFunc(elements, func(p, q Permutation) int { return slices.Compare(p, q) })
	out := make([]Symmetry, len(elements))
	for i, p := range elements {
		name := fmt.Sprintf("g%d", i)
		if i == 0 {
			name = "E"
		}
		out[i] = Symmetry{Name: declaredName(m, p, name), Perm: p}
	}
	return out, nil
}

// declaredName returns the name of the declared symmetry of m equal to p, or
// otherwise.
func declaredName(m *Model, p Permutation, otherwise string) string {
	for _, s := range m.Symmetries {
		if p.Equal(s.Perm) && s.Name != "" {
			return s.Name
		}
	}
	return otherwise
}

// Generator is one generator of an abelian group written as a direct
// product of cyclic groups: see AbelianGenerators.
type Generator struct {
	Symmetry
	// RelativeOrder is the order of the generator modulo the subgroup of the
	// generators before it, which AbelianGenerators makes equal to its order:
	// g^RelativeOrder is the identity.
	RelativeOrder int
}

// AbelianGenerators picks an abelian subgroup A of group (a list of
// symmetries of m, such as Automorphisms returns, closed or not: A is made of
// products of its elements and of m.Symmetries) that is useful for symmetry
// sectors, and returns a basis of it:
//
//	A = <g_1> x <g_2> x ... x <g_r>,   g_i of order n_i = RelativeOrder
//
// a direct product, so that every element of A is g_1^k_1 ... g_r^k_r with
// 0 <= k_i < n_i in exactly one way, and the one-dimensional characters of A
// are
//
//	chi_q(g_1^k_1 ... g_r^k_r) = exp(2 pi i sum_i q_i k_i / n_i),   0 <= q_i < n_i.
//
// A is chosen greedily: candidates are m.Symmetries in their order (the
// lattice builders declare translations first), then the elements of group
// without fixed points (translations of a periodic patch are), then the
// others, larger orders first; a candidate joins A when it is not in A yet
// and commutes with every element chosen so far. The result is maximal (no
// element of group outside A commutes with all of A) but not necessarily
// the largest abelian subgroup: on a ring it is the N translations, and the
// reflections, which do not commute with them, are left out. The basis is
// then chosen from A, again preferring declared names and larger orders, and
// keeps the names of the elements. The identity group gives no generators.
//
// Every element of group must be a permutation of the sites of m that passes
// CheckPermutation; AbelianGenerators returns an error otherwise, and when A
// would have more than DefaultGroupLimit elements.
func AbelianGenerators(m *Model, group []Symmetry) ([]Generator, error) {
	if m == nil {
		return nil, errNoModel
	}
	n := len(m.Sites)
	type candidate struct {
		Symmetry
		declared bool
		fixed    int
		order    int
	}
	var cands []candidate
	for i, s := range m.Symmetries {
		cands = append(cands, candidate{Symmetry: s, declared: true})
		if err := m.CheckPermutation(s.Perm); err != nil {
			return nil, fmt.Errorf("m.Symmetries[%d] (%s): %v", i, s.Name, err)
		}
	}
	for i, s := range group {
		if err := m.CheckPermutation(s.Perm); err != nil {
			return nil, fmt.Errorf("group[%d] (%s): %v", i, s.Name, err)
		}
		cands = append(cands, candidate{Symmetry: s})
	}
	for i := range cands {
		p := Permutation(cands[i].Perm)
		cands[i].fixed, cands[i].order = p.FixedPoints(), p.Order()
	}
	slices.SortStableFunc(cands, func(a, b candidate) int {
		switch {
		case a.declared != b.declared:
			if a.declared {
				return -1
			}
			return 1
		case a.declared:
			return 0 // declared: in their order
		case (a.fixed == 0) != (b.fixed == 0):
			if a.fixed == 0 {
				return -1
			}
			return 1
		}
		return cmp.Compare(b.order, a.order)
	})

	// The subgroup A, grown one commuting element at a time.
	var chosen []Permutation
	elements := []Permutation{Identity(n)}
	in := map[string]bool{elements[0].key(): true}
	names := map[string]string{}
	for _, c := range cands {
		p := Permutation(c.Perm)
		if _, ok := names[p.key()]; !ok && c.Name != "" {
			names[p.key()] = c.Name
		}
		if in[p.key()] {
			continue
		}
		commutes := true
		for _, q := range chosen {
			if !p.Commutes(q) {
				commutes = false
				break
			}
		}
		if !commutes {
			continue
		}
		chosen = append(chosen, p)
		grown, err := Closure(chosen, DefaultGroupLimit)
		if err != nil {
			return nil, fmt.Errorf("the abelian subgroup: %w", err)
		}
		elements = grown
		for _, e := range elements {
			in[e.key()] = true
		}
	}

	// A basis: at each step the first candidate p (in the order above) whose
	// cyclic group meets the subgroup S of the basis so far only in the
	// identity and for which S x <p> is a direct factor of A. One always
	// exists while S is a direct factor short of A: an element of the
	// largest order modulo S, with that order itself.
	candidateOrder := make([]Permutation, 0, len(elements))
	seen := map[string]bool{}
	for _, c := range cands {
		if k := Permutation(c.Perm).key(); in[k] && !seen[k] {
			seen[k] = true
			candidateOrder = append(candidateOrder, c.Perm)
		}
	}
	for _, e := range elements {
		if k := e.key(); !seen[k] {
			seen[k] = true
			candidateOrder = append(candidateOrder, e)
		}
	}
	exponent := 1
	for _, e := range elements {
		o := e.Order()
		exponent = exponent / gcd(exponent, o) * o
	}
	var basis []Generator
	subElements := []Permutation{Identity(n)}
	for len(subElements) < len(elements) {
		var next []Permutation
		var best Permutation
		sub := keys(subElements)
		for _, p := range candidateOrder {
			q := orderModulo(p, sub)
			if q == 1 || q != p.Order() {
				continue
			}
			next = next[:0]
			power := Identity(n)
			for range q {
				for _, s := range subElements {
					next = append(next, power.Compose(s))
				}
				power = p.Compose(power)
			}
			if isPure(next, elements, exponent) {
				best = p
				break
			}
		}
		if best == nil {
			return nil, errors.New("cluster.AbelianGenerators: no basis element found (a bug)")
		}
		name := names[best.key()]
		if name == "" {
			name = fmt.Sprintf("a%d", len(basis)+1)
		}
		basis = append(basis, Generator{Symmetry: Symmetry{Name: name, Perm: slices.Clone(best)}, RelativeOrder: best.Order()})
		subElements = next
	}
	return basis, nil
}

func keys(ps []Permutation) map[string]bool {
	out := make(map[string]bool, len(ps))
	for _, p := range ps {
		out[p.key()] = true
	}
	return out
}

// isPure reports whether the subgroup S of the finite abelian group A (of
// exponent e) is pure, S meets q A in q S for every prime power q dividing e,
// which for finite abelian groups is the same as being a direct factor.
func isPure(sub, group []Permutation, exponent int) bool {
	in := keys(sub)
	for q := 2; q <= exponent; q++ {
		if exponent%q != 0 || !isPrimePower(q) {
			continue
		}
		qSub := map[string]bool{}
		for _, s := range sub {
			qSub[s.Power(q).key()] = true
		}
		for _, a := range group {
			k := a.Power(q).key()
			if in[k] && !qSub[k] {
				return false
			}
		}
	}
	return true
}

func isPrimePower(q int) bool {
	p := 2
	for ; p*p <= q && q%p != 0; p++ {
	}
	if q%p != 0 {
		p = q // q is prime
	}
	for q%p == 0 {
		q /= p
	}
	return q == 1
}

// orderModulo returns the smallest k >= 1 with p^k in the subgroup sub.
func orderModulo(p Permutation, sub map[string]bool) int {
	power := p
	for k := 1; ; k++ {
		if sub[power.key()] {
			return k
		}
		power = p.Compose(power)
	}
}

// The search.
//
// Sites are coloured by their invariants, and a colouring is refined until
// it is equitable: two sites of one colour have, for every colour and every
// class of oriented coupling, the same number of neighbours of that colour
// coupled by that class. Refinement is a function of the colouring alone, so
// an automorphism maps the refinement of a colouring onto the refinement of
// its image; individualizing a site (giving it a colour of its own) and
// refining again, down to a colouring with one site per colour, reads off a
// candidate permutation, which is then checked.

// autGraph is the Hamiltonian of a model as a coloured, directed graph.
type autGraph struct {
	m       *Model
	n       int
	siteCls []int
	adj     [][]arc        // adj[a]: every nonzero coupling a -> b, with its class
	pair    map[[2]int]int // the class of the coupling of (a, b) in that order
}

type arc struct{ to, cls int }

// colouring is a colouring of the sites by 0..k-1, with a trace that two
// colourings related by an automorphism share.
type colouring struct {
	col   []int
	k     int
	trace uint64
}

func newAutGraph(m *Model, keepGroups bool) (*autGraph, error) {
	if m == nil {
		return nil, errNoModel
	}
	n := len(m.Sites)
	var energyScale, gScale float64
	for _, s := range m.Sites {
		energyScale = max(energyScale, math.Abs(s.SingleIon))
		for _, x := range s.G {
			gScale = max(gScale, math.Abs(x))
		}
	}
	for i, b := range m.Bonds {
		if b.A < 0 || b.A >= n || b.B < 0 || b.B >= n || b.A == b.B {
			return nil, fmt.Errorf("bonds[%d] joins sites %d and %d, which is not a bond of this model's %d sites", i, b.A, b.B, n)
		}
		for _, k := range b.Coupling() {
			energyScale = max(energyScale, math.Abs(k))
		}
	}
	energyTol := SymmetryTolerance * energyScale
	gTol := SymmetryTolerance * gScale

	g := &autGraph{m: m, n: n, siteCls: make([]int, n), adj: make([][]arc, n), pair: map[[2]int]int{}}

	// Site classes: the first earlier site that matches, within tolerance.
	var reps []int
	for i, s := range m.Sites {
		g.siteCls[i] = -1
		for c, r := range reps {
			t := m.Sites[r]
			if s.TwoS == t.TwoS && math.Abs(s.SingleIon-t.SingleIon) <= energyTol &&
				close9(s.G, t.G, gTol) && (!keepGroups || s.Group == t.Group) {
				g.siteCls[i] = c
				break
			}
		}
		if g.siteCls[i] < 0 {
			g.siteCls[i] = len(reps)
			reps = append(reps, i)
		}
	}

	// Coupling classes, for both orientations of every nonzero bond.
	var couplings [][9]float64
	class := func(k [9]float64) int {
		for c, r := range couplings {
			if close9(k, r, energyTol) {
				return c
			}
		}
		couplings = append(couplings, k)
		return len(couplings) - 1
	}
	zero := class([9]float64{})
	for _, b := range m.Bonds {
		k := b.Coupling()
		ab, ba := class(k), class(transpose(k))
		if ab == zero {
			continue // no term in H
		}
		g.adj[b.A] = append(g.adj[b.A], arc{b.B, ab})
		g.adj[b.B] = append(g.adj[b.B], arc{b.A, ba})
		g.pair[[2]int{b.A, b.B}] = ab
		g.pair[[2]int{b.B, b.A}] = ba
	}
	return g, nil
}

func close9(a, b [9]float64, tol float64) bool {
	for i := range a {
		if math.Abs(a[i]-b[i]) > tol {
			return false
		}
	}
	return true
}

// isAutomorphism checks a candidate against the classes, and then with
// CheckPermutation itself, so that its verdict (and tolerance) is final.
func (g *autGraph) isAutomorphism(p Permutation) bool {
	for i, x := range p {
		if g.siteCls[i] != g.siteCls[x] {
			return false
		}
	}
	for a, arcs := range g.adj {
		for _, e := range arcs {
			if c, ok := g.pair[[2]int{p[a], p[e.to]}]; !ok || c != e.cls {
				return false
			}
		}
	}
	return g.m.CheckPermutation(p) == nil
}

func (g *autGraph) initial() colouring {
	col := slices.Clone(g.siteCls)
	return g.refine(compress(col))
}

// refine returns the coarsest equitable colouring finer than c, with the
// colours ordered by (old colour, signature), so that the result and its
// trace depend on c alone, up to the relabelling of sites.
func (g *autGraph) refine(c colouring) colouring {
	n := g.n
	col := slices.Clone(c.col)
	k := c.k
	trace := c.trace
	sigs := make([][]int, n)
	order := make([]int, n)
	for {
		for v := range n {
			s := sigs[v][:0]
			s = append(s, col[v])
			start := len(s)
			for _, e := range g.adj[v] {
				s = append(s, e.cls*n+col[e.to])
			}
			slices.Sort(s[start:])
			sigs[v] = s
			order[v] = v
		}
		slices.SortFunc(order, func(a, b int) int { return slices.Compare(sigs[a], sigs[b]) })
		next := make([]int, n)
		newK := 0
		count := 0
		for i, v := range order {
			if i > 0 && slices.Compare(sigs[v], sigs[order[i-1]]) != 0 {
				trace = mixSignature(trace, sigs[order[i-1]], count)
				newK++
				count = 0
			}
			next[v] = newK
			count++
		}
		trace = mixSignature(trace, sigs[order[n-1]], count)
		newK++
		col = next
		if newK == k {
			return colouring{col: col, k: k, trace: trace}
		}
		k = newK
	}
}

// individualize gives site x a colour of its own, just before the rest of
// its old colour, and refines.
func (g *autGraph) individualize(c colouring, x int) colouring {
	col := make([]int, g.n)
	for v, cv := range c.col {
		col[v] = 2*cv + 1
	}
	col[x] = 2 * c.col[x]
	d := compress(col)
	d.trace = mix(c.trace, uint64(c.col[x])+0x9e3779b97f4a7c15)
	return g.refine(d)
}

// compress renumbers the colours 0..k-1 in their order.
func compress(col []int) colouring {
	used := slices.Clone(col)
	slices.Sort(used)
	used = slices.Compact(used)
	out := make([]int, len(col))
	for i, c := range col {
		out[i], _ = slices.BinarySearch(used, c)
	}
	return colouring{col: out, k: len(used)}
}

// firstCell returns the smallest colour held by more than one site, or -1
// when every site has its own.
func (c colouring) firstCell() int {
	if c.k == len(c.col) {
		return -1
	}
	count := make([]int, c.k)
	for _, x := range c.col {
		count[x]++
	}
	for x, n := range count {
		if n > 1 {
			return x
		}
	}
	return -1
}

func (c colouring) members(colour int) []int {
	var out []int
	for v, x := range c.col {
		if x == colour {
			out = append(out, v)
		}
	}
	return out
}

// find returns an automorphism that maps the colouring left onto right
// (site v of left colour x onto a site of right colour x, down to the
// discrete colourings), or nil when there is none.
func (g *autGraph) find(left, right colouring) Permutation {
	if left.k != right.k || left.trace != right.trace {
		return nil
	}
	cell := left.firstCell()
	if cell < 0 {
		if right.firstCell() >= 0 {
			return nil
		}
		p := make(Permutation, g.n)
		site := make([]int, g.n)
		for v, x := range right.col {
			site[x] = v
		}
		for v, x := range left.col {
			p[v] = site[x]
		}
		if g.isAutomorphism(p) {
			return p
		}
		return nil
	}
	x := left.members(cell)[0]
	child := g.individualize(left, x)
	for _, y := range right.members(cell) {
		if p := g.find(child, g.individualize(right, y)); p != nil {
			return p
		}
	}
	return nil
}

// chain is the stabilizer chain of the automorphism group along the base
// b_1, ..., b_k: transversals[i] holds, for each site c in the orbit of
// b_{i+1} under the permutations fixing b_1..b_i, one such permutation
// mapping b_{i+1} to c.
type chain struct {
	base         []int
	transversals [][]Permutation
	gens         []Permutation
}

func (c *chain) order() *big.Int {
	order := big.NewInt(1)
	for _, t := range c.transversals {
		order.Mul(order, big.NewInt(int64(len(t))))
	}
	return order
}

func stabilizerChain(m *Model, keepGroups bool) (*chain, error) {
	g, err := newAutGraph(m, keepGroups)
	if err != nil {
		return nil, err
	}
	// The base: individualize the first site of the first non-trivial colour
	// until every site has its own colour.
	levels := []colouring{g.initial()}
	var base []int
	for {
		last := levels[len(levels)-1]
		cell := last.firstCell()
		if cell < 0 {
			break
		}
		b := last.members(cell)[0]
		base = append(base, b)
		levels = append(levels, g.individualize(last, b))
	}
	ch := &chain{base: base, transversals: make([][]Permutation, len(base))}
	// From the deepest level up: the orbit of b_i under the stabilizer of
	// b_1..b_{i-1}, generated by what the deeper levels found and by one
	// permutation for each new point of the orbit.
	for i := len(base) - 1; i >= 0; i-- {
		b := base[i]
		orbit := orbitOf(b, ch.gens, g.n)
		for _, y := range levels[i].members(levels[i].col[b]) {
			if _, ok := orbit[y]; ok {
				continue
			}
			if p := g.find(levels[i+1], g.individualize(levels[i], y)); p != nil {
				ch.gens = append(ch.gens, p)
				orbit = orbitOf(b, ch.gens, g.n)
			}
		}
		t := make([]Permutation, 0, len(orbit))
		for _, y := range levels[i].members(levels[i].col[b]) {
			if u, ok := orbit[y]; ok {
				t = append(t, u)
			}
		}
		ch.transversals[i] = t
	}
	return ch, nil
}

// orbitOf returns the orbit of b under the group generated by gens, each
// point c with a product u of generators, u[b] = c.
func orbitOf(b int, gens []Permutation, n int) map[int]Permutation {
	orbit := map[int]Permutation{b: Identity(n)}
	queue := []int{b}
	for len(queue) > 0 {
		v := queue[0]
		queue = queue[1:]
		for _, gen := range gens {
			w := gen[v]
			if _, ok := orbit[w]; !ok {
				orbit[w] = gen.Compose(orbit[v])
				queue = append(queue, w)
			}
		}
	}
	return orbit
}

// mix folds x into the hash h (a 64-bit mixer; a collision only costs
// search time, since every candidate is checked).
func mix(h, x uint64) uint64 {
	h ^= x + 0x9e3779b97f4a7c15 + (h << 6) + (h >> 2)
	h *= 0xff51afd7ed558ccd
	return h ^ (h >> 33)
}

func mixSignature(h uint64, sig []int, count int) uint64 {
	h = mix(h, uint64(len(sig)))
	for _, x := range sig {
		h = mix(h, uint64(x))
	}
	return mix(h, uint64(count))
}
