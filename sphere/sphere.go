// Package sphere holds quadrature rules on the unit sphere: point sets with
// positive weights whose weighted sum approximates the mean of a function over
// the sphere,
//
//	(1 / 4 pi) int_{S^2} f(n) dn  ~  sum_k w_k f(n_k),   sum_k w_k = 1,
//
// exactly for every polynomial in (x, y, z) of total degree up to the rule's
// Degree. Two families are provided:
//
//   - Lebedev rules of 6, 14, 26, 38 and 50 points (degrees 3, 5, 7, 9, 11),
//     invariant under the 48 symmetries of the cube;
//   - Gauss product rules: Gauss-Legendre nodes in cos(theta) times equally
//     spaced azimuths, n nodes times 2n angles (2 n^2 points, degree 2n - 1),
//     for larger point counts.
//
// Every rule is centrally symmetric: with n_k it contains -n_k with the same
// weight.
package sphere

import (
	"fmt"
	"math"
	"strings"
)

// Rule is a quadrature rule on the unit sphere.
type Rule struct {
	// Name says which rule it is, for example "Lebedev 26" or
	// "Gauss product 6x12".
	Name string
	// Degree is the highest total degree of the polynomials in (x, y, z)
	// that the rule integrates exactly.
	Degree int
	// Points are unit vectors; Weights are positive and sum to 1.
	Points  [][3]float64
	Weights []float64
}

// MaxPoints is the largest point count ForCount accepts.
const MaxPoints = 100000

// maxNodes is the smallest m with 2 m^2 >= MaxPoints.
const maxNodes = 224

// lebedevSizes are the point counts of the Lebedev rules provided, ascending.
var lebedevSizes = []int{6, 14, 26, 38, 50}

// ForCount returns the smallest rule with at least n points: a Lebedev rule up
// to 50 points, a Gauss product rule of 2 m^2 points (m >= 6) above. It
// refuses n < 1 and n > MaxPoints.
func ForCount(n int) (Rule, error) {
	switch {
	case n < 1:
		return Rule{}, fmt.Errorf("%d directions: a quadrature rule needs at least 1 point", n)
	case n > MaxPoints:
		return Rule{}, fmt.Errorf("%d directions is more than the %d a rule may have", n, MaxPoints)
	}
	for _, s := range lebedevSizes {
		if s >= n {
			return Lebedev(s)
		}
	}
	m := int(math.Ceil(math.Sqrt(float64(n) / 2)))
	for 2*m*m < n {
		m++
	}
	for m > 1 && 2*(m-1)*(m-1) >= n {
		m--
	}
	return GaussProduct(m)
}

// Coarser returns the next coarser rule of the sequence ForCount walks, one
// of lower degree, so that the difference between the two averages estimates
// the error of the coarser one and so bounds that of r from above in the
// usual case: Lebedev 50 -> 38 -> 26 -> 14 -> 6, and a Gauss product rule of
// m x 2m points -> (m-1) x 2(m-1) while that has more than 50 points, then
// the largest Lebedev rule of lower degree (6x12, degree 11 -> Lebedev 38,
// degree 9). A product rule of 50 points or fewer, which ForCount never
// returns, steps down to m - 1 nodes. Coarser returns false for the 6-point
// rule and the 1x2 product rule, which have none, and for a rule that was
// not made by this package.
func Coarser(r Rule) (Rule, bool) {
	switch {
	case strings.HasPrefix(r.Name, "Lebedev "):
		for i, s := range lebedevSizes {
			if s == len(r.Points) && i > 0 {
				c, err := Lebedev(lebedevSizes[i-1])
				return c, err == nil
			}
		}
		return Rule{}, false
	case strings.HasPrefix(r.Name, "Gauss product "):
		m := (r.Degree + 1) / 2
		if m < 2 || 2*m*m != len(r.Points) {
			return Rule{}, false
		}
		largest := lebedevSizes[len(lebedevSizes)-1]
		if 2*m*m > largest && 2*(m-1)*(m-1) <= largest {
			for i := len(lebedevSizes) - 1; i >= 0; i-- {
				if c, err := Lebedev(lebedevSizes[i]); err == nil && c.Degree < r.Degree {
					return c, true
				}
			}
			return Rule{}, false
		}
		c, err := GaussProduct(m - 1)
		return c, err == nil
	}
	return Rule{}, false
}

