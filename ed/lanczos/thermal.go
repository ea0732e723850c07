package lanczos

import (
	"errors"
	"fmt"
	"math"
)

// Estimate is a statistical estimate and its one-standard-deviation error.
type Estimate struct{ Value, Error float64 }

// SectorSamples are the Lanczos samples of one symmetry sector.
type SectorSamples struct {
	// Dimension is the sector dimension D_s.
	Dimension int64
	// Value is the sector's scalar x_s whose thermal mean and variance
	// Thermodynamics returns, for example its S^z.
	Value float64
	// Offset is added to every Ritz value of the sector before anything
	// else, for example the Zeeman energy -h S^z.
	Offset float64
	// Exact marks samples that represent the sector's trace exactly rather
	// than stochastically: the complete spectrum as one Ritz with unit
	// weights, or one sample per vector of an orthonormal basis of the
	// sector with enough steps. Their trace is the plain sum over samples,
	// and they are not resampled by the jackknife. Otherwise the samples
	// come from random unit vectors (RandomVector) and the trace is
	// estimated as D_s / R_s times the sum over the R_s samples.
	Exact   bool
	Samples []*Ritz
}

// Thermal holds finite-temperature averages at each temperature, with k_B
// = 1 and energies in the units of the operator.
type Thermal struct {
	Temperatures []float64
	// Shift is the reference energy subtracted before exponentiation.
	Shift float64
	// Blocks is the number of jackknife blocks; 0 when every sector is
	// Exact (the errors are then zero).
	Blocks int
	// LnZ is ln Z, Z = Tr e^{-H/T}.
	LnZ []Estimate
	// Energy is <H>.
	Energy []Estimate
	// SpecificHeat is C = (<H^2> - <H>^2) / T^2.
	SpecificHeat []Estimate
	// Entropy is S = ln Z + <H>/T.
	Entropy []Estimate
	// Mean and Variance are <x> and <x^2> - <x>^2 of the sector scalar x,
	// weighted by the sectors' shares of Z. With x = S^z and a moment m per
	// unit of S^z: M = m <x>, chi = m^2 Var(x) / T.
	Mean, Variance []Estimate
}

// LowestRitz returns the lowest Ritz value plus offset over all samples.
func LowestRitz(sectors []SectorSamples) float64 {
	low := math.Inf(1)
	for _, s := range sectors {
		for _, r := range s.Samples {
			for _, e := range r.Values {
				low = min(low, e+s.Offset)
			}
		}
	}
	return low
}

