package eigen

// transposeBlock is the tile edge of the transpositions: two 32 x 32 tiles
// of complex128 take 32 KiB.
const transposeBlock = 32

// transposeSquare transposes the real n x n matrix a in place, on up to
// GOMAXPROCS goroutines: it turns LAPACK's column-major eigenvectors into
// the row-major layout of the API. Cost: one read and one write of a.
func transposeSquare(a []float64, n int) {
	tileSwaps(n, func(i, j int) { a[i*n+j], a[j*n+i] = a[j*n+i], a[i*n+j] }, nil)
}

// conjTransposeSquare replaces the complex n x n matrix a by its conjugate
// transpose, in place, on up to GOMAXPROCS goroutines.
func conjTransposeSquare(a []complex128, n int) {
	tileSwaps(n, func(i, j int) {
		x, y := a[i*n+j], a[j*n+i]
		a[i*n+j], a[j*n+i] = complex(real(y), -imag(y)), complex(real(x), -imag(x))
	}, func(i int) { a[i*n+i] = complex(real(a[i*n+i]), -imag(a[i*n+i])) })
}

// tileSwaps calls swap(i, j) for every i < j < n and diag(i) (if not nil)
// for every i, tile by tile (transposeBlock square), strips of tiles on
// parallel goroutines: strip s handles the tiles (s, s'), s' >= s, so every
// pair is swapped once and no two goroutines touch the same entry.
func tileSwaps(n int, swap func(i, j int), diag func(i int)) {
	const bs = transposeBlock
	strips := (n + bs - 1) / bs
	w := max(1, min(parallelWorkers(n*n), strips))
	parallelFor(w, func(t int) {
		for s := t; s < strips; s += w {
			i0, i1 := s*bs, min(s*bs+bs, n)
			for j0 := i0; j0 < n; j0 += bs {
				j1 := min(j0+bs, n)
				for i := i0; i < i1; i++ {
					jstart := j0
					if j0 == i0 {
						jstart = i + 1
						if diag != nil {
							diag(i)
						}
					}
					for j := jstart; j < j1; j++ {
						swap(i, j)
					}
				}
			}
		}
	})
}

// transposeInto writes the transpose of the real column-major n x k matrix
// z (z[i+j*n]) into dst as a row-major n x k matrix (dst[i*k+j]).
func transposeInto(dst, z []float64, n, k int) {
	tiles(n, k, func(i, j int) { dst[i*k+j] = z[i+j*n] })
}

// conjTransposeInto is transposeInto for complex z, conjugating.
func conjTransposeInto(dst, z []complex128, n, k int) {
	tiles(n, k, func(i, j int) { x := z[i+j*n]; dst[i*k+j] = complex(real(x), -imag(x)) })
}

// tiles calls f(i, j) for i < n, j < k, tile by tile.
func tiles(n, k int, f func(i, j int)) {
	const bs = transposeBlock
	for i0 := 0; i0 < n; i0 += bs {
		for j0 := 0; j0 < k; j0 += bs {
			for i := i0; i < min(i0+bs, n); i++ {
				for j := j0; j < min(j0+bs, k); j++ {
					f(i, j)
				}
			}
		}
	}
}