// Lebedev returns the Lebedev rule of n points, n one of 6, 14, 26, 38, 50.
//
// The rules are built from the orbits of the cube's symmetry group: a1, the 6
// points (+-1, 0, 0) and permutations; a2, the 12 points (0, +-1, +-1)/sqrt 2
// and permutations; a3, the 8 points (+-1, +-1, +-1)/sqrt 3; b(l), the 24
// points (+-l, +-l, +-m) and permutations with m = sqrt(1 - 2 l^2); c(p), the
// 24 points (+-p, +-q, 0) and permutations with q = sqrt(1 - p^2). The weights
// and the generator coordinates below are quoted from memory of Lebedev's
// tables (V. I. Lebedev, USSR Comput. Math. Math. Phys. 16, 10 (1976)) in
// closed form; every one is verified by the package tests, which integrate
// every monomial up to the degree exactly and show that the next degree fails.
func Lebedev(n int) (Rule, error) {
	r := Rule{Name: fmt.Sprintf("Lebedev %d", n)}
	switch n {
	case 6:
		r.Degree = 3
		r.addA1(1.0 / 6)
	case 14:
		r.Degree = 5
		r.addA1(1.0 / 15)
		r.addA3(3.0 / 40)
	case 26:
		r.Degree = 7
		r.addA1(1.0 / 21)
		r.addA2(4.0 / 105)
		r.addA3(9.0 / 280)
	case 38:
		// c(p) with p^2 = (1 - 1/sqrt 3)/2, q^2 = (1 + 1/sqrt 3)/2.
		r.Degree = 9
		r.addA1(1.0 / 105)
		r.addA3(9.0 / 280)
		r.addC(math.Sqrt((1-1/math.Sqrt(3))/2), 1.0/35)
	case 50:
		// b(l) with l = 1/sqrt 11, m = 3/sqrt 11.
		r.Degree = 11
		r.addA1(4.0 / 315)
		r.addA2(64.0 / 2835)
		r.addA3(27.0 / 1280)
		r.addB(1/math.Sqrt(11), 14641.0/725760)
	default:
		return Rule{}, fmt.Errorf("no Lebedev rule of %d points here (there are 6, 14, 26, 38 and 50)", n)
	}
	return r, nil
}

func (r *Rule) add(p [3]float64, w float64) {
	r.Points = append(r.Points, p)
	r.Weights = append(r.Weights, w)
}

// addSigns adds every sign combination of the non-zero coordinates of p.
func (r *Rule) addSigns(p [3]float64, w float64) {
	for s := 0; s < 8; s++ {
		q := p
		skip := false
		for i := 0; i < 3; i++ {
			if s&(1<<i) != 0 {
				if p[i] == 0 {
					skip = true
					break
				}
				q[i] = -q[i]
			}
		}
		if !skip {
			r.add(q, w)
		}
	}
}

func (r *Rule) addA1(w float64) {
	for i := 0; i < 3; i++ {
		var p [3]float64
		p[i] = 1
		r.addSigns(p, w)
	}
}

func (r *Rule) addA2(w float64) {
	a := 1 / math.Sqrt2
	for i := 0; i < 3; i++ {
		p := [3]float64{a, a, a}
		p[i] = 0
		r.addSigns(p, w)
	}
}

func (r *Rule) addA3(w float64) {
	a := 1 / math.Sqrt(3)
	r.addSigns([3]float64{a, a, a}, w)
}

// addB adds (+-l, +-l, +-m) and its permutations, m = sqrt(1 - 2 l^2).
func (r *Rule) addB(l, w float64) {
	m := math.Sqrt(1 - 2*l*l)
	for i := 0; i < 3; i++ {
		p := [3]float64{l, l, l}
		p[i] = m
		r.addSigns(p, w)
	}
}

// addC adds (+-p, +-q, 0) and its permutations, q = sqrt(1 - p^2).
func (r *Rule) addC(p, w float64) {
	q := math.Sqrt(1 - p*p)
	for zero := 0; zero < 3; zero++ {
		a, b := (zero+1)%3, (zero+2)%3
		for _, pq := range [2][2]float64{{p, q}, {q, p}} {
			var v [3]float64
			v[a], v[b] = pq[0], pq[1]
			r.addSigns(v, w)
		}
	}
}