// Thermodynamics turns FTLM samples into thermal averages (Jaklic and
// Prelovsek, Phys. Rev. B 49, 5065 (1994); Adv. Phys. 49, 1 (2000)). With
// e_j = eps_j + Offset_s - shift, sector traces are estimated as
//
//	Tr_s f(H) ~ (D_s / R_s) sum_r sum_j w_rj f(eps_rj + Offset_s)
//
// (plain sums for Exact sectors), so that Z, <H>, <H^2> and the sector
// shares come from the same samples, and every average is a ratio of such
// traces. Each sample's contribution is formed in logarithmic form, so
// neither overflow nor underflow occurs at any temperature; shift only sets
// the reference of the energy moments (pass NaN for LowestRitz(sectors)).
// Temperatures must be positive; +Inf gives the infinite-temperature limit,
// where S = ln sum_s D_s exactly for any number of samples (the weights of
// a unit vector sum to 1).
//
// Errors come from the jackknife over the random vectors: the samples of
// every stochastic sector are dealt in order into B blocks, B the smallest
// number of samples of a stochastic sector (sample r of R_s to block
// floor(r B / R_s)), each average is recomputed B times leaving one block
// out, and
//
//	error^2 = (B-1)/B sum_b (A_b - mean_b A_b)^2,
//
// which carries the correlations between numerator and denominator of each
// ratio. Value is the estimate from all samples. A stochastic sector needs at
// least two samples.
func Thermodynamics(sectors []SectorSamples, temps []float64, shift float64) (*Thermal, error) {
	if len(sectors) == 0 {
		return nil, errors.New("lanczos: no sectors")
	}
	blocks := 0
	for i, s := range sectors {
		if s.Dimension <= 0 {
			return nil, fmt.Errorf("lanczos: sector %d: dimension %d", i, s.Dimension)
		}
		if len(s.Samples) == 0 {
			return nil, fmt.Errorf("lanczos: sector %d: no samples", i)
		}
		for j, r := range s.Samples {
			if r == nil || len(r.Values) == 0 || len(r.Values) != len(r.Weights) {
				return nil, fmt.Errorf("lanczos: sector %d: sample %d is empty or malformed", i, j)
			}
		}
		if !s.Exact {
			if len(s.Samples) < 2 {
				return nil, fmt.Errorf("lanczos: sector %d: a stochastic sector needs at least 2 samples for the jackknife, has %d", i, len(s.Samples))
			}
			if blocks == 0 || len(s.Samples) < blocks {
				blocks = len(s.Samples)
			}
		}
	}
	for _, T := range temps {
		if !(T > 0) {
			return nil, fmt.Errorf("lanczos: temperature %g must be positive", T)
		}
	}
	if math.IsNaN(shift) {
		shift = LowestRitz(sectors)
	}
	if math.IsInf(shift, 0) || math.IsNaN(shift) {
		return nil, errors.New("lanczos: non-finite energy shift")
	}
	out := &Thermal{
		Temperatures: append([]float64(nil), temps...),
		Shift:        shift,
		Blocks:       blocks,
	}
	nt := len(temps)
	for _, p := range []*[]Estimate{&out.LnZ, &out.Energy, &out.SpecificHeat, &out.Entropy, &out.Mean, &out.Variance} {
		*p = make([]Estimate, nt)
	}

	// Per sample and temperature: ln z_r = ln sum_j w_j e^{-e_j/T}, the mean
	// m_r and the variance v_r of e_j under the weights w_j e^{-e_j/T}.
	type sampleRef struct {
		sector, block int
	}
	var refs []sampleRef
	var mom [][]sampleMoment // [sample][temperature]
	for si, s := range sectors {
		rs := len(s.Samples)
		for r, rz := range s.Samples {
			block := -1
			if !s.Exact {
				block = r * blocks / rs
			}
			refs = append(refs, sampleRef{si, block})
			row := make([]sampleMoment, nt)
			for ti, T := range temps {
				row[ti] = sampleMoments(rz, s.Offset-shift, T)
			}
			mom = append(mom, row)
		}
	}

	// count[s][b]: samples of stochastic sector s in block b.
	count := make([][]int, len(sectors))
	for si, s := range sectors {
		if !s.Exact {
			count[si] = make([]int, blocks)
		}
	}
	for _, ref := range refs {
		if ref.block >= 0 {
			count[ref.sector][ref.block]++
		}
	}

	// averages computes the six averages at temperature ti, leaving block
	// leave out (-1: none).
	lnc := make([]float64, len(sectors))
	averages := func(ti, leave int) [6]float64 {
		T := temps[ti]
		for si, s := range sectors {
			if s.Exact {
				lnc[si] = 0
				continue
			}
			used := len(s.Samples)
			if leave >= 0 {
				used -= count[si][leave]
			}
			lnc[si] = math.Log(float64(s.Dimension) / float64(used))
		}
		// ln Z by log-sum-exp over the samples.
		top := math.Inf(-1)
		for i, ref := range refs {
			if ref.block >= 0 && ref.block == leave {
				continue
			}
			top = max(top, lnc[ref.sector]+mom[i][ti].lz)
		}
		var z, e1 float64
		zs := make([]float64, len(sectors))
		for i, ref := range refs {
			if ref.block >= 0 && ref.block == leave {
				continue
			}
			p := math.Exp(lnc[ref.sector] + mom[i][ti].lz - top)
			z += p
			zs[ref.sector] += p
			e1 += p * mom[i][ti].mean
		}
		lnZ := top + math.Log(z)
		e1 /= z
		var varE float64
		for i, ref := range refs {
			if ref.block >= 0 && ref.block == leave {
				continue
			}
			p := math.Exp(lnc[ref.sector]+mom[i][ti].lz-top) / z
			d := mom[i][ti].mean - e1
			varE += p * (mom[i][ti].vari + d*d)
		}
		var x1 float64
		for si, s := range sectors {
			x1 += zs[si] / z * s.Value
		}
		var varX float64
		for si, s := range sectors {
			d := s.Value - x1
			varX += zs[si] / z * d * d
		}
		var a [6]float64
		invT := 1 / T
		a[0] = lnZ - shift*invT
		a[1] = shift + e1
		a[2] = varE * invT * invT
		a[3] = lnZ + e1*invT
		a[4] = x1
		a[5] = varX
		return a
	}

	fields := []*[]Estimate{&out.LnZ, &out.Energy, &out.SpecificHeat, &out.Entropy, &out.Mean, &out.Variance}
	for ti := range temps {
		full := averages(ti, -1)
		var errs [6]float64
		if blocks >= 2 {
			reps := make([][6]float64, blocks)
			var mean [6]float64
			for b := range blocks {
				reps[b] = averages(ti, b)
				for q := range 6 {
					mean[q] += reps[b][q] / float64(blocks)
				}
			}
			for q := range 6 {
				var ss float64
				for b := range blocks {
					d := reps[b][q] - mean[q]
					ss += d * d
				}
				errs[q] = math.Sqrt(float64(blocks-1) / float64(blocks) * ss)
			}
		}
		for q, f := range fields {
			(*f)[ti] = Estimate{full[q], errs[q]}
		}
	}
	return out, nil
}

// sampleMoment is one sample's contribution at one temperature.
type sampleMoment struct{ lz, mean, vari float64 }

// sampleMoments returns ln sum_j w_j e^{-e_j/T} and the mean and variance of
// e_j = eps_j + off under the weights w_j e^{-e_j/T}.
func sampleMoments(rz *Ritz, off, T float64) (m sampleMoment) {
	invT := 1 / T
	top := math.Inf(-1)
	for j, e := range rz.Values {
		if rz.Weights[j] > 0 {
			top = max(top, math.Log(rz.Weights[j])-(e+off)*invT)
		}
	}
	if math.IsInf(top, -1) {
		m.lz = math.Inf(-1)
		return m
	}
	var z, s1 float64
	for j, e := range rz.Values {
		if w := rz.Weights[j]; w > 0 {
			p := math.Exp(math.Log(w) - (e+off)*invT - top)
			z += p
			s1 += p * (e + off)
		}
	}
	mean := s1 / z
	var s2 float64
	for j, e := range rz.Values {
		if w := rz.Weights[j]; w > 0 {
			p := math.Exp(math.Log(w) - (e+off)*invT - top)
			d := e + off - mean
			s2 += p * d * d
		}
	}
	m.lz = top + math.Log(z)
	m.mean = mean
	m.vari = s2 / z
	return m
}
