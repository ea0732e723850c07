package ed

import (
	"math"
	"sort"
)

// Degenerate levels are grouped when their energies differ by less than
// levelTolerance(E), 1e-9 of the spectrum's scale (at least 1e-9 K): far above
// the dense solvers' rounding (about 1e-14 of the norm of H), far below any
// splitting that a measurement resolves.
func levelTolerance(energies []float64) float64 {
	scale := 1.0
	for _, e := range energies {
		scale = math.Max(scale, math.Abs(e))
	}
	return 1e-9 * scale
}

// labelledEnergy is one eigenvalue with the 2 S^z of its sector.
type labelledEnergy struct {
	e     float64
	twoSz int
}

// clusterEnergies sorts xs by energy and splits it into runs whose energies
// lie within tol of the run's first.
func clusterEnergies(xs []labelledEnergy, tol float64) [][]labelledEnergy {
	sort.Slice(xs, func(i, j int) bool {
		if xs[i].e != xs[j].e {
			return xs[i].e < xs[j].e
		}
		return xs[i].twoSz < xs[j].twoSz
	})
	var out [][]labelledEnergy
	for i := 0; i < len(xs); {
		j := i + 1
		for j < len(xs) && xs[j].e-xs[i].e <= tol {
			j++
		}
		out = append(out, xs[i:j])
		i = j
	}
	return out
}

func meanEnergy(run []labelledEnergy) float64 {
	s := 0.0
	for _, x := range run {
		s += x.e
	}
	return s / float64(len(run))
}

// groupLevels groups eigenvalues into levels: by energy alone, or by energy
// and S^z when bySz.
func groupLevels(xs []labelledEnergy, tol float64, bySz bool) []Level {
	var out []Level
	for _, run := range clusterEnergies(xs, tol) {
		if !bySz {
			out = append(out, Level{Energy: meanEnergy(run), Degeneracy: len(run)})
			continue
		}
		count := map[int]int{}
		sum := map[int]float64{}
		var keys []int
		for _, x := range run {
			if count[x.twoSz] == 0 {
				keys = append(keys, x.twoSz)
			}
			count[x.twoSz]++
			sum[x.twoSz] += x.e
		}
		sort.Ints(keys)
		first := len(out)
		for _, t := range keys {
			out = append(out, Level{Energy: sum[t] / float64(count[t]), Degeneracy: count[t], HasSz: true, Sz: float64(t) / 2})
		}
		// The means of one run differ by rounding (sectors diagonalized
		// apart): keep the levels ascending, S^z order among equal ones.
		run := out[first:]
		sort.SliceStable(run, func(i, j int) bool { return run[i].Energy < run[j].Energy })
	}
	return out
}

// multiplet is a set of degenerate SU(2) multiplets: count multiplets of spin
// twoS/2 at zero-field energy e.
type multiplet struct {
	e     float64
	twoS  int
	count int
}

// su2Multiplets finds the total-spin multiplets of an SU(2)-invariant
// Hamiltonian from its S^z-sector eigenvalues (sectors with S^z >= 0 suffice).
// A multiplet of spin S has one state in every sector S^z = -S .. S, so the
// number of multiplets of spin S at energy E is
//
//	n_S(E) = mult(E, S^z = S) - mult(E, S^z = S + 1).
//
// ok is false when the counts are inconsistent (a near-degeneracy below the
// grouping tolerance mixing levels); callers then drop the S labels.
func su2Multiplets(xs []labelledEnergy, tol float64) (out []multiplet, ok bool) {
	var pos []labelledEnergy
	for _, x := range xs {
		if x.twoSz >= 0 {
			pos = append(pos, x)
		}
	}
	for _, run := range clusterEnergies(pos, tol) {
		count := map[int]int{}
		sum := map[int]float64{}
		maxT := 0
		for _, x := range run {
			count[x.twoSz]++
			sum[x.twoSz] += x.e
			if x.twoSz > maxT {
				maxT = x.twoSz
			}
		}
		start := maxT % 2
		for t := start; t <= maxT; t += 2 {
			n := count[t] - count[t+2]
			if n < 0 {
				return nil, false
			}
			if n > 0 {
				out = append(out, multiplet{e: sum[t] / float64(count[t]), twoS: t, count: n})
			}
		}
	}
	return out, true
}

// su2Levels turns multiplets into levels: at zero field one level per
// (energy, S) with degeneracy count*(2S+1); in a field h = MuBOverKB*B*mz
// along the quantization axis each multiplet splits into E - h S^z levels.
func su2Levels(ms []multiplet, h float64, tol float64) []Level {
	var out []Level
	if h == 0 {
		for _, m := range ms {
			out = append(out, Level{Energy: m.e, Degeneracy: m.count * (m.twoS + 1), HasTotalSpin: true, TotalSpin: float64(m.twoS) / 2})
		}
	} else {
		for _, m := range ms {
			for t := -m.twoS; t <= m.twoS; t += 2 {
				out = append(out, Level{Energy: m.e - h*float64(t)/2, Degeneracy: m.count,
					HasSz: true, Sz: float64(t) / 2, HasTotalSpin: true, TotalSpin: float64(m.twoS) / 2})
			}
		}
	}
	// Ascending energy, and within each run of levels within tol of the
	// run's first, ascending S, then S^z. (A comparison that calls levels
	// within tol equal is not transitive, so it cannot drive the sort.)
	sort.SliceStable(out, func(i, j int) bool { return out[i].Energy < out[j].Energy })
	for i := 0; i < len(out); {
		j := i + 1
		for j < len(out) && out[j].Energy-out[i].Energy <= tol {
			j++
		}
		run := out[i:j]
		sort.SliceStable(run, func(a, b int) bool {
			if run[a].TotalSpin != run[b].TotalSpin {
				return run[a].TotalSpin < run[b].TotalSpin
			}
			return run[a].Sz < run[b].Sz
		})
		i = j
	}
	return out
}
