package cluster_test

import (
	"errors"
	"fmt"
	"strings"

	"frustum/cluster"
)

// A refused cluster names every field that is wrong, and why.
func ExampleLoad() {
	const file = `{
	  "name": "invented dimer with mistakes",
	  "sites": [
	    {"label": "a", "spin": 0.7},
	    {"label": "b", "gTensor": [2, 0, 0, 2]}
	  ],
	  "bonds": [
	    {"a": "a", "b": "t9", "exchange": 10}
	  ]
	}`
	_, err := cluster.Load(strings.NewReader(file))
	var list cluster.FieldErrors
	if errors.As(err, &list) {
		for _, e := range list {
			fmt.Println(e.Path, "->", e.Reason)
		}
	}
	// Output:
	// sites[0].spin -> 0.7 is not a positive multiple of 1/2
	// sites[1].gTensor -> has 4 numbers, want 9 (a 3x3 tensor, row-major)
	// bonds[0].b -> unknown site "t9"
}

// A user-asserted symmetry is checked against every coupling.
func ExampleModel_CheckPermutation() {
	m := cluster.DefectMultimer(cluster.MultimerParams{JPlanar: 190, JDefect: 20, DMPlanar: 15})
	for _, s := range m.Symmetries {
		fmt.Println(s.Name, s.Perm)
	}
	// The vertical mirror t2 <-> t3, b2 <-> b3 reverses the DM bonds.
	err := m.CheckPermutation([]int{0, 1, 3, 2, 4, 6, 5})
	fmt.Println(err != nil)
	// Output:
	// C3 [0 2 3 1 5 6 4]
	// mirror-h [0 4 5 6 1 2 3]
	// true
}
