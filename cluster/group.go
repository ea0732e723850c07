package cluster

import (
	"fmt"
	"math/big"
	"slices"
	"strconv"
	"strings"
)

// Permutation is a map of the site indices 0..n-1 onto themselves: site i
// goes to p[i], as in Symmetry.Perm. The methods below treat p as read-only
// and return new slices; they panic on a programmer error (two permutations
// of different lengths), and assume without checking that p is a bijection
// (Valid says whether it is).
type Permutation []int

// Identity returns the identity permutation of n sites.
func Identity(n int) Permutation {
	p := make(Permutation, n)
	for i := range p {
		p[i] = i
	}
	return p
}

// Valid returns nil when p is a bijection of 0..len(p)-1, and otherwise an
// error naming the first entry that is out of range or repeated.
func (p Permutation) Valid() error {
	seen := make([]int, len(p))
	for i := range seen {
		seen[i] = -1
	}
	for i, x := range p {
		if x < 0 || x >= len(p) {
			return fmt.Errorf("p[%d] = %d is not a site index (0 to %d)", i, x, len(p)-1)
		}
		if seen[x] >= 0 {
			return fmt.Errorf("p[%d] = %d repeats p[%d]: not a bijection", i, x, seen[x])
		}
		seen[x] = i
	}
	return nil
}

// Compose returns the product p q, which applies q first and then p:
//
//	(p q)[i] = p[q[i]]
//
// So p.Compose(q) maps site i to p(q(i)).
func (p Permutation) Compose(q Permutation) Permutation {
	if len(p) != len(q) {
		panic(fmt.Sprintf("cluster.Permutation.Compose: lengths %d and %d", len(p), len(q)))
	}
	r := make(Permutation, len(p))
	for i, x := range q {
		r[i] = p[x]
	}
	return r
}

// Inverse returns the permutation that undoes p.
func (p Permutation) Inverse() Permutation {
	r := make(Permutation, len(p))
	for i, x := range p {
		r[x] = i
	}
	return r
}

// Power returns p^k (k may be negative or zero).
func (p Permutation) Power(k int) Permutation {
	base := p
	if k < 0 {
		base, k = p.Inverse(), -k
	}
	// Follow each cycle k steps: O(n), whatever k.
	r := make(Permutation, len(p))
	for i := range p {
		r[i] = -1
	}
	for start := range p {
		if r[start] >= 0 {
			continue
		}
		var cycle []int
		for x := start; ; x = base[x] {
			cycle = append(cycle, x)
			if base[x] == start {
				break
			}
		}
		for j, x := range cycle {
			r[x] = cycle[(j+k)%len(cycle)]
		}
	}
	return r
}

// IsIdentity reports whether p maps every site to itself.
func (p Permutation) IsIdentity() bool {
	for i, x := range p {
		if i != x {
			return false
		}
	}
	return true
}

// FixedPoints returns the number of sites that p maps to themselves. A
// permutation with none is fixed-point-free, as a lattice translation is.
func (p Permutation) FixedPoints() int {
	n := 0
	for i, x := range p {
		if i == x {
			n++
		}
	}
	return n
}

// Order returns the smallest k >= 1 with p^k the identity: the least common
// multiple of the lengths of its cycles.
func (p Permutation) Order() int {
	seen := make([]bool, len(p))
	order := 1
	for start := range p {
		if seen[start] {
			continue
		}
		length := 0
		for x := start; !seen[x]; x = p[x] {
			seen[x] = true
			length++
		}
		order = order / gcd(order, length) * length
	}
	return order
}

// Cycles writes p in cycle notation, fixed points left out, each site by
// its label (labels[i]; the index i when labels is shorter): "(a b c)(d e)"
// maps a to b, b to c, c to a and swaps d and e. The identity is "()".
func (p Permutation) Cycles(labels []string) string {
	name := func(i int) string {
		if i < len(labels) {
			return labels[i]
		}
		return strconv.Itoa(i)
	}
	var b strings.Builder
	seen := make([]bool, len(p))
	for start := range p {
		if seen[start] || p[start] == start {
			continue
		}
		b.WriteByte('(')
		for x := start; !seen[x]; x = p[x] {
			seen[x] = true
			if x != start {
				b.WriteByte(' ')
			}
			b.WriteString(name(x))
		}
		b.WriteByte(')')
	}
	if b.Len() == 0 {
		return "()"
	}
	return b.String()
}

// Commutes reports whether p q = q p.
func (p Permutation) Commutes(q Permutation) bool {
	if len(p) != len(q) {
		panic(fmt.Sprintf("cluster.Permutation.Commutes: lengths %d and %d", len(p), len(q)))
	}
	for i := range p {
		if p[q[i]] != q[p[i]] {
			return false
		}
	}
	return true
}

// Equal reports whether p and q are the same permutation.
func (p Permutation) Equal(q Permutation) bool { return slices.Equal(p, q) }

// key is p as a map key.
func (p Permutation) key() string {
	b := make([]byte, 2*len(p))
	for i, x := range p {
		b[2*i], b[2*i+1] = byte(x), byte(x>>8)
	}
	return string(b)
}

// GroupTooLargeError says that a group has more elements than the caller's
// limit allows, so that its elements were not listed.
type GroupTooLargeError struct {
	// Order is the order of the group when it is known (from Automorphisms),
	// nil when only a lower bound is (from Closure).
	Order *big.Int
	// Limit is the caller's limit.
	Limit int
}

func (e *GroupTooLargeError) Error() string {
	if e.Order == nil {
		return fmt.Sprintf("the group has more than %d elements, the limit: none are listed", e.Limit)
	}
	return fmt.Sprintf("the group has %s elements, more than the limit of %d: none are listed (raise the limit, or use AutomorphismGenerators)", e.Order, e.Limit)
}

// DefaultGroupLimit is the limit on the number of group elements that
// Closure and Automorphisms use when given a limit <= 0.
const DefaultGroupLimit = 1 << 16

// Closure returns the group generated by gens: every product of them,
// starting with the identity, in the order a breadth-first search finds
// them. Every generator must be a permutation (see Valid) of the same n
// sites; n is taken from the first, and no generators give the group {e} of
// n = 0 sites. When the group has more than limit elements (DefaultGroupLimit
// when limit <= 0), Closure returns a *GroupTooLargeError and no elements.
func Closure(gens []Permutation, limit int) ([]Permutation, error) {
	if limit <= 0 {
		limit = DefaultGroupLimit
	}
	n := 0
	if len(gens) > 0 {
		n = len(gens[0])
	}
	for i, g := range gens {
		if len(g) != n {
			return nil, fmt.Errorf("generator %d has %d entries, want %d", i, len(g), n)
		}
		if err := g.Valid(); err != nil {
			return nil, fmt.Errorf("generator %d: %v", i, err)
		}
	}
	e := Identity(n)
	group := []Permutation{e}
	seen := map[string]bool{e.key(): true}
	for next := 0; next < len(group); next++ {
		for _, g := range gens {
			h := g.Compose(group[next])
			if k := h.key(); !seen[k] {
				if len(group) == limit {
					return nil, &GroupTooLargeError{Limit: limit}
				}
				seen[k] = true
				group = append(group, h)
			}
		}
	}
	return group, nil
}

func gcd(a, b int) int {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}
