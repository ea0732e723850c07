package ed

import "math"

// boltzmannCut is the share of a sector's partition function, at each
// temperature of a task, that the eigenstates left without eigenvectors may
// carry together (see boltzmannVectors).
const boltzmannCut = 1e-15

// boltzmannVectors returns the eigen.Job.VectorsFor of a dense sector solve
// whose eigenvectors serve only thermal averages <O> = sum_v p_v <v|O|v> at
// the temperatures temps (K; 0 is the ground-state average): given the
// sector's eigenvalues e ascending (K), it returns the smallest m such that,
// at every T > 0 in temps,
//
//	sum_{v >= m} exp(-(e_v - e_0)/T) <= boltzmannCut sum_v exp(-(e_v - e_0)/T),
//
// and m covers, for T = 0, every state within zeroWindow(e) of e_0. The
// states above m carry at most boltzmannCut of the sector's Boltzmann weight,
// so at most boltzmannCut of the whole partition function (every sector's
// share is bounded the same way, and Z is their sum), and leaving out their
// <v|O|v> changes <O> by at most boltzmannCut max|O|. The partition function
// itself keeps every eigenvalue. Where the sector's Boltzmann weight is
// spread (high T) m is the whole sector and nothing is saved.
//
// The caller checks the weights it actually leaves out against the global
// level tolerance (neglectedShare) and recomputes with every eigenvector
// when the T = 0 window was too narrow.
func boltzmannVectors(temps []float64) func(e []float64) int {
	temps = append([]float64(nil), temps...)
	return func(e []float64) int {
		n := len(e)
		if n == 0 {
			return 0
		}
		e0 := e[0]
		m := 1
		win := zeroWindow(e)
		for m < n && e[m]-e0 <= win {
			m++
		}
		w := make([]float64, n)
		for _, T := range temps {
			if T <= 0 {
				continue
			}
			z := 0.0
			for v, x := range e {
				w[v] = math.Exp(-(x - e0) / T)
				z += w[v]
			}
			// The largest cut whose tail stays within the share.
			tail, c := 0.0, n
			for c > m && tail+w[c-1] <= boltzmannCut*z {
				tail += w[c-1]
				c--
			}
			m = max(m, c)
			if m == n {
				break
			}
		}
		return m
	}
}

// zeroWindow is the energy window (K) above a sector's lowest level that
// boltzmannVectors keeps for T = 0: 1e-6 max(1, |e|), a thousand times the
// level tolerance (levelTolerance) that the T = 0 average applies across all
// sectors, so that a ground level split by rounding is never cut.
func zeroWindow(e []float64) float64 { return zeroWindowFactor * levelTolerance(e) }

// zeroWindowFactor is zeroWindow's multiple of the level tolerance (a
// variable for the test of the recomputation).
var zeroWindowFactor = 1000.0

// vectorTally counts, over some dense solves, the eigenvectors computed and
// the eigenstates solved, and the largest share of a partition function
// that the states without eigenvectors carried.
type vectorTally struct {
	computed, total int64
	share           float64
}

// addVectors adds t to the report's eigenvector counts.
func (r *Report) addVectors(t vectorTally) {
	r.Eigenvectors += t.computed
	r.EigenvectorsSkipped += t.total - t.computed
	r.NeglectedWeight = math.Max(r.NeglectedWeight, t.share)
}

// sectorShare returns the largest share, over temps, of a sector's
// partition function (about its lowest level e[0], T = 0 by the level
// tolerance tol as weights does) carried by its eigenstates from nvec up,
// those without eigenvectors.
func sectorShare(e []float64, nvec int, temps []float64, tol float64) float64 {
	share := 0.0
	if nvec >= len(e) {
		return 0
	}
	for _, T := range temps {
		w := weights(e, e[0], T, tol)
		z, left := 0.0, 0.0
		for v, p := range w {
			z += p
			if v >= nvec {
				left += p
			}
		}
		share = math.Max(share, left/z)
	}
	return share
}
