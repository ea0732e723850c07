package lanczos

import (
	"context"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"
	"unsafe"

	blasgonum "gonum.org/v1/gonum/blas/gonum"
)

// Scalar is the element type of the vectors: real (float64) or complex
// (complex128), or a type defined on one of them.
type Scalar interface{ ~float64 | ~complex128 }

// Operator is a Hermitian linear operator on vectors of length Dim().
type Operator[T Scalar] interface {
	Dim() int
	// Apply sets dst = H src; dst and src do not overlap. It may run in
	// parallel internally.
	Apply(ctx context.Context, dst, src []T) error
}

// DotOperator is an Operator that also returns, from the pass that forms a
// product, the two reductions that a Lanczos step needs next: ApplyDot
// sets dst = H src as Apply does and returns Re <src, dst> and ||dst||^2.
// Lowest uses it when the operator has it (and no vectors are locked),
// which saves the pass over both vectors that would compute them. For the
// results of Lowest to be reproducible the sums must not depend on the
// scheduling (for example partial sums over fixed blocks of rows, added in
// order), as Apply must not.
type DotOperator[T Scalar] interface {
	Operator[T]
	ApplyDot(ctx context.Context, dst, src []T) (dot, norm2 float64, err error)
}

// Vector kernels. Every reduction over a vector (dot products, norms) is
// summed chunk by chunk: the vector is cut into chunks of chunkBytes bytes
// (4096 real or 2048 complex elements),
// each chunk's partial sum is formed sequentially, and the partial sums are
// added in chunk order. The result therefore does not depend on how many
// goroutines formed the partial sums, and the package's results are
// bit-identical for any GOMAXPROCS (given an operator whose Apply is).
// Vectors of at least parallelMinLen elements are processed by up to
// runtime.GOMAXPROCS(0) goroutines, each taking a fixed contiguous range of
// chunks.
const (
	chunkBytes     = 1 << 15
	parallelMinLen = 1 << 16
)

// combinePiece is the number of elements of each input that combine adds
// into all its outputs at a time: 8 KiB of a real vector, so that the
// pieces of a basis of up to about 100 vectors and of their combinations
// fit in a core's L2 cache.
const combinePiece = 1024

var blasImpl blasgonum.Implementation

// isComplex reports whether T is complex128-based.
func isComplex[T Scalar]() bool {
	var z T
	return unsafe.Sizeof(z) == 16
}

// floats views x as float64s: itself for real T, the interleaved real and
// imaginary parts (length 2 len(x)) for complex T.
func floats[T Scalar](x []T) []float64 {
	if len(x) == 0 {
		return nil
	}
	var z T
	m := int(unsafe.Sizeof(z) / 8)
	return unsafe.Slice((*float64)(unsafe.Pointer(unsafe.SliceData(x))), m*len(x))
}

// complexes views a complex-based x as complex128s. T must be complex.
func complexes[T Scalar](x []T) []complex128 {
	if len(x) == 0 {
		return nil
	}
	return unsafe.Slice((*complex128)(unsafe.Pointer(unsafe.SliceData(x))), len(x))
}

// realPart returns Re z.
func realPart[T Scalar](z T) float64 { return *(*float64)(unsafe.Pointer(&z)) }

// fromReal returns the T with real part a and no imaginary part.
func fromReal[T Scalar](a float64) T {
	var z T
	*(*float64)(unsafe.Pointer(&z)) = a
	return z
}

// chunkLen is the number of elements of T in a chunk.
func chunkLen[T Scalar]() int {
	var z T
	return chunkBytes / int(unsafe.Sizeof(z))
}

// numChunks is the number of chunks of an n-vector of T.
func numChunks[T Scalar](n int) int {
	cl := chunkLen[T]()
	return (n + cl - 1) / cl
}

// chunkWorkers is the number of goroutines that process an n-vector of T.
func chunkWorkers[T Scalar](n int) int {
	if n < parallelMinLen {
		return 1
	}
	return max(1, min(runtime.GOMAXPROCS(0), numChunks[T](n)))
}