// GaussProduct returns the product rule of m Gauss-Legendre nodes z_i in
// cos(theta) (weights u_i on [-1, 1]) times 2m azimuths phi_j = pi j / m:
// the points (sqrt(1 - z_i^2) cos phi_j, sqrt(1 - z_i^2) sin phi_j, z_i) with
// weights u_i / (4m). It integrates exactly every polynomial of degree up to
// 2m - 1: after the azimuthal sum, which is exact for the trigonometric
// polynomials of order below 2m that such a polynomial contains, what remains
// is a polynomial of degree at most 2m - 1 in z, which the Gauss-Legendre
// nodes integrate exactly. m must be 1 to 224, the smallest m with 2 m^2 >=
// MaxPoints (the rule ForCount(MaxPoints) returns).
func GaussProduct(m int) (Rule, error) {
	if m < 1 || m > maxNodes {
		return Rule{}, fmt.Errorf("Gauss product rule with %d nodes in cos(theta): want 1 to %d", m, maxNodes)
	}
	z, u := GaussLegendre(m)
	r := Rule{Name: fmt.Sprintf("Gauss product %dx%d", m, 2*m), Degree: 2*m - 1}
	// Azimuths: phi_j for j < m, and phi_{j+m} = phi_j + pi exactly opposite.
	c := make([]float64, 2*m)
	s := make([]float64, 2*m)
	for j := 0; j < m; j++ {
		c[j], s[j] = math.Cos(math.Pi*float64(j)/float64(m)), math.Sin(math.Pi*float64(j)/float64(m))
		c[j+m], s[j+m] = -c[j], -s[j]
	}
	for i := range z {
		rho := math.Sqrt((1 - z[i]) * (1 + z[i]))
		for j := range c {
			r.add([3]float64{rho * c[j], rho * s[j], z[i]}, u[i]/float64(4*m))
		}
	}
	return r, nil
}

// GaussLegendre returns the m nodes of the Gauss-Legendre rule on [-1, 1],
// ascending, and their weights (summing to 2). The nodes are the roots of the
// Legendre polynomial P_m, found by Newton's method from the estimate
// cos(pi (k - 1/4) / (m + 1/2)), with P_m and its derivative from the
// three-term recurrence
//
//	(j+1) P_{j+1}(x) = (2j+1) x P_j(x) - j P_{j-1}(x),
//	P_m'(x) = m (x P_m(x) - P_{m-1}(x)) / (x^2 - 1),
//
// and the weights are 2 / ((1 - x^2) P_m'(x)^2). Nodes come in pairs +-x,
// which are made exactly opposite.
func GaussLegendre(m int) (x, w []float64) {
	x = make([]float64, m)
	w = make([]float64, m)
	for k := 1; k <= (m+1)/2; k++ {
		t := math.Cos(math.Pi * (float64(k) - 0.25) / (float64(m) + 0.5))
		if m%2 == 1 && k == (m+1)/2 {
			t = 0 // the middle root of an odd-degree P_m, exactly
		} else {
			for it := 0; it < 50; it++ {
				p, d := legendre(m, t)
				dt := p / d
				t -= dt
				if math.Abs(dt) < 1e-15 {
					break
				}
			}
		}
		_, dp := legendre(m, t)
		wt := 2 / ((1 - t*t) * dp * dp)
		// k-th largest root t: index m-k ascending; its mirror at k-1.
		x[m-k], w[m-k] = t, wt
		x[k-1], w[k-1] = -t, wt
	}
	return x, w
}

// legendre returns P_m(t) and P_m'(t).
func legendre(m int, t float64) (p, dp float64) {
	p0, p1 := 1.0, t
	if m == 0 {
		return 1, 0
	}
	for j := 1; j < m; j++ {
		p0, p1 = p1, (float64(2*j+1)*t*p1-float64(j)*p0)/float64(j+1)
	}
	return p1, float64(m) * (t*p1 - p0) / (t*t - 1)
}
