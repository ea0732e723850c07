package sphere

import (
	"math"
	"sort"
	"strings"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
)

// sphereMean is the mean of x^a y^b z^c over the unit sphere, from the closed
// form of G. B. Folland, "How to integrate a polynomial over a sphere", Amer.
// Math. Monthly 108, 446 (2001): the integral over S^2 is 0 when any exponent
// is odd, and otherwise 2 Gamma(b1) Gamma(b2) Gamma(b3) / Gamma(b1 + b2 + b3)
// with b_i = (a_i + 1)/2; the area is 4 pi (the same formula at a = b = c = 0:
// 2 Gamma(1/2)^3 / Gamma(3/2) = 2 pi^(3/2) / (sqrt(pi)/2) = 4 pi).
func sphereMean(a, b, c int) float64 {
	if a%2 != 0 || b%2 != 0 || c%2 != 0 {
		return 0
	}
	b1, b2, b3 := float64(a+1)/2, float64(b+1)/2, float64(c+1)/2
	l1, _ := math.Lgamma(b1)
	l2, _ := math.Lgamma(b2)
	l3, _ := math.Lgamma(b3)
	l, _ := math.Lgamma(b1 + b2 + b3)
	return 2 * math.Exp(l1+l2+l3-l) / (4 * math.Pi)
}

// monomialErrors returns the largest |rule - exact| over the monomials of
// total degree exactly d, and one monomial where it occurs; with relative, the
// largest |rule - exact| / exact over the monomials whose mean is not 0.
func monomialErrors(r Rule, d int, relative bool) (worst float64, at [3]int) {
	n := len(r.Points)
	// Power tables pw[k][e] = coordinate k of point ... to the e.
	pw := make([][3][]float64, n)
	for i, p := range r.Points {
		for k := 0; k < 3; k++ {
			pw[i][k] = make([]float64, d+1)
			pw[i][k][0] = 1
			for e := 1; e <= d; e++ {
				pw[i][k][e] = pw[i][k][e-1] * p[k]
			}
		}
	}
	for a := 0; a <= d; a++ {
		for b := 0; a+b <= d; b++ {
			c := d - a - b
			s := 0.0
			for i := range r.Points {
				s += r.Weights[i] * pw[i][0][a] * pw[i][1][b] * pw[i][2][c]
			}
			exact := sphereMean(a, b, c)
			e := math.Abs(s - exact)
			if relative {
				if exact == 0 {
					continue
				}
				e /= exact
			}
			if e > worst {
				worst, at = e, [3]int{a, b, c}
			}
		}
	}
	return worst, at
}

// testedRules are every Lebedev rule and the Gauss product rules with 1 to 12
// and 20 nodes.
func testedRules(t *testing.T) []Rule {
	var out []Rule
	for _, n := range []int{6, 14, 26, 38, 50} {
		r, err := Lebedev(n)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, r)
	}
	for _, m := range []int{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 20} {
		r, err := GaussProduct(m)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, r)
	}
	return out
}

// Folland (2001), closed form above: every rule integrates every monomial of
// degree up to its Degree exactly (to 1e-13), and some monomial of degree
// Degree + 1 is missed by more than 1e-12 of its mean (rounding is about
// 1e-15), so the degree is not understated.
func TestExactUpToDegree(t *testing.T) {
	for _, r := range testedRules(t) {
		for d := 0; d <= r.Degree; d++ {
			if e, at := monomialErrors(r, d, false); e > 1e-13 {
				t.Errorf("%s: x^%d y^%d z^%d off by %.3g (degree %d <= %d)", r.Name, at[0], at[1], at[2], e, d, r.Degree)
			}
		}
		if e, _ := monomialErrors(r, r.Degree+1, true); e < 1e-12 {
			t.Errorf("%s: every monomial of degree %d integrated within %.3g of its mean: the degree %d is understated", r.Name, r.Degree+1, e, r.Degree)
		}
	}
}

// Invariant of a quadrature rule for the mean (no source needed): positive
// weights summing to 1, unit points, the advertised point count, and central
// symmetry (with n also -n, with the same weight), exactly.
func TestRuleShape(t *testing.T) {
	rules := testedRules(t)
	big, err := ForCount(MaxPoints)
	if err != nil {
		t.Fatal(err)
	}
	rules = append(rules, big)
	for _, r := range rules {
		if len(r.Points) != len(r.Weights) || len(r.Points) == 0 {
			t.Fatalf("%s: %d points, %d weights", r.Name, len(r.Points), len(r.Weights))
		}
		var sum, carry float64 // Neumaier's compensated sum
		weightOf := make(map[[3]float64]float64, len(r.Points))
		for i, p := range r.Points {
			if !(r.Weights[i] > 0) {
				t.Errorf("%s: weight %d is %g", r.Name, i, r.Weights[i])
			}
			w := r.Weights[i]
			next := sum + w
			if math.Abs(sum) >= math.Abs(w) {
				carry += (sum - next) + w
			} else {
				carry += (w - next) + sum
			}
			sum = next
			if d := math.Abs(math.Sqrt(p[0]*p[0]+p[1]*p[1]+p[2]*p[2]) - 1); d > 1e-15 {
				t.Errorf("%s: point %d %v is off the unit sphere by %.3g", r.Name, i, p, d)
			}
			if _, dup := weightOf[p]; dup {
				t.Errorf("%s: point %v repeated", r.Name, p)
			}
			weightOf[p] = r.Weights[i]
		}
		if sum += carry; math.Abs(sum-1) > 1e-14 {
			t.Errorf("%s: weights sum to %.16g", r.Name, sum)
		}
		for i, p := range r.Points {
			w, ok := weightOf[[3]float64{-p[0], -p[1], -p[2]}]
			if !ok || w != r.Weights[i] {
				t.Errorf("%s: point %v has no exact antipode of weight %g (found %v, %g)", r.Name, p, r.Weights[i], ok, w)
				break
			}
		}
	}
}