// forChunks calls fn(t, c, lo, hi) for every chunk c = [lo, hi) of 0..n-1,
// where t < chunkWorkers(n) is the goroutine that runs the call. Each chunk
// is visited exactly once; goroutine t takes the fixed range of chunks
// [t nc/w, (t+1) nc/w).
func forChunks[T Scalar](n int, fn func(t, c, lo, hi int)) {
	nc := numChunks[T](n)
	w := chunkWorkers[T](n)
	cl := chunkLen[T]()
	run := func(t int) {
		for c := t * nc / w; c < (t+1)*nc/w; c++ {
			fn(t, c, c*cl, min(n, (c+1)*cl))
		}
	}
	if w <= 1 {
		run(0)
		return
	}
	var wg sync.WaitGroup
	wg.Add(w - 1)
	for t := 1; t < w; t++ {
		go func() {
			defer wg.Done()
			run(t)
		}()
	}
	run(0)
	wg.Wait()
}

// forBlocks is forChunks over blocks of cpb consecutive chunks: it calls
// fn(t, blk, lo, hi) for every chunk [lo, hi) of block blk, the chunks of a
// block in order by the same goroutine t, which takes the fixed range of
// blocks [t nb/w, (t+1) nb/w) of the nb blocks (w = chunkWorkers(n), at
// most nb).
func forBlocks[T Scalar](n, cpb int, fn func(t, blk, lo, hi int)) {
	nc := numChunks[T](n)
	nb := (nc + cpb - 1) / cpb
	w := min(chunkWorkers[T](n), nb)
	cl := chunkLen[T]()
	run := func(t int) {
		for blk := t * nb / w; blk < (t+1)*nb/w; blk++ {
			for c := blk * cpb; c < min(nc, (blk+1)*cpb); c++ {
				fn(t, blk, c*cl, min(n, (c+1)*cl))
			}
		}
	}
	if w <= 1 {
		run(0)
		return
	}
	var wg sync.WaitGroup
	wg.Add(w - 1)
	for t := 1; t < w; t++ {
		go func() {
			defer wg.Done()
			run(t)
		}()
	}
	run(0)
	wg.Wait()
}

// workspace holds the per-chunk partial sums of the reductions and the
// per-goroutine buffers of combine, reused from call to call.
type workspace struct {
	part    []float64
	scratch [][]float64
}

// partials returns a zeroed buffer of n floats.
func (ws *workspace) partials(n int) []float64 {
	if cap(ws.part) < n {
		ws.part = make([]float64, n)
	}
	p := ws.part[:n]
	clear(p)
	return p
}

// sumPartials adds the per-chunk partials p[c*stride+i] in chunk order into
// out[i], i < stride.
func sumPartials(p []float64, stride int, out []float64) {
	clear(out[:stride])
	for c := 0; c+stride <= len(p); c += stride {
		for i := range stride {
			out[i] += p[c+i]
		}
	}
}

// dotMany sets out[i] = <vs[i], w> (conjugating vs[i]) for every i and
// returns ||w||^2. out must have len(vs) elements.
func dotMany[T Scalar](ws *workspace, vs [][]T, w []T, out []T) float64 {
	n := len(w)
	nv := len(vs)
	cplx := isComplex[T]()
	stride := nv + 1
	if cplx {
		stride = 2*nv + 1
	}
	p := ws.partials(numChunks[T](n) * stride)
	forChunks[T](n, func(_, c, lo, hi int) {
		q := p[c*stride : (c+1)*stride]
		chunkDots(vs, w, lo, hi, q, cplx)
	})
	sums := make([]float64, stride)
	sumPartials(p, stride, sums)
	storeCoefficients(sums, out, cplx)
	return sums[stride-1]
}

