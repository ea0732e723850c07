package lanczos

import (
	"context"
	"math/bits"
	"runtime"
	"sync"
)

// heisenberg is the S^z = 0 sector of the periodic spin-1/2 Heisenberg
// ring H = sum_i S_i . S_{i+1} (J = 1) of n sites (n even), as a sparse
// matrix built here: basis states are the n-bit words with n/2 bits set,
// in ascending order (ranked with the combinatorial number system);
// S^z_i S^z_j is diagonal (+1/4 for parallel, -1/4 for antiparallel
// spins) and (S^+_i S^-_j + h.c.)/2 flips an antiparallel pair with
// matrix element 1/2. The same matrix as ed/testdata/eigsh_ring.py, whose
// scipy eigsh timing the speed target refers to. Apply is parallel
// over fixed row ranges, each row summed in a fixed order.
type heisenberg struct {
	n    int
	dim  int
	diag []float64
	ptr  []int64
	col  []int32
}

// binom returns the table c[m][k] = C(m, k), m, k <= n.
func binom(n int) [][]int {
	c := make([][]int, n+1)
	for m := range c {
		c[m] = make([]int, n+1)
		c[m][0] = 1
		for k := 1; k <= m; k++ {
			c[m][k] = c[m-1][k-1] + c[m-1][k]
		}
	}
	return c
}

func newHeisenberg(n int) *heisenberg {
	c := binom(n)
	half := n / 2
	dim := c[n][half]
	// rank of a word with half bits set: sum over its set bits, the l-th
	// lowest at position p, of C(p, l+1).
	rank := func(x uint64) int {
		r, l := 0, 0
		for x != 0 {
			p := bits.TrailingZeros64(x)
			l++
			r += c[p][l]
			x &= x - 1
		}
		return r
	}
	states := make([]uint64, 0, dim)
	for x := uint64(1)<<half - 1; x < 1<<n; {
		states = append(states, x)
		// next word with the same number of bits (Gosper's hack)
		u := x & -x
		v := x + u
		x = v + (((v ^ x) / u) >> 2)
	}
	h := &heisenberg{n: n, dim: dim, diag: make([]float64, dim), ptr: make([]int64, dim+1)}
	counts := make([]int64, dim)
	for r, x := range states {
		var d float64
		for i := range n {
			j := (i + 1) % n
			if (x>>i)&1 == (x>>j)&1 {
				d += 0.25
			} else {
				d -= 0.25
				counts[r]++
			}
		}
		h.diag[r] = d
	}
	for r := range dim {
		h.ptr[r+1] = h.ptr[r] + counts[r]
	}
	h.col = make([]int32, h.ptr[dim])
	for r, x := range states {
		p := h.ptr[r]
		for i := range n {
			j := (i + 1) % n
			if (x>>i)&1 != (x>>j)&1 {
				h.col[p] = int32(rank(x ^ (1<<i | 1<<j)))
				p++
			}
		}
	}
	return h
}

func (h *heisenberg) Dim() int { return h.dim }

func (h *heisenberg) Apply(_ context.Context, dst, src []float64) error {
	w := runtime.GOMAXPROCS(0)
	var wg sync.WaitGroup
	for t := range w {
		lo, hi := t*h.dim/w, (t+1)*h.dim/w
		wg.Add(1)
		go func() {
			defer wg.Done()
			for r := lo; r < hi; r++ {
				acc := h.diag[r] * src[r]
				var off float64
				for _, c := range h.col[h.ptr[r]:h.ptr[r+1]] {
					off += src[c]
				}
				dst[r] = acc + 0.5*off
			}
		}()
	}
	wg.Wait()
	return nil
}
