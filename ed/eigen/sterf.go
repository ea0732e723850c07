package eigen

import (
	"math"
	"slices"
)

// sterf overwrites d with the eigenvalues (ascending) of the symmetric
// tridiagonal matrix with diagonal d (length n) and off-diagonal e (length
// n-1), destroying e. It is the Pal-Walker-Kahan root-free variant of the
// implicit QL/QR iteration (no eigenvectors, O(n^2) flops), ported from
// gonum's Dsterf (LAPACK's dsterf; Copyright The Gonum Authors, BSD-style
// license) with two changes:
//
//   - it polls s once per QL/QR sweep (a sweep is at most n steps, about a
//     microsecond per 100 rows), and returns errStopped when s fired;
//   - a block with an entry above sqrt(safe_max)/3, or with norm below
//     sqrt(safe_min)/u^2, is rescaled by multiplying d and e by the factor
//     directly, where gonum v0.17.0 calls Dlascl on the diagonal as if it
//     were a strided column and panics.
//
// It returns ErrNoConvergence if the iteration needs more than 30 n sweeps.
func sterf(d, e []float64, s *stopper) error {
	n := len(d)
	if n <= 1 {
		return nil
	}
	const (
		eps  = unitRoundoff
		eps2 = eps * eps
	)
	ssfmax := math.Sqrt(1/safeMin) / 3
	ssfmin := math.Sqrt(safeMin) / eps2
	nmaxit := 30 * n
	jtot := 0

	for l1 := 0; l1 < n; {
		if l1 > 0 {
			e[l1-1] = 0
		}
		m := l1
		for ; m < n-1; m++ {
			if math.Abs(e[m]) <= math.Sqrt(math.Abs(d[m]))*math.Sqrt(math.Abs(d[m+1]))*eps {
				e[m] = 0
				break
			}
		}
		l, lend := l1, m
		lsv, lendsv := l, lend
		l1 = m + 1
		if lend == l {
			continue
		}

		// Scale the block l..lend into a safe range.
		anorm := math.Abs(d[lend])
		for i := l; i < lend; i++ {
			anorm = nanMax(anorm, nanMax(math.Abs(d[i]), math.Abs(e[i])))
		}
		if anorm == 0 {
			continue
		}
		scale := 1.0
		if anorm > ssfmax {
			scale = ssfmax / anorm
		} else if anorm < ssfmin {
			scale = ssfmin / anorm
		}
		if scale != 1 {
			for i := l; i < lend; i++ {
				d[i] *= scale
				e[i] *= scale
			}
			d[lend] *= scale
		}
		for i := l; i < lend; i++ {
			e[i] *= e[i]
		}

		// Iterate from the end with the smaller diagonal entry.
		if math.Abs(d[lend]) < math.Abs(d[l]) {
			l, lend = lend, l
		}
		if lend >= l {
			// QL iteration: look for a small subdiagonal element.
			for {
				if l != lend {
					for m = l; m < lend; m++ {
						if math.Abs(e[m]) <= eps2*math.Abs(d[m]*d[m+1]) {
							break
						}
					}
				} else {
					m = lend
				}
				if m < lend {
					e[m] = 0
				}
				p := d[l]
				if m == l {
					l++
					if l > lend {
						break
					}
					continue
				}
				if m == l+1 {
					d[l], d[l+1] = lpk.Dlae2(d[l], math.Sqrt(e[l]), d[l+1])
					e[l] = 0
					l += 2
					if l > lend {
						break
					}
					continue
				}
				if jtot == nmaxit {
					break
				}
				jtot++
				if s.stopped() {
					return errStopped
				}
				rte := math.Sqrt(e[l])
				sigma := (d[l+1] - p) / (2 * rte)
				r := lpk.Dlapy2(sigma, 1)
				sigma = p - (rte / (sigma + math.Copysign(r, sigma)))
				c := 1.0
				sn := 0.0
				gamma := d[m] - sigma
				p = gamma * gamma
				for i := m - 1; i >= l; i-- {
					bb := e[i]
					r := p + bb
					if i != m-1 {
						e[i+1] = sn * r
					}
					oldc := c
					c = p / r
					sn = bb / r
					oldgam := gamma
					alpha := d[i]
					gamma = c*(alpha-sigma) - sn*oldgam
					d[i+1] = oldgam + (alpha - gamma)
					if c != 0 {
						p = (gamma * gamma) / c
					} else {
						p = oldc * bb
					}
				}
				e[l] = sn * p
				d[l] = sigma + gamma
			}
		} else {
			// QR iteration: look for a small superdiagonal element.
			for {
				for m = l; m > lend; m-- {
					if math.Abs(e[m-1]) <= eps2*math.Abs(d[m]*d[m-1]) {
						break
					}
				}
				if m > lend {
					e[m-1] = 0
				}
				p := d[l]
				if m == l {
					l--
					if l < lend {
						break
					}
					continue
				}
				if m == l-1 {
					d[l], d[l-1] = lpk.Dlae2(d[l], math.Sqrt(e[l-1]), d[l-1])
					e[l-1] = 0
					l -= 2
					if l < lend {
						break
					}
					continue
				}
				if jtot == nmaxit {
					break
				}
				jtot++
				if s.stopped() {
					return errStopped
				}
				rte := math.Sqrt(e[l-1])
				sigma := (d[l-1] - p) / (2 * rte)
				r := lpk.Dlapy2(sigma, 1)
				sigma = p - (rte / (sigma + math.Copysign(r, sigma)))
				c := 1.0
				sn := 0.0
				gamma := d[m] - sigma
				p = gamma * gamma
				for i := m; i < l; i++ {
					bb := e[i]
					r := p + bb
					if i != m {
						e[i-1] = sn * r
					}
					oldc := c
					c = p / r
					sn = bb / r
					oldgam := gamma
					alpha := d[i+1]
					gamma = c*(alpha-sigma) - sn*oldgam
					d[i] = oldgam + alpha - gamma
					if c != 0 {
						p = (gamma * gamma) / c
					} else {
						p = oldc * bb
					}
				}
				e[l-1] = sn * p
				d[l] = sigma + gamma
			}
		}
		if scale != 1 {
			for i := lsv; i <= lendsv; i++ {
				d[i] /= scale
			}
		}
		if jtot >= nmaxit {
			break
		}
	}
	for _, x := range e[:n-1] {
		if x != 0 {
			return ErrNoConvergence
		}
	}
	slices.Sort(d)
	return nil
}

// nanMax is max(x, y), NaN if either is NaN.
func nanMax(x, y float64) float64 {
	if x > y || math.IsNaN(x) {
		return x
	}
	return y
}