// chunkDots writes the partial dots of w[lo:hi] with every vs[i][lo:hi] into
// q (interleaved real, imaginary parts for complex T), and the partial
// ||w||^2 into the last element of q.
func chunkDots[T Scalar](vs [][]T, w []T, lo, hi int, q []float64, cplx bool) {
	if cplx {
		wc := complexes(w[lo:hi])
		for i, v := range vs {
			d := blasImpl.Zdotc(hi-lo, complexes(v[lo:hi]), 1, wc, 1)
			q[2*i], q[2*i+1] = real(d), imag(d)
		}
	} else {
		wf := floats(w[lo:hi])
		for i, v := range vs {
			q[i] = blasImpl.Ddot(hi-lo, floats(v[lo:hi]), 1, wf, 1)
		}
	}
	wf := floats(w[lo:hi])
	q[len(q)-1] = blasImpl.Ddot(len(wf), wf, 1, wf, 1)
}

// storeCoefficients copies the summed dots into out.
func storeCoefficients[T Scalar](sums []float64, out []T, cplx bool) {
	if cplx {
		oc := complexes(out)
		for i := range oc {
			oc[i] = complex(sums[2*i], sums[2*i+1])
		}
		return
	}
	of := floats(out)
	copy(of, sums[:len(of)])
}

// subtract sets w -= sum_i c[i] vs[i]. When out is not nil it then sets
// out[i] = <vs[i], w> with the updated w, in the same pass. It returns the
// updated ||w||^2.
func subtract[T Scalar](ws *workspace, vs [][]T, c []T, w []T, out []T) float64 {
	if out == nil {
		return update(ws, vs, c, w, nil, nil)
	}
	return update(ws, vs, c, w, vs, out)
}

// update sets w -= sum_i c[i] sub[i], skipping the vectors whose
// coefficient is zero (they are not read), then out[i] = <dots[i], w> with
// the updated w (out must have len(dots) elements), all in one pass over
// the chunks, and returns the updated ||w||^2.
func update[T Scalar](ws *workspace, sub [][]T, c []T, w []T, dots [][]T, out []T) float64 {
	n := len(w)
	nd := len(dots)
	cplx := isComplex[T]()
	stride := nd + 1
	if cplx {
		stride = 2*nd + 1
	}
	p := ws.partials(numChunks[T](n) * stride)
	forChunks[T](n, func(_, ch, lo, hi int) {
		axpyChunk(sub, c, w, lo, hi, cplx)
		q := p[ch*stride : (ch+1)*stride]
		chunkDots(dots, w, lo, hi, q, cplx)
	})
	sums := make([]float64, stride)
	sumPartials(p, stride, sums)
	storeCoefficients(sums[:stride-1], out, cplx)
	return sums[stride-1]
}

// recurrence is update(ws, sub, c, w, sub, out), the three-term step of
// Lowest: for one or two real vectors with nonzero coefficients it runs a
// single fused loop per chunk (updateChunkReal) instead of the BLAS calls,
// with the same w bit for bit and the sums added in another order.
func recurrence[T Scalar](ws *workspace, sub [][]T, c []T, w []T, out []T) float64 {
	if isComplex[T]() || len(sub) == 0 || len(sub) > 2 || slices.Contains(c[:len(sub)], 0) {
		return update(ws, sub, c, w, sub, out)
	}
	n := len(w)
	stride := len(sub) + 1
	p := ws.partials(numChunks[T](n) * stride)
	forChunks[T](n, func(_, ch, lo, hi int) {
		updateChunkReal(sub, c, w, lo, hi, p[ch*stride:(ch+1)*stride])
	})
	sums := make([]float64, stride)
	sumPartials(p, stride, sums)
	storeCoefficients(sums[:stride-1], out, false)
	return sums[stride-1]
}

