package lanczos

import (
	"context"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// Test operators and dense references. The references are outside checks:
// gonum's dense symmetric eigensolver (mat.EigenSym), applied to the matrix
// itself (real) or to its real symmetric 2n embedding (complex, built here in
// the tests only), and closed forms.

// sparse is a Hermitian matrix in compressed rows.
type sparse[T Scalar] struct {
	n    int
	ptr  []int
	col  []int
	val  []T
	mu   sync.Mutex
	hook func() // called on every Apply, under mu
}

func (a *sparse[T]) Dim() int { return a.n }

func (a *sparse[T]) Apply(ctx context.Context, dst, src []T) error {
	if a.hook != nil {
		a.mu.Lock()
		a.hook()
		a.mu.Unlock()
	}
	for i := range a.n {
		var s T
		for p := a.ptr[i]; p < a.ptr[i+1]; p++ {
			s += a.val[p] * src[a.col[p]]
		}
		dst[i] = s
	}
	return nil
}

// randomSparse returns a random sparse Hermitian n x n matrix with about
// perRow off-diagonal entries in each row: off-diagonal entries uniform in
// [-1, 1) (real and imaginary parts), diagonal uniform in [-2, 2).
func randomSparse[T Scalar](n, perRow int, seed uint64) *sparse[T] {
	rng := rand.New(rand.NewPCG(seed, 7))
	entries := make([]map[int]T, n)
	for i := range entries {
		entries[i] = map[int]T{}
	}
	for i := range n {
		entries[i][i] = fromReal[T](4*rng.Float64() - 2)
	}
	cplx := isComplex[T]()
	for i := range n {
		for range perRow / 2 {
			j := rng.IntN(n)
			if j == i {
				continue
			}
			re, im := 2*rng.Float64()-1, 2*rng.Float64()-1
			if !cplx {
				im = 0
			}
			entries[i][j] += scalar[T](re, im)
			entries[j][i] += scalar[T](re, -im)
		}
	}
	return fromEntries(entries)
}

func fromEntries[T Scalar](entries []map[int]T) *sparse[T] {
	n := len(entries)
	a := &sparse[T]{n: n, ptr: make([]int, n+1)}
	for i, row := range entries {
		cols := make([]int, 0, len(row))
		for j := range row {
			cols = append(cols, j)
		}
		slices.Sort(cols)
		for _, j := range cols {
			a.col = append(a.col, j)
			a.val = append(a.val, row[j])
		}
		a.ptr[i+1] = len(a.col)
	}
	return a
}

// dense returns the matrix as a dense row-major n x n array.
func (a *sparse[T]) dense() []T {
	d := make([]T, a.n*a.n)
	for i := range a.n {
		for p := a.ptr[i]; p < a.ptr[i+1]; p++ {
			d[i*a.n+a.col[p]] += a.val[p]
		}
	}
	return d
}

// blockDiagonal returns diag(a, a, ..., a) with copies blocks.
func blockDiagonal[T Scalar](a *sparse[T], copies int) *sparse[T] {
	entries := make([]map[int]T, a.n*copies)
	for c := range copies {
		for i := range a.n {
			row := map[int]T{}
			for p := a.ptr[i]; p < a.ptr[i+1]; p++ {
				row[c*a.n+a.col[p]] = a.val[p]
			}
			entries[c*a.n+i] = row
		}
	}
	return fromEntries(entries)
}

// denseEigenvalues returns all eigenvalues of the Hermitian matrix d (n x n)
// ascending, by gonum's mat.EigenSym; a complex matrix H = A + iB goes
// through its real symmetric embedding [[A, -B], [B, A]], whose spectrum is
// that of H with every value twice.
func denseEigenvalues[T Scalar](t testing.TB, d []T, n int) []float64 {
	t.Helper()
	if !isComplex[T]() {
		f := floats(d)
		var es mat.EigenSym
		if !es.Factorize(mat.NewSymDense(n, slices.Clone(f)), false) {
			t.Fatal("reference EigenSym failed")
		}
		return es.Values(nil)
	}
	c := complexes(d)
	m := mat.NewSymDense(2*n, nil)
	for i := range n {
		for j := range n {
			re, im := real(c[i*n+j]), imag(c[i*n+j])
			if j >= i {
				m.SetSym(i, j, re)
				m.SetSym(n+i, n+j, re)
			}
			m.SetSym(n+i, j, im) // lower-left block B, upper-right -B
		}
	}
	var es mat.EigenSym
	if !es.Factorize(m, false) {
		t.Fatal("reference EigenSym failed")
	}
	all := es.Values(nil)
	vals := make([]float64, n)
	for i := range vals {
		vals[i] = all[2*i]
		if math.Abs(all[2*i]-all[2*i+1]) > 1e-9*max(1, math.Abs(all[2*i])) {
			t.Fatalf("embedding spectrum not doubled at %d: %g %g", i, all[2*i], all[2*i+1])
		}
	}
	return vals
}

// ring is the tight-binding ring of n sites with hopping 1, a flux phase phi
// per bond and an on-site energy -v at site 0:
//
//	H = -sum_j (e^{i phi} |j><j+1| + e^{-i phi} |j+1><j|) - v |0><0|.
//
// For real T, phi must be 0. Apply is parallel over fixed row ranges.
type ring[T Scalar] struct {
	n        int
	phi      float64
	v        float64
	open     bool // no bond between n-1 and 0
	applies  int
	mu       sync.Mutex
	onApply  func(count int)
	parallel bool
}

func (r *ring[T]) Dim() int { return r.n }

func (r *ring[T]) Apply(ctx context.Context, dst, src []T) error {
	r.mu.Lock()
	r.applies++
	if r.onApply != nil {
		r.onApply(r.applies)
	}
	r.mu.Unlock()
	n := r.n
	w := 1
	if r.parallel {
		w = runtime.GOMAXPROCS(0)
	}
	var wg sync.WaitGroup
	for t := range w {
		lo, hi := t*n/w, (t+1)*n/w
		wg.Add(1)
		go func() {
			defer wg.Done()
			r.rows(dst, src, lo, hi)
		}()
	}
	wg.Wait()
	return nil
}

func (r *ring[T]) rows(dst, src []T, lo, hi int) {
	n := r.n
	if isComplex[T]() {
		d, s := complexes(dst), complexes(src)
		e := cmplx.Exp(complex(0, r.phi))
		ec := cmplx.Conj(e)
		for i := lo; i < hi; i++ {
			var acc complex128
			if i+1 < n {
				acc -= e * s[i+1]
			} else if !r.open {
				acc -= e * s[0]
			}
			if i > 0 {
				acc -= ec * s[i-1]
			} else if !r.open {
				acc -= ec * s[n-1]
			}
			d[i] = acc
		}
		if lo == 0 {
			d[0] -= complex(r.v, 0) * s[0]
		}
		return
	}
	d, s := floats(dst), floats(src)
	for i := lo; i < hi; i++ {
		var acc float64
		if i+1 < n {
			acc -= s[i+1]
		} else if !r.open {
			acc -= s[0]
		}
		if i > 0 {
			acc -= s[i-1]
		} else if !r.open {
			acc -= s[n-1]
		}
		d[i] = acc
	}
	if lo == 0 {
		d[0] -= r.v * s[0]
	}
}

// ringSpectrum is the closed form of the ring without impurity:
// eps_q = -2 cos(2 pi q / n + phi), q = 0..n-1, ascending.
func ringSpectrum(n int, phi float64) []float64 {
	e := make([]float64, n)
	for q := range n {
		e[q] = -2 * math.Cos(2*math.Pi*float64(q)/float64(n)+phi)
	}
	slices.Sort(e)
	return e
}

// openChainSpectrum: eps_k = -2 cos(pi k / (n+1)), k = 1..n, ascending.
func openChainSpectrum(n int) []float64 {
	e := make([]float64, n)
	for k := 1; k <= n; k++ {
		e[k-1] = -2 * math.Cos(math.Pi*float64(k)/float64(n+1))
	}
	slices.Sort(e)
	return e
}

// residual returns ||H y - theta y|| / ||y|| computed in the test.
func residual[T Scalar](t testing.TB, op Operator[T], y []T, theta float64) float64 {
	t.Helper()
	hy := make([]T, len(y))
	if err := op.Apply(context.Background(), hy, y); err != nil {
		t.Fatal(err)
	}
	var r, ny float64
	for i := range y {
		d := hy[i] - fromReal[T](theta)*y[i]
		r += abs2(d)
		ny += abs2(y[i])
	}
	return math.Sqrt(r / ny)
}

// inner returns <x, y> = sum conj(x_i) y_i as a complex128.
func inner[T Scalar](x, y []T) complex128 {
	var s complex128
	if isComplex[T]() {
		xc, yc := complexes(x), complexes(y)
		for i := range xc {
			s += cmplx.Conj(xc[i]) * yc[i]
		}
		return s
	}
	xf, yf := floats(x), floats(y)
	var r float64
	for i := range xf {
		r += xf[i] * yf[i]
	}
	return complex(r, 0)
}

// scalar returns re + i im as a T; im must be 0 for real T.
func scalar[T Scalar](re, im float64) T {
	var z T
	if isComplex[T]() {
		x := []T{z}
		complexes(x)[0] = complex(re, im)
		return x[0]
	}
	if im != 0 {
		panic("imaginary part for a real scalar")
	}
	return fromReal[T](re)
}
