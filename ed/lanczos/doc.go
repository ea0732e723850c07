// Package lanczos holds the Krylov methods of the engine for sectors too
// large for dense diagonalization: the lowest eigenpairs by thick-restart
// Lanczos (Lowest), and the building blocks of the finite-temperature
// Lanczos method (Sample, Sampler, RandomVector, Thermodynamics). Both work
// matrix-free through an Operator and are generic over real (float64) and
// complex (complex128) vectors.
//
// # Lowest eigenpairs
//
// Lowest builds an orthonormal Krylov basis V = [v_0 ... v_{b-1}] of at
// most Options.Basis vectors and the real symmetric projected matrix T with
//
//	H V = V T + beta v_b e_{b-1}^T,   T = V^H H V.
//
// T is real even for complex vectors: its diagonal entries <v|H|v> are real
// for Hermitian H and its couplings are norms. Every new vector is
// orthogonalized against the whole basis by classical Gram-Schmidt applied
// twice ("twice is enough": Giraud, Langou and Rozloznik, Comput. Math.
// Appl. 50, 1069 (2005); Parlett, The Symmetric Eigenvalue Problem, SIAM
// 1998, on Kahan's argument), so that the basis stays orthogonal to rounding and no spurious
// copies of converged eigenvalues appear. When the basis is full, the
// eigenpairs (theta_i, u_i) of T give Ritz pairs (theta_i, V u_i) whose
// residual norms follow from the Lanczos relation without touching H:
//
//	||H V u_i - theta_i V u_i|| = |beta (u_i)_{b-1}|.
//
// A pair is converged when this is at most Tol max(1, |theta_i|). If the K
// wanted pairs are not all converged, the basis is restarted thickly (Wu
// and Simon, SIAM J. Matrix Anal. Appl. 22, 602 (2000)): the lowest
// kk = K + (Basis-K)/2 Ritz vectors are kept in place, v_b follows them, and
// T becomes the diagonal of their Ritz values with one arrow row of
// couplings beta (u_i)_{b-1}, still real symmetric. When all K estimates
// pass, the K Ritz vectors are formed and each is checked with one explicit
// application of H; Result.Values are their Rayleigh quotients and
// Result.Residuals the explicit ||H y - theta y||. If an explicit residual
// fails (rounding can make the estimate optimistic), the iteration goes on
// from the restarted basis. The small eigenproblems are solved by LAPACK's
// Dsyev in gonum.
//
// If the Krylov space becomes invariant (the new vector's norm falls below
// 1e-12 ||H||, or the second Gram-Schmidt round removes more than 30% of
// what the first left, the twice-is-enough sign that the vector is in the
// span to rounding), the next vector is a new pseudo-random vector orthogonal to the
// basis, uncoupled in T; when the basis spans the whole space the Ritz pairs
// are exact.
//
// Options.MaxIterations bounds all applications of H, the explicit checks
// included. A run that reaches it returns its best pairs with Converged
// false and a warning; the values are then still Rayleigh-Ritz values,
// upper bounds of the true eigenvalues. A context that is done stops the
// run before the next application of H.
//
// Per Lanczos step the cost is one application of H plus three passes over
// the current basis of j vectors (the dot products, the first subtraction
// fused with the second round's dot products, the second subtraction):
// about 6 j Dim multiply-adds, memory-bound for large Dim. With the default
// basis of 40 the basis work dominates a cheap sparse operator (for a
// tight-binding chain it is about 95% of the time), and is comparable with
// the application of a spin Hamiltonian.
//
// # Degenerate levels
//
// From a single start vector, a Krylov method in exact arithmetic finds one
// vector per eigenspace: for a degenerate level it sees only the projection
// of the start vector on the eigenspace. With full reorthogonalization and
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
// GOMAXPROCS, provided that the operator's Apply does: the start vectors
// come from math/rand/v2's PCG, and every reduction over a vector is summed
// in fixed chunks of 32 KiB whose partial sums are added in chunk order.
// Vectors of at least 65536 elements are processed by up to
// runtime.GOMAXPROCS(0) goroutines, each on a fixed range of chunks. The
// inner loops use gonum's BLAS kernels (Ddot, Daxpy, Zdotc, Zaxpy).
//
// # Memory
//
// Lowest allocates Basis+1 vectors of Dim elements once, and O(Basis^2)
// besides; the Ritz vectors are formed in place, chunk by chunk. A Sampler
// allocates three vectors. MemoryEstimate gives both before anything is
// allocated.
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
//   - Sample does not reorthogonalize: after many steps converged Ritz values
//     reappear as copies sharing their weight. Sums of w_j f(eps_j) are
//     unaffected, but the individual Ritz values are not eigenvalues with
//     multiplicities.
//   - Thermodynamics needs at least two samples in every stochastic sector,
//     and its errors are statistical: with R samples they are themselves
//     uncertain by about 1/sqrt(2(R-1)).
package lanczos
