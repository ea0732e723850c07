// Package eigen holds the dense eigensolvers of the engine: the eigenvalues
// and, optionally, the eigenvectors of a real symmetric or complex Hermitian
// matrix, all of them or the lowest k.
//
// # Overview
//
// A Backend solves one matrix per call, as a Job says: every eigenvalue, or
// the lowest Job.Lowest, with or without their eigenvectors. Two backends
// exist:
//
//	PureGo   this package's Householder reductions and QL/QR iterations,
//	         always compiled, cancellable within milliseconds
//	LAPACK   LAPACK through cgo (LAPACKE over OpenBLAS), compiled with the
//	         build tag lapack: go build -tags lapack ./...
//
// Default returns the one that the build selected (LAPACK with the tag,
// PureGo without; a build without the tag needs no cgo), and Solver names
// it; the engine reports it as Report.Solver and `frustum version` prints
// it. Symmetric, Hermitian, SymmetricContext and HermitianContext are the
// short forms for every eigenvalue with Default. A Workspace carries the
// scratch memory from one solve to the next, so that the sectors and the
// field points that a worker diagonalizes in turn allocate it once.
//
// # Layout
//
// Matrices are row-major n x n slices of which only the lower triangle is
// read (a[i*n+j], j <= i; for Hermitian matrices the diagonal's imaginary
// part is ignored), and they are destroyed. Eigenvalues come back
// ascending; eigenvectors as the columns of a row-major n x k matrix,
// vecs[i*k+j] the i-th component of the eigenvector of values[j]:
//
//	A vecs[:,j] = values[j] vecs[:,j],   vecs^H vecs = I.
//
// vecs may share the storage of a (LAPACK returns the eigenvectors in a's
// place), never that of the Workspace.
//
// # The pure-Go backend
//
// Both solvers run three stages. First a unitary reduction to a REAL
// symmetric tridiagonal matrix T,
//
//	T = Q^H A Q,   Q unitary (orthogonal when A is real),
//
// by this package's blocked, row-oriented Householder reductions: sytrd for
// real A, hetrd for complex A (whose reflectors are chosen so that the
// subdiagonal comes out real). Second the spectrum of T,
//
//	T = Z diag(lambda) Z^T,   Z orthogonal,
//
// by sterf (root-free QL/QR, no vectors; a port of LAPACK's dsterf) for
// values only, and by the implicitly shifted QL/QR iteration tridiagQL for
// vectors, which accumulates the plane rotations G of the iteration as
// Z <- Z G. Third the eigenvectors of A,
//
//	A V = V diag(lambda),   V = Q Z,   column k of V for lambda_k.
//
// Real: Z starts as the explicit Q (formQ, LAPACK's Dorgtr in blocked WY
// form), so V = Z at the end. Complex: Z starts as I and the complex Q is
// applied to the real Z in blocked WY form (backTransform).
//
// Costs for n x n, in real flops: reduction 4n^3/3 (real) or 16n^3/3
// (complex), sterf O(n^2), QL vectors about 6n^3, formQ 4n^3/3, complex
// back-transformation 8n^3. Memory beyond a, with vectors: the n^2 result
// (real), or the real n^2 Z and the complex n^2 result (complex); values
// only: O(n). The large steps of the reductions, of the rotations and of the
// back-transformations run on up to GOMAXPROCS goroutines.
//
// A subset of the eigenvectors (Job.VectorsFor, or Job.Lowest = k < n with
// vectors) takes the eigenvalues from sterf on copies of T, chooses m, and
// computes only m eigenvectors of T by inverse iteration (stein.go, after
// LAPACK's dstein: unreduced blocks, LU with partial pivoting, clusters
// reorthogonalized, a residual check), then V = Q Z for the n x m Z alone
// (8n^2 m complex, 2n^2 m real flops). Where the clusters would cost more
// than QL (steinMaxPairs), or where inverse iteration fails, the QL
// iteration gives Z instead and only its m columns are back-transformed.
// The cost is then the reduction plus O(n^2 m): at n = 4000 complex, 21.9 s
// for 50 vectors against 21.1 s for the eigenvalues and 76 s for all.
//
// # The LAPACK backend
//
// Each case calls the routine that was fastest here (2-core AMD EPYC,
// OpenBLAS 0.3.21; BenchmarkLAPACKRoutines and BenchmarkDenseAgainstNumpy,
// the best runs, seconds; the ratios held in every run):
//
//	every eigenvalue          dsyevd / zheevd, jobz = N: dsytrd / zhetrd
//	                          and dsterf, as numpy.linalg.eigvalsh
//	every eigenvector, real   dsyevd, jobz = V: divide and conquer, as
//	                          numpy.linalg.eigh (n = 2000: 1.0 s; MRRR,
//	                          dsyevr, 1.6 s)
//	every eigenvector,        zheevr, range = A: MRRR (n = 2000: 2.7 s;
//	complex                   divide and conquer, zheevd, 5.7 s; n = 4000:
//	                          22 s against 61 s and more)
//	the lowest k              dsyevr / zheevr, range = I, il = 1, iu = k:
//	                          bisection, and inverse iteration for the k
//	                          vectors, up to k = n/10 values or n/6
//	                          vectors (n = 1000, k = 10: 0.035 s values,
//	                          0.037 s vectors, against 0.050 s and 0.11 s
//	                          for the whole real spectrum); beyond, the
//	                          whole spectrum is cut to k
//	vectors chosen from the   dsytrd / zhetrd, dsterf, dstemr (il = 1,
//	eigenvalues (VectorsFor)  iu = m; dstebz and dstein where it fails),
//	                          dormtr / zunmtr on the n x m Z
//
// The row-major lower triangle is, read column-major, the upper triangle of
// A^T = conj(A); it is passed as is with uplo = U, and the eigenvectors of
// conj(A), conj(v), are conjugated back while they are transposed to the
// row-major layout: in place in a (dsyevd, on GOMAXPROCS goroutines), or
// from LAPACK's n x k Z into a's storage (dsyevr, zheevr). Work arrays come
// from the Workspace; with every vector they are 1 + 6n + 2n^2 reals
// (dsyevd: twice the real matrix) or the complex n x n Z and O(n) (zheevr:
// once the complex matrix), within the engine's memory plan of three
// matrices. The lower triangle is scanned for non-finite entries first
// (ErrNoConvergence, as PureGo). LAPACK's 32-bit integers limit the order
// to 32766 with vectors and 46340 without (an error beyond).
//
// OpenBLAS threads: the count is process-wide, and OpenBLAS's threaded
// kernels split sums by thread, so the rounding depends on it. To keep
// results reproducible bit for bit (the same job from the CLI and from the
// server, whatever runs beside it) the count of a call depends on its order
// alone: a call of order >= 256 runs alone, on min(GOMAXPROCS, OpenBLAS's
// own count) threads (read at first use; OPENBLAS_NUM_THREADS lowers it);
// smaller calls run side by side on one thread each. When the engine runs
// sectors or fields on parallel goroutines, its large blocks therefore take
// turns with every core each, and its many small ones run one per core: no
// oversubscription.
//
// # Cancellation
//
// PureGo polls a flag that context.AfterFunc sets when the context is done
// (one atomic load per poll; for a context that is never done, such as
// context.Background, a nil compare), in every stage and in every goroutine
// it starts: every 16 rows of the scan for the largest entry; before each
// Householder step and every 16 rows of its matrix-vector product and of
// the panel's rank-2k update; before each QL/QR sweep (of sterf and of
// tridiagQL), every four rows while the deferred rotations are applied and
// every 16 rows of the final column permutation; before each block of 32
// reflectors and every 16 rows of each column tile of formQ and
// backTransform. No gonum routine that runs longer than O(n) is called.
//
// The longest stretch between two polls, timed with -tags eigenprobe on one
// core (GOMAXPROCS=1, so no stretch overlaps another) at n = 4000 with
// vectors, is an allocation, not arithmetic: 68 ms for the 256 MB complex
// result that backTransform makes (the runtime zeroes it), 23 ms for the
// 128 MB real Q of formQ; values only, or any stretch of arithmetic, at most
// 5 ms. These grow as n^2 (extrapolated: about 270 ms for the complex
// result at n = 8000).
// From cancel() to return, on the 2-core development machine at n = 4000
// with vectors, cancelled at ten points spread over the call: at most 0.3 ms
// (real, 46 s call) and 1.7 ms (complex, 95 s call).
//
// LAPACK checks ctx before the library call and cannot be interrupted in
// it: a call cancelled while it runs returns its (complete) result when the
// library returns, and the engine stops at its next check. The wait is the
// rest of the call: at n = 4000 with vectors about 8 s (real) and 25 s
// (complex).
package eigen
