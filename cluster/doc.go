// Package cluster turns a cluster file or API message into a validated Model
// of a small quantum spin cluster, checks site permutations against its
// Hamiltonian, and builds the shapes users start from. It does no numerics
// beyond geometry and those checks; the engine (package ed) takes a Model
// from here.
//
// # Overview
//
// A cluster is a set of sites (spins S = 1/2, 1, 3/2, ..., each with a g
// tensor, an optional single-ion term and a free group tag) and bonds between
// pairs of them. Its Hamiltonian, with energies in K (J/k_B), fields in T and
// mu_B/k_B = 0.67171381563 K/T, is
//
//	H = sum over bonds a -> b:  sum_{mu,nu} Sa^mu K^{mu nu} Sb^nu
//	  + sum over sites i:       A_i (S_i^z)^2
//	  - (mu_B/k_B) sum_i        B . (g_i S_i)
//
// where a bond's K (Bond.Coupling) gathers its exchange J (xx and yy), Jz
// (zz), Dzyaloshinskii-Moriya vector D (the term D . (Sa x Sb)) and extra
// tensor T. Every bond is counted once and J > 0 is antiferromagnetic.
//
// There are three ways to a Model:
//
//	m, err := cluster.LoadFile("heptamer.json")    // the protojson cluster file
//	m, err := cluster.FromProto(msg)               // a frustumv1.Cluster from the API
//	m := cluster.DefectMultimer(params)            // a builder; also Chain, ChainJ1J2,
//	                                               // Triangle, Tetrahedron
//
// and one way back: m.ToProto(), so that FromProto(m.ToProto()) equals m.
//
// # Invariants
//
// A Model from Load, FromProto or a builder satisfies:
//
//   - it has at least one site; labels are non-empty and unique;
//   - 1 <= TwoS <= MaxTwoS for every site, and the product of 2S_i + 1 is at
//     most 2^MaxDimensionLog2, so Dimension reports ok;
//   - every number is finite; Position is nil or 3 numbers; SingleIon is 0 on
//     spin-1/2 sites (where it would be a constant);
//   - every bond joins two different sites, given by index, and no pair of
//     sites has two bonds (a-b and b-a are the same pair); Jz, DM and Tensor
//     hold their defaults when absent from the file (Jz = J, zeros);
//   - every Symmetry's Perm is a permutation of the site indices that passes
//     CheckPermutation: it commutes with H at any field.
//
// A Model is plain data; code that changes one by hand must keep these, or
// pass it through FromProto(m.ToProto()) to check.
//
// # Symmetries
//
// The symmetries in a cluster file are assertions, checked with every
// coupling, DM vector, single-ion term and g tensor; none is searched for.
// A permutation that reverses a bond a -> b transposes its coupling, so it
// must flip the bond's DM vector (an axial vector) to be a symmetry; see
// CheckPermutation.
//
// # Errors
//
// A refused cluster gives a FieldErrors, a list of *FieldError each naming
// the field by its path in the cluster file and the reason, and listing every
// problem found rather than the first (up to MaxFieldErrors):
//
//	bonds[3].b: unknown site "t9"
//	sites[2].spin: 0.7 is not a positive multiple of 1/2
//	symmetries[0]: "C3" does not commute with H: site t1 maps onto t2, but ...
//
// Use errors.As to get the list (var fe cluster.FieldErrors) or its first
// entry (var e *cluster.FieldError). A file that is not a Cluster message at
// all (JSON syntax, an unknown field, a string where a number belongs) gives
// an error starting "cluster file: ". No input makes the package panic; the
// builders panic only on programmer errors, such as a chain of one site.
package cluster
