package lanczos

import "runtime"

// smallWork bounds the small allocations that do not scale with the
// dimension (coefficients, Ritz values, slice headers).
const smallWork = 1 << 18

// MemoryEstimate returns the peak number of bytes that the package
// allocates for a problem of dimension dim with real (complex false) or
// complex vectors: basis+1 vectors of dim elements for a Lowest basis of
// the given size (0 for none), plus vectors further vectors of dim
// elements, plus the small per-basis work (the projected matrices and the
// omega estimates, the per-chunk partial sums of the reductions and the
// Gram matrices, and the per-goroutine buffers of the in-place Ritz-vector
// update, for up to runtime.GOMAXPROCS(0) goroutines). The estimate holds
// for either Reorthogonalization.
//
//   - Lowest: MemoryEstimate(dim, DefaultBasis(dim, K), complex, 0) when
//     Options.Basis is 0 (or the Basis given, reduced to dim). The returned
//     eigenvectors are K of the basis vectors, so after Lowest returns only
//     K vectors stay referenced.
//   - A Sampler: MemoryEstimate(dim, 0, complex, SampleVectors), plus one
//     vector for the caller's random start vector.
//
// The operator's own memory is not included.
func MemoryEstimate(dim int, basis int, complex bool, vectors int) int64 {
	elem := int64(8)
	if complex {
		elem = 16
	}
	d := int64(max(dim, 0))
	b := int64(max(min(basis, dim), 0))
	nvec := int64(max(vectors, 0))
	if b > 0 {
		nvec += b + 1
	}
	total := nvec*d*elem + smallWork
	if b > 0 {
		chunk := int64(chunkBytes) / elem
		chunks := (d + chunk - 1) / chunk
		workers := int64(runtime.GOMAXPROCS(0))
		// Projected matrix t and its copies in one restart cycle (symmetric
		// matrix, eigenvectors twice, kept rows), coefficient vectors.
		total += 6*(b+1)*(b+1)*8 + 4*(b+1)*elem
		// Partial: omega estimates and Gram matrix, and the small complex
		// matrices of settle (eight of (b+1)^2).
		total += (b+1)*(b+1)*(8+elem) + 8*(b+1)*(b+1)*16
		// Partial sums, one buffer for all reductions: 2(b+1)+1 floats per
		// chunk, or the packed Gram matrix of up to b+1 vectors per block
		// of ng/64 chunks (see combine).
		ng := (b + 1) * (b + 2) / 2 * (elem / 8)
		cpb := max(1, ng/64)
		total += max(chunks*(2*(b+1)+1), ((chunks+cpb-1)/cpb)*ng) * 8
		// Ritz-vector update: b chunk-sized buffers per goroutine.
		total += workers * b * min(chunk, d) * elem
	} else if nvec > 0 {
		chunk := int64(chunkBytes) / elem
		total += (d+chunk-1)/chunk*8*3 + 1024
	}
	return total
}