// Reference library: the Gauss-Legendre nodes and weights from Newton's
// method agree with gonum's integrate/quad Legendre rule (an independent,
// iteration-free algorithm) on [-1, 1].
func TestGaussLegendreAgainstGonum(t *testing.T) {
	for _, m := range []int{1, 2, 3, 4, 5, 7, 10, 16, 31, 60, 101, 224} {
		x, w := GaussLegendre(m)
		gx := make([]float64, m)
		gw := make([]float64, m)
		quad.Legendre{}.FixedLocations(gx, gw, -1, 1)
		idx := make([]int, m)
		for i := range idx {
			idx[i] = i
		}
		sort.Slice(idx, func(a, b int) bool { return gx[idx[a]] < gx[idx[b]] })
		for i := 0; i < m; i++ {
			j := idx[i]
			if math.Abs(x[i]-gx[j]) > 1e-14 || math.Abs(w[i]-gw[j]) > 1e-14 {
				t.Errorf("m = %d, node %d: (%.17g, %.17g), gonum (%.17g, %.17g)", m, i, x[i], w[i], gx[j], gw[j])
			}
		}
	}
}

// Invariant, no source: ForCount returns the smallest rule with at least n
// points along the sequence Lebedev 6..50, then Gauss product rules of 2 m^2
// points; Coarser walks that sequence back down, always to a lower degree.
func TestForCountAndCoarser(t *testing.T) {
	for _, c := range []struct {
		n      int
		points int
		name   string
	}{
		{1, 6, "Lebedev 6"}, {6, 6, "Lebedev 6"}, {7, 14, "Lebedev 14"}, {26, 26, "Lebedev 26"},
		{27, 38, "Lebedev 38"}, {50, 50, "Lebedev 50"}, {51, 72, "Gauss product 6x12"},
		{72, 72, "Gauss product 6x12"}, {73, 98, "Gauss product 7x14"}, {200, 200, "Gauss product 10x20"},
		{MaxPoints, 100352, "Gauss product 224x448"},
	} {
		r, err := ForCount(c.n)
		if err != nil {
			t.Fatalf("ForCount(%d): %v", c.n, err)
		}
		if len(r.Points) != c.points || r.Name != c.name {
			t.Errorf("ForCount(%d) = %s with %d points, want %s with %d", c.n, r.Name, len(r.Points), c.name, c.points)
		}
	}
	for _, c := range []struct {
		n    int
		word string
	}{{0, "at least 1"}, {-4, "at least 1"}, {MaxPoints + 1, "more than"}} {
		if _, err := ForCount(c.n); err == nil || !strings.Contains(err.Error(), c.word) {
			t.Errorf("ForCount(%d): error %v, want one saying %q", c.n, err, c.word)
		}
	}
	r, _ := ForCount(200)
	var chain []string
	for {
		chain = append(chain, r.Name)
		c, ok := Coarser(r)
		if !ok {
			break
		}
		if len(c.Points) >= len(r.Points) || c.Degree >= r.Degree {
			t.Fatalf("Coarser(%s) = %s is not coarser", r.Name, c.Name)
		}
		r = c
	}
	want := "Gauss product 10x20, Gauss product 9x18, Gauss product 8x16, Gauss product 7x14, Gauss product 6x12, Lebedev 38, Lebedev 26, Lebedev 14, Lebedev 6"
	if got := strings.Join(chain, ", "); got != want {
		t.Errorf("coarsening chain\n got %s\nwant %s", got, want)
	}
	small, _ := GaussProduct(3)
	if c, ok := Coarser(small); !ok || c.Name != "Gauss product 2x4" {
		t.Errorf("Coarser(Gauss product 3x6) = %s, %v; want Gauss product 2x4", c.Name, ok)
	}
	if _, ok := Coarser(Rule{Name: "custom", Points: [][3]float64{{0, 0, 1}}, Weights: []float64{1}}); ok {
		t.Errorf("Coarser of a foreign rule returned one")
	}
	if _, err := Lebedev(10); err == nil {
		t.Errorf("Lebedev(10) gave no error")
	}
	if _, err := GaussProduct(0); err == nil {
		t.Errorf("GaussProduct(0) gave no error")
	}
}