// updateChunkReal is the chunk of recurrence for one or two real vectors
// sub with nonzero coefficients: one loop sets w -= c[0] sub[0] (then
// -= c[1] sub[1]), rounded as the BLAS path rounds it (the conversions
// keep the products from being fused), and sums <sub[i], w> with the
// updated w (into q[i]) and ||w||^2 (into q[len(sub)]), each in two
// partial sums over the even and odd elements, added at the end.
func updateChunkReal[T Scalar](sub [][]T, c []T, w []T, lo, hi int, q []float64) {
	wf := floats(w[lo:hi])
	cf := floats(c)
	s0 := floats(sub[0][lo:hi])
	s0 = s0[:len(wf)]
	c0 := cf[0]
	var d0, d0b, d1, d1b, n2, n2b float64
	if len(sub) == 1 {
		i := 0
		for ; i+1 < len(wf); i += 2 {
			x := wf[i] - float64(c0*s0[i])
			y := wf[i+1] - float64(c0*s0[i+1])
			wf[i], wf[i+1] = x, y
			d0 += s0[i] * x
			d0b += s0[i+1] * y
			n2 += x * x
			n2b += y * y
		}
		if i < len(wf) {
			x := wf[i] - float64(c0*s0[i])
			wf[i] = x
			d0 += s0[i] * x
			n2 += x * x
		}
	} else {
		s1 := floats(sub[1][lo:hi])
		s1 = s1[:len(wf)]
		c1 := cf[1]
		i := 0
		for ; i+1 < len(wf); i += 2 {
			x := (wf[i] - float64(c0*s0[i])) - float64(c1*s1[i])
			y := (wf[i+1] - float64(c0*s0[i+1])) - float64(c1*s1[i+1])
			wf[i], wf[i+1] = x, y
			d0 += s0[i] * x
			d0b += s0[i+1] * y
			d1 += s1[i] * x
			d1b += s1[i+1] * y
			n2 += x * x
			n2b += y * y
		}
		if i < len(wf) {
			x := (wf[i] - float64(c0*s0[i])) - float64(c1*s1[i])
			wf[i] = x
			d0 += s0[i] * x
			d1 += s1[i] * x
			n2 += x * x
		}
	}
	q[0] = d0 + d0b
	if len(sub) == 2 {
		q[1] = d1 + d1b
	}
	q[len(sub)] = n2 + n2b
}

// axpyChunk sets w[lo:hi] -= sum_i c[i] sub[i][lo:hi], skipping zero
// coefficients.
func axpyChunk[T Scalar](sub [][]T, c []T, w []T, lo, hi int, cplx bool) {
	if cplx {
		wc := complexes(w[lo:hi])
		cc := complexes(c)
		for i, v := range sub {
			if cc[i] != 0 {
				blasImpl.Zaxpy(hi-lo, -cc[i], complexes(v[lo:hi]), 1, wc, 1)
			}
		}
		return
	}
	wf := floats(w[lo:hi])
	cf := floats(c)
	for i, v := range sub {
		if cf[i] != 0 {
			blasImpl.Daxpy(hi-lo, -cf[i], floats(v[lo:hi]), 1, wf, 1)
		}
	}
}

// subtractScale sets w = a (w - sum_i c[i] sub[i]) for real a, in one pass
// (zero coefficients skipped).
func subtractScale[T Scalar](sub [][]T, c []T, w []T, a float64) {
	cplx := isComplex[T]()
	forChunks[T](len(w), func(_, _, lo, hi int) {
		axpyChunk(sub, c, w, lo, hi, cplx)
		f := floats(w[lo:hi])
		blasImpl.Dscal(len(f), a, f, 1)
	})
}

// norm2 returns ||x||^2.
func norm2[T Scalar](ws *workspace, x []T) float64 {
	p := ws.partials(numChunks[T](len(x)))
	forChunks[T](len(x), func(_, c, lo, hi int) {
		f := floats(x[lo:hi])
		p[c] = blasImpl.Ddot(len(f), f, 1, f, 1)
	})
	var s float64
	for _, v := range p {
		s += v
	}
	return s
}

