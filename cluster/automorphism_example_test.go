package cluster_test

import (
	"fmt"
	"strings"

	"frustum/cluster"
)

// The symmetry group of a periodic kagome patch, and an abelian subgroup
// for momentum sectors.
func ExampleAutomorphisms() {
	m, err := cluster.Kagome(4, 4, cluster.LatticeParams{J: 1}, true)
	if err != nil {
		panic(err)
	}
	var names []string
	for _, s := range m.Symmetries {
		names = append(names, s.Name)
	}
	fmt.Println(strings.Join(names, " "))
	group, err := cluster.Automorphisms(m, 0)
	if err != nil {
		panic(err)
	}
	fmt.Println(len(m.Sites), "sites,", len(group), "automorphisms") // 12 L^2: p6mm
	gens, err := cluster.AbelianGenerators(m, group)
	if err != nil {
		panic(err)
	}
	for _, g := range gens {
		fmt.Println(g.Name, "of order", g.RelativeOrder)
	}
	// Output:
	// T1 T2 C2 C6 R
	// 48 sites, 192 automorphisms
	// T1 of order 4
	// T2 of order 4
}

// A builder refuses a patch whose periodic images would repeat bonds.
func ExampleKagome() {
	_, err := cluster.Kagome(1, 3, cluster.LatticeParams{J: 1}, true)
	fmt.Println(err)
	// Output:
	// L1: a periodic kagome patch needs L1 >= 2, not 1 (a site would be bonded to its own periodic image)
}
