package hilbert

import (
	"errors"
	"fmt"
)

// WithHamiltonian returns the sector of another operator h on the basis of
// s: the same representatives, stabilizers, lookup tables, group and
// representation, shared (not copied), so that a vector of s is a vector of
// the result, component by component. h must be a valid Hermitian operator
// on the same sites and spins, conserve S^z unless s is a NoSz sector, and
// commute with every generator of the group (as NewSector checks); it need
// not commute with the Hamiltonian of s. Typical uses are an observable
// such as the moment along the field applied to the vectors of a
// Hamiltonian's sector, and a family H(B) = H0 - B M on one basis.
//
// The basis of NewSector depends on the group, the representation and
// 2 S^z alone (the representatives are the smallest states of their orbits
// on which the character is trivial, in increasing order), so the result
// equals the sector NewSector(h, s.TwoSz(), s.Group(), s.Irrep(), ...) would
// build, without enumerating the basis again; it costs the compilation of
// h and its small per-term tables. The result is immutable and safe for
// concurrent use, like s, and uses the same number of workers.
func (s *Sector) WithHamiltonian(h *Hamiltonian) (*Sector, error) {
	c, err := compile(h)
	if err != nil {
		return nil, err
	}
	if !sameSpins(c.sp, s.sp) {
		return nil, errors.New("hilbert: the operator is for other sites or spins than the sector")
	}
	if s.twoSz != NoSz && !c.conserves {
		return nil, errors.New("hilbert: the operator does not conserve S^z")
	}
	for i, gen := range s.grp.gens {
		if err := c.commutes(gen.perm, gen.flip, s.twoSz == 0); err != nil {
			return nil, fmt.Errorf("hilbert: generator %d (%s) is not a symmetry of the operator: %v", i, s.grp.names[i], err)
		}
	}
	// Copy every field (the basis and its tables are shared slices), then
	// replace what derives from the Hamiltonian: the compiled terms, the
	// realness and the row kernels.
	t := new(Sector)
	*t = *s
	t.h = c
	t.real = c.real && s.ir.Real
	t.kc = newKernel[complex128](t)
	t.kr = nil
	if t.real {
		t.kr = newKernel[float64](t)
	}
	return t, nil
}