// scale sets x *= a for real a.
func scale[T Scalar](x []T, a float64) {
	forChunks[T](len(x), func(_, _, lo, hi int) {
		f := floats(x[lo:hi])
		blasImpl.Dscal(len(f), a, f, 1)
	})
}

// combine sets out[l] = sum_i u[i*k+l] vs[i] for l < k = len(out), for the
// real len(vs) x k matrix u (row-major), or with the coefficients uc[i*k+l]
// of type T when u is nil. out may be vs[:k] (in place) or k
// vectors that overlap none of vs: each chunk of the k results is formed in
// a scratch buffer of k chunks (one buffer per goroutine) before it is
// written, so no extra vector is allocated.
//
// When gram is not nil (at least (k+1)^2 elements) the same pass also
// computes the Gram matrix of the results, gram[a*(k+1)+c] = <out[c],
// out[a]> for c <= a < k, and, when extra is not nil, gram[k*(k+1)+c] =
// <out[c], extra>.
func combine[T Scalar](ws *workspace, vs [][]T, u []float64, uc []T, out [][]T, gram []T, extra []T) {
	k := len(out)
	if len(vs) == 0 || k == 0 {
		return
	}
	n := len(vs[0])
	var z T
	per := int(unsafe.Sizeof(z) / 8)
	cplx := per == 2
	w := chunkWorkers[T](n)
	for len(ws.scratch) < w {
		ws.scratch = append(ws.scratch, nil)
	}
	scratch := ws.scratch[:w]
	for t := range scratch {
		if need := k * min(n, chunkLen[T]()) * per; len(scratch[t]) < need {
			scratch[t] = make([]float64, need)
		}
	}
	// packed Gram partials: the lower triangle row by row, then the dots
	// with extra; real and imaginary parts for complex T.
	ng := 0
	if gram != nil {
		ng = k * (k + 1) / 2
		if extra != nil {
			ng += k
		}
		ng *= per
	}
	// The partials are kept per block of cpb chunks, so that they take
	// about Dim/64 floats whatever k is; a block's chunks are summed in
	// order.
	cpb := max(1, ng/64)
	var p []float64
	var tmp [][]float64
	if ng > 0 {
		p = ws.partials((numChunks[T](n) + cpb - 1) / cpb * ng)
		tmp = make([][]float64, w)
		for t := range tmp {
			tmp[t] = make([]float64, ng)
		}
	}
	forBlocks[T](n, cpb, func(t, blk, lo, hi int) {
		buf := scratch[t]
		m := (hi - lo) * per
		combineChunk(vs, u, uc, k, lo, hi, per, buf[:k*m])
		if ng > 0 {
			q := tmp[t]
			at := 0
			for a := range k {
				ya := buf[a*m : (a+1)*m]
				for c := 0; c <= a; c++ {
					at += chunkDot(buf[c*m:(c+1)*m], ya, q[at:], cplx)
				}
			}
			if extra != nil {
				xe := floats(extra[lo:hi])
				for c := range k {
					at += chunkDot(buf[c*m:(c+1)*m], xe, q[at:], cplx)
				}
			}
			pb := p[blk*ng : (blk+1)*ng]
			for i, x := range q {
				pb[i] += x
			}
		}
		for l := range k {
			copy(floats(out[l][lo:hi]), buf[l*m:(l+1)*m])
		}
	})
	if ng > 0 {
		sums := make([]float64, ng)
		sumPartials(p, ng, sums)
		gf := floats(gram)
		at := 0
		put := func(i int) {
			copy(gf[i*per:(i+1)*per], sums[at:at+per])
			at += per
		}
		for a := range k {
			for c := 0; c <= a; c++ {
				put(a*(k+1) + c)
			}
		}
		if extra != nil {
			for c := range k {
				put(k*(k+1) + c)
			}
		}
	}
}

