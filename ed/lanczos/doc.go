// Package lanczos holds the Krylov methods of the engine for sectors too
// large for dense diagonalization: the lowest eigenpairs by thick-restart
// Lanczos (Lowest), and the building blocks of the finite-temperature
// Lanczos method (Sample, Sampler, RandomVector, Thermodynamics). Both work
// matrix-free through an Operator and are generic over real (float64) and
// complex (complex128) vectors.
//
// # Lowest eigenpairs
//
// Lowest builds a Krylov basis V = [v_0 ... v_{b-1}] of at most
// Options.Basis vectors and the real symmetric projected matrix T with
//
//	H V = V T + beta v_b e_{b-1}^T,   T = V^H H V
//
// (to rounding; see "Orthogonality" for how closely V^H V = 1). T is real
// even for complex vectors: its diagonal entries <v|H|v> are real for
// Hermitian H and its couplings are norms. The eigenpairs (theta_i, u_i)
// of T give Ritz pairs (theta_i, V u_i) whose residual norms follow from
// the Lanczos relation without touching H:
//
//	||H V u_i - theta_i V u_i|| = |beta (u_i)_{b-1}|.
//
// A pair is converged when this is at most Tol max(1, |theta_i|). The
// estimates are checked after every step while the projected eigenproblem
// (about b^3 operations, LAPACK's Dsyev in gonum) is cheap against one
// pass over a vector (b^3 <= Dim/64), otherwise on a schedule: after a
// check the next one follows after a quarter of the steps that the decay
// of the largest estimate since the previous check predicts, at least one
// (Lanczos convergence accelerates, so the prediction errs long).
//
// When the basis is full and the K wanted pairs are not all converged, the
// basis is restarted thickly (Wu and Simon, SIAM J. Matrix Anal. Appl. 22,
// 602 (2000)): the lowest kk = K + (Basis-K)/2 Ritz vectors are kept in
// place, v_b follows them, and T becomes the diagonal of their Ritz values
// with one arrow row of couplings beta (u_i)_{b-1}, still real symmetric.
// A restart costs about kk Basis Dim multiply-adds; when the schedule
// predicts convergence within the next cycle with room to spare (1.25
// times the predicted steps fit in the free slots with K + 2 kept), only
// kk = K + max(1, (Basis-K)/8) are kept, which makes that restart cheap.
//
// When all K estimates pass, the K Ritz vectors are formed (into free
// slots of the basis when there are enough, so that the basis survives;
// otherwise in place by a restart) and each is checked with one explicit
// application of H; Result.Values are their Rayleigh quotients and
// Result.Residuals the explicit ||H y - theta y||. If an explicit residual
// fails (rounding can make the estimate optimistic), the iteration goes on
// and asks the estimates for ten times less before the next explicit check.
//
// If the Krylov space becomes invariant (the new vector's norm falls below
// 1e-12 ||H||, or a second Gram-Schmidt round removes more than 30% of what
// the first left, the twice-is-enough sign that the vector is in the span
// to rounding), the next vector is a new pseudo-random vector orthogonal to
// the basis, uncoupled in T; when the basis spans the whole space the Ritz
// pairs are exact.
//
// Options.MaxIterations bounds all applications of H, the explicit checks
// included. A run that reaches it returns its best pairs with Converged
// false and a warning; the values are then still Rayleigh-Ritz values,
// upper bounds of the true eigenvalues. A context that is done stops the
// run before the next application of H.
//
// # Orthogonality
//
// Without reorthogonalization the Lanczos vectors lose their orthogonality
// along the Ritz vectors of converged pairs, and converged eigenvalues
// reappear as spurious copies, "ghosts" (Paige, J. Inst. Math. Appl. 10,
// 373 (1972)). Options.Reorthogonalization chooses the remedy.
//
// Full orthogonalizes every new vector against the whole basis by
// classical Gram-Schmidt applied twice ("twice is enough": Giraud, Langou
// and Rozloznik, Comput. Math. Appl. 50, 1069 (2005); Parlett, The
// Symmetric Eigenvalue Problem, SIAM 1998, on Kahan's argument), so that
// the basis stays orthogonal to rounding. Per step this costs three passes
// over the current basis of j vectors (the dot products, the first
// subtraction fused with the second round's dot products, the second
// subtraction): about 6 j Dim multiply-adds, memory-bound for large Dim.
// With the default basis of 40 this dominates a sparse operator: for the
// 24-site Heisenberg ring (Dim 2.7e6, 13 entries a row) it was 80% of the
// time, for a tight-binding chain 95%.
//
// Partial, the default, runs the three-term recurrence and orthogonalizes
// only when needed (partial reorthogonalization: Simon, Math. Comp. 42,
// 115 (1984); Larsen, PROPACK, DAIMI PB-537 (1998)). Estimates omega_ik of
// the overlaps <v_i, v_k> follow Simon's recurrence, which applies as it
// stands to the arrow matrix of a thick restart; the overlaps with the
// vectors a step subtracts (its couplings, the current vector, and the
// locked vectors of Multiplicities, which are not part of the Lanczos
// relation and are subtracted at every step) are measured in the pass that
// subtracts them. When an estimate
// exceeds omega_max = min(sqrt(eps), Tol/100), the new vector and the next
// one are orthogonalized against the basis vectors whose estimates exceed
// max(omega_max eps^(1/4), 8 eps), by classical Gram-Schmidt with a second
// round when the norm falls below 1/sqrt(2) of what it was (Daniel, Gragg,
// Kaufman and Stewart, Math. Comp. 30, 772 (1976)). The basis then stays
// semi-orthogonal, |<v_i, v_k>| of order omega_max, which is enough for T
// to be the projection of H on the span of the basis to working precision
// (Simon): no ghosts. The level Tol/100 rather than sqrt(eps): the
// components that a reorthogonalization removes, of order omega beta, are
// not part of T; a thick restart turns the Ritz vectors of unconverged
// pairs into basis vectors, whose Lanczos relation then carries these
// components and limits the residuals that can be reached to about their
// size. At a restart the Gram matrix of the kept vectors and the next one
// is measured in the pass that forms them; it restarts the estimates, and
// if the vectors deviate from orthonormality by more than max(eps^(3/4),
// 10 omega_max) (a safety net: in the tests they stayed at the level of
// omega_max) they are replaced by an orthonormal basis of their span in
// arrow form (Cholesky factor of the Gram matrix, then the eigenvectors of
// the projected matrix by Jacobi rotations), so that the overlaps cannot
// accumulate from restart to restart. The Ritz vectors that are checked
// and returned are formed with their Gram matrix too, normalized, and
// orthonormalized by classical Gram-Schmidt twice when two overlap by more
// than 1e-13; their explicit residuals are those of the returned vectors.
// After an invariant subspace the run goes on with Full.
//
// Partial costs per step one application of H, three passes over three
// vectors (alpha = <v, H v> with the components along locked vectors; the
// three-term update with the overlaps left; the normalization) and O(b^2)
// operations for the estimates, plus two passes over the selected vectors
// for each reorthogonalized one. The first pass is saved when the operator
// is a DotOperator, whose product returns alpha and ||H v||^2 (without
// locked vectors), and for real vectors the three-term update is one fused
// loop rather than a BLAS call per vector and dot product. For the 24-site
// Heisenberg ring with the default Tol, 4 of 84 vectors were
// reorthogonalized; the operator then took more than half of the time, and
// the thick restarts, the passes of the steps and the first touch of the
// basis memory the rest (Full: 80% of the time outside the operator, with
// the same 84 applications).
// TestPartialSemiOrthogonality measures the overlaps that the estimates
// stand for.
//
// # Degenerate levels
//
// From a single start vector, a Krylov method in exact arithmetic finds one
// vector per eigenspace: for a degenerate level it sees only the projection
// of the start vector on the eigenspace. With reorthogonalization and
// restarts, rounding usually brings in the other copies, but nothing
// guarantees it. Lowest therefore guarantees, without Options.Multiplicities:
// every returned value is an eigenvalue (to its residual); the returned
// vectors are orthonormal, so a value returned r times has multiplicity at
// least r; the distinct levels below the largest returned value are all
// present (for a start vector with components along them, which a random
// vector has with probability 1). A level may appear fewer times than its
// multiplicity, and then the following values are higher eigenvalues than
// the true K lowest. Result.Warnings names every group of returned values
// that agree within Tol max(1, |theta|), since such a level may have more
// copies than were found.
//
// With Options.Multiplicities, after the K pairs have converged they are
// locked: a new pass starts from a fresh random vector orthogonal to them,
// keeps orthogonalizing against them, and runs until its lowest Ritz pair
// has converged. A value found below the K-th locked one (by more than the
// tolerance) is a missing copy or a missed level; it joins the K lowest and
// another pass follows. The run ends with a pass that finds nothing below.
// Each pass finds one further copy of each degenerate level, so a level of
// multiplicity g among the K lowest costs up to g passes, and a
// non-degenerate spectrum one extra pass: about 1.3 to 2 times the work.
// Basis must then be at least 2K+2.
//
// # Finite-temperature Lanczos
//
// The finite-temperature Lanczos method (Jaklic and Prelovsek, Phys. Rev. B
// 49, 5065 (1994); Adv. Phys. 49, 1 (2000)) estimates traces with random
// vectors: for R random unit vectors r in a sector of dimension D,
//
//	Tr f(H) ~ (D/R) sum_r <r|f(H)|r>,
//	<r|f(H)|r> ~ sum_j w_rj f(eps_rj),
//
// where eps_rj are the Ritz values of M steps of plain Lanczos from r and
// w_rj = |<psi_j|r>|^2 the squared first components of the tridiagonal
// eigenvectors (Gauss quadrature, exact for polynomials of degree below
// 2M). Sample computes one such Ritz set without storing the Krylov vectors;
// a Sampler reuses its three work vectors across samples. RandomVector
// draws uniformly distributed unit vectors (normalized Gaussian components),
// for which E <r|A|r> = Tr A / D exactly.
//
// Thermodynamics combines the samples of all sectors into ln Z, E, C, S and
// the sector-weighted mean and variance of a sector scalar (for S^z
// sectors: M and chi), at every temperature, with jackknife errors over the
// random vectors; see its documentation for the estimator and the blocks.
//
// An observable A that need not commute with H (a moment with site-dependent
// g) is estimated from the same recurrences: SampleObservable forms A r once
// and accumulates <v_k|A r> in the pass that orthogonalizes each Krylov
// vector, so that
//
//	<r|f(H) A|r> ~ sum_j f(eps_j) <r|psi_j><psi_j|A|r>
//
// (Jaklic and Prelovsek's static estimator) costs one vector and one dot
// product per step more; Thermodynamics then gives <A>(T) (Observable), and
// ObservableDifference the difference of <A> between two sets of samples
// that share their random vectors, for example a central difference
// d<A>/dB with the jackknife error of the difference.
// Energies are measured from a shift and every sum is formed in logarithmic
// form, so that no temperature overflows or underflows.
//
// Limits of the estimate. At high temperature the error of the entropy
// vanishes (S -> ln sum_s D_s exactly, for any R) and the others are small,
// since random vectors self-average over many states. At temperatures far
// below the gap each sample contributes essentially its lowest Ritz value
// with weight |<psi_0|r>|^2, a random number of order 1/D: energies and
// other ratios are then exact only if the ground state appears converged
// in the samples (M large enough that the lowest Ritz value has converged;
// M of about 100 is typical), while Z and S carry the fluctuations of these
// weights, which the jackknife error reports. Missing low levels bias the
// low-temperature results without a warning. For temperatures comparable
// with the lowest gaps, combine FTLM with the exact lowest levels or use
// exact diagonalization of small sectors (SectorSamples.Exact).
//
// # Determinism and parallelism
//
// The same operator, options and seed give bit-identical results, for any
// GOMAXPROCS, provided that the operator's Apply (and ApplyDot, for a
// DotOperator) does: the start vectors come from math/rand/v2's PCG, and
// every reduction over a vector is summed in fixed chunks of 32 KiB whose
// partial sums are added in chunk order.
// Vectors of at least 65536 elements are processed by up to
// runtime.GOMAXPROCS(0) goroutines, each on a fixed range of chunks. The
// inner loops use gonum's BLAS kernels (Ddot, Daxpy, Zdotc, Zaxpy), except
// the fused three-term update of real vectors.
//
// # Memory
//
// Lowest allocates up to Basis+1 vectors of Dim elements, each when the
// basis first reaches it (a run that converges early touches fewer),
// O(Basis^2) besides and partial sums of the reductions (about 2 Basis
// floats per chunk of 32 KiB, or Dim/64 floats for the Gram matrices); the
// Ritz vectors are formed in place or in free slots of the basis, chunk by
// chunk. A Sampler allocates three vectors (four with an observable).
// MemoryEstimate gives the peak of both before anything is allocated.
//
// # Caveats and limitations
//
//   - The residual tolerance is relative to max(1, |theta|). The attainable
//     residual is about 1e-16 ||H|| sqrt(Dim); when |theta| is much smaller
//     than ||H||, a small Tol may be out of reach, and the run then ends at
//     MaxIterations with Converged false.
//   - The convergence rate depends on the relative gap (theta_K+1 -
//     theta_K) / (theta_max - theta_min). For a tight-binding chain of 10^6
//     sites the gap above the lowest level is 4e-11 of the band width, and a
//     residual of 1e-10 needs of the order of 10^5 steps: such problems are
//     out of reach of any Krylov method without a preconditioner or
//     symmetry reduction.
//   - Without Multiplicities the multiplicity of a degenerate level is not
//     guaranteed (see above); with it, it is found with probability 1 but at
//     extra cost.
//   - Partial reorthogonalization rests on estimates of the overlaps. They
//     are a model of the rounding (checked by measurement in the tests, not
//     proven). The level is Tol/100, so a small Tol costs more: for a
//     tight-binding ring 4 of 63 vectors were reorthogonalized at Tol =
//     1e-10, 71 of 77 at 1e-13 (still with fewer passes than Full). The
//     explicit residual check and the measured Gram matrices at restarts
//     guard the results either way; Full is there for comparison and for
//     operators whose rounding errors are much larger than eps ||H||.
//   - Sample does not reorthogonalize: after many steps converged Ritz values
//     reappear as copies sharing their weight. Sums of w_j f(eps_j) are
//     unaffected, but the individual Ritz values are not eigenvalues with
//     multiplicities.
//   - Thermodynamics needs at least two samples in every stochastic sector,
//     and its errors are statistical: with R samples they are themselves
//     uncertain by about 1/sqrt(2(R-1)).
//   - The observable estimate is the one-sided <r|f(H) A|r>: far below the
//     gap each sample still carries the cross terms <r|psi_0><psi_0|A|psi_l>
//     <psi_l|r> of the ground state with the rest, so its noise there is of
//     the order of the part of A that does not commute with H, not small
//     like that of the energy; the jackknife reports it. The symmetric
//     low-temperature form <r|e^{-H/2T} A e^{-H/2T}|r> (Aichhorn, Daghofer,
//     Evertz and von der Linden, Phys. Rev. B 67, 161103 (2003)) would need
//     the Krylov vectors stored and is not implemented.
package lanczos
