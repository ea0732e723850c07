// Package ed is Frustum's exact-diagonalization engine. It turns a validated
// cluster (package cluster) into sector Hamiltonians, diagonalizes them and
// returns spectra, thermodynamics and magnetization curves. It knows nothing
// of files, gRPC or users.
//
// # Units and the Hamiltonian
//
// Energies and temperatures are in kelvin, fields in tesla, moments in Bohr
// magnetons per cluster; mu_B/k_B = MuBOverKB K/T (CODATA 2018). The
// Hamiltonian is that of the cluster file (FORMAT.md):
//
//	H = sum_bonds [ J (Sa^x Sb^x + Sa^y Sb^y) + Jz Sa^z Sb^z + D . (Sa x Sb) + Sa T Sb ]
//	  + sum_i A_i (S_i^z)^2 - (mu_B/k_B) sum_i B . (g_i S_i)
//
// # Basis and sectors
//
// States are products of S^z eigenstates, indexed in mixed radix (spin 1/2
// sites as bits). Total S^z sectors are used whenever every term conserves
// S^z; this is detected from the couplings, the g tensors and the field
// direction. When the field-free part is SU(2) invariant and every site's
// effective field g_i^T n points along one axis, the quantization axis is
// turned onto that axis first, so any field direction keeps the sectors.
// Summed over the sectors, every state is counted exactly once.
//
// # Routes
//
// Each task takes the cheapest exact route its symmetry allows, and says
// which in its Report:
//   - one effective g along the field (H(B) = H0 - (mu_B/k_B) B m S^z with
//     [H0, S^z] = 0): H0 is diagonalized once; the field shifts each sector
//     by -(mu_B/k_B) B m S^z, so field sweeps cost nothing more and total-spin
//     labels come from the sector multiplicities;
//   - otherwise H(B) is diagonalized at each field, in S^z sectors where they
//     survive, real symmetric where every matrix element is real and complex
//     Hermitian otherwise.
//
// Magnetization also gives, on request, the exact isothermal dM/dB at every
// point (MagnetizationRequest.Susceptibility): the sector variance of S^z on
// the first route, the Kubo sum with its Van Vleck part on the second.
//
// Beyond full diagonalization, Spectrum takes the Lanczos route (krylov.go)
// and Thermo and Magnetization finite-temperature Lanczos (ftlm.go), whose
// values are statistical estimates with their errors: on the first route
// one set of samples of the zero-field sectors serves every field, on the
// second every field is its own run on H(B), with M = <M_n> from the same
// recurrences and chi by a central difference with common random numbers.
//
// # Powder averages
//
// MagnetizationRequest.Powder > 0 averages the curves over the directions of
// a quadrature rule on the sphere (package sphere: Lebedev rules, then
// Gauss-Legendre products) with at least that many points. Directions that
// the Hamiltonian's symmetry relates are computed once: n and -n always
// (time reversal), directions related by a spin rotation that maps the
// couplings, single-ion terms and g tensors onto themselves (with a site
// permutation, found by search), and every direction at once for an SU(2)
// cluster with scalar g values. The same average on the next coarser rule
// is the convergence estimate of the PowderReport.
//
// # Invariants
//
// Energies are ascending with multiplicity; levels group states whose
// energies differ by less than 1e-9 of the spectrum's scale, and their
// degeneracies add up to the number of states. Memory is estimated before
// anything large is allocated and a task over Limits.MaxMemory is refused
// with a *LimitError naming both figures. Every long loop honours its
// context and reports progress through Options.Progress.
package ed