// chunkDot writes <x, y> (x conjugated; real and imaginary parts for
// complex T) of two float views into q and returns the number of floats
// written.
func chunkDot(x, y []float64, q []float64, cplx bool) int {
	if cplx {
		d := blasImpl.Zdotc(len(x)/2, asComplex(x), 1, asComplex(y), 1)
		q[0], q[1] = real(d), imag(d)
		return 2
	}
	q[0] = blasImpl.Ddot(len(x), x, 1, y, 1)
	return 1
}

// asComplex views interleaved real and imaginary parts as complex128s.
func asComplex(f []float64) []complex128 {
	if len(f) == 0 {
		return nil
	}
	return unsafe.Slice((*complex128)(unsafe.Pointer(unsafe.SliceData(f))), len(f)/2)
}

// combineChunk sets buf[l*m:(l+1)*m] = sum_i u[i*k+l] vs[i][lo:hi] (float
// views, m = (hi-lo) per) for l < k, with the coefficients uc when u is nil.
// Zero coefficients are skipped. The chunk is processed in pieces of
// combinePiece elements, every input's piece added into all k outputs
// before the next input's is read, so that each input is read from memory
// once while the pieces of all the outputs stay in cache; every element
// of an output is still the sum over i in increasing order.
func combineChunk[T Scalar](vs [][]T, u []float64, uc []T, k, lo, hi, per int, buf []float64) {
	m := (hi - lo) * per
	clear(buf[:k*m])
	for p0 := lo; p0 < hi; p0 += combinePiece {
		p1 := min(hi, p0+combinePiece)
		f0, f1 := (p0-lo)*per, (p1-lo)*per
		for i, v := range vs {
			x := floats(v[p0:p1])
			switch {
			case u != nil:
				for l, a := range u[i*k : (i+1)*k] {
					if a != 0 {
						blasImpl.Daxpy(len(x), a, x, 1, buf[l*m+f0:l*m+f1], 1)
					}
				}
			case per == 2:
				xc := complexes(v[p0:p1])
				for l, a := range complexes(uc[i*k : (i+1)*k]) {
					if a != 0 {
						blasImpl.Zaxpy(len(xc), a, xc, 1, asComplex(buf[l*m+f0:l*m+f1]), 1)
					}
				}
			default:
				for l, a := range floats(uc[i*k : (i+1)*k]) {
					if a != 0 {
						blasImpl.Daxpy(len(x), a, x, 1, buf[l*m+f0:l*m+f1], 1)
					}
				}
			}
		}
	}
}

// fillUniform fills x with components uniform in [-1, 1) (real and
// imaginary parts independently for complex T), drawn in index order.
func fillUniform[T Scalar](x []T, rng *rand.Rand) {
	f := floats(x)
	for i := range f {
		f[i] = 2*rng.Float64() - 1
	}
}

// FillRandomVector fills r with a random unit vector, uniformly distributed
// on the unit sphere: independent standard Gaussian components (for complex
// T, real and imaginary parts independent Gaussians of variance 1/2), drawn
// in index order from rng, then normalized. Every component has the same
// expected weight E|r_i|^2 = 1/len(r), and for any Hermitian A
//
//	E <r|A|r> = Tr A / len(r),
//
// which is what the finite-temperature Lanczos method needs.
func FillRandomVector[T Scalar](r []T, rng *rand.Rand) {
	f := floats(r)
	sd := 1.0
	if isComplex[T]() {
		sd = math.Sqrt(0.5)
	}
	for i := range f {
		f[i] = sd * rng.NormFloat64()
	}
	var ws workspace
	nr := math.Sqrt(norm2(&ws, r))
	if nr == 0 {
		// Probability zero; a unit basis vector keeps the contract.
		clear(f)
		f[0] = 1
		return
	}
	scale(r, 1/nr)
}

// RandomVector returns a new random unit vector of length dim; see
// FillRandomVector.
func RandomVector[T Scalar](dim int, rng *rand.Rand) []T {
	if dim <= 0 {
		panic("lanczos: RandomVector: dim must be positive")
	}
	r := make([]T, dim)
	FillRandomVector(r, rng)
	return r
}
