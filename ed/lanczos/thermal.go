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
	// Observable is <A> = Tr e^{-H/T} A / Z of the operator A whose weights
	// every sample carries (Ritz.Observable, from SampleObservable or, for
	// Exact sectors, the diagonal elements <psi_j|A|psi_j>); nil when the
	// samples carry none.
	Observable []Estimate
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
// traces. Where the samples carry observable weights a_rj (Ritz.Observable;
// all samples or none), the same sums with a_rj in place of w_rj estimate
// Tr_s f(H) A, and Observable is <A> = Tr e^{-H/T} A / Z. Each sample's
// contribution is formed in logarithmic form, so
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
	ts, err := newThermalSet(sectors, temps, shift)
	if err != nil {
		return nil, err
	}
	out := &Thermal{
		Temperatures: append([]float64(nil), temps...),
		Shift:        ts.shift,
		Blocks:       ts.blocks,
	}
	nt := len(temps)
	fields := []*[]Estimate{&out.LnZ, &out.Energy, &out.SpecificHeat, &out.Entropy, &out.Mean, &out.Variance}
	if ts.observable {
		fields = append(fields, &out.Observable)
	}
	for _, p := range fields {
		*p = make([]Estimate, nt)
	}
	for ti := range temps {
		est := jackknife(ts.blocks, func(leave int) []float64 {
			a := ts.averages(ti, leave)
			return a[:len(fields)]
		})
		for q, f := range fields {
			(*f)[ti] = est[q]
		}
	}
	return out, nil
}

// ObservableDifference returns scale (<A>_plus - <A>_minus) at every
// temperature, with its jackknife error, for two sets of samples that
// share their random vectors: the same sectors (dimensions, Exact flags
// and numbers of samples), sample r of a sector in plus started from the
// same vector as sample r in minus, for example at the fields B + h and
// B - h (common random numbers). Every sample must carry observable
// weights. Block b is left out of both sets at once, so the error is that
// of the difference, in which the noise the two sets share cancels: with
// scale = 1/(2h) it estimates the derivative d<A>/dB by a central
// difference without the 1/h growth of the noise that independent samples
// would give. Each set's shift is its own LowestRitz (it only sets a
// reference).
func ObservableDifference(plus, minus []SectorSamples, temps []float64, scale float64) ([]Estimate, error) {
	if len(plus) != len(minus) {
		return nil, fmt.Errorf("lanczos: %d and %d sectors: the sets must share their sectors", len(plus), len(minus))
	}
	for i := range plus {
		p, m := plus[i], minus[i]
		if p.Dimension != m.Dimension || p.Exact != m.Exact || len(p.Samples) != len(m.Samples) {
			return nil, fmt.Errorf("lanczos: sector %d differs between the sets (dimension %d and %d, %d and %d samples)", i, p.Dimension, m.Dimension, len(p.Samples), len(m.Samples))
		}
	}
	if math.IsNaN(scale) || math.IsInf(scale, 0) {
		return nil, fmt.Errorf("lanczos: scale %v is not finite", scale)
	}
	tp, err := newThermalSet(plus, temps, math.NaN())
	if err != nil {
		return nil, err
	}
	tm, err := newThermalSet(minus, temps, math.NaN())
	if err != nil {
		return nil, err
	}
	if !tp.observable || !tm.observable {
		return nil, errors.New("lanczos: ObservableDifference needs observable weights on every sample")
	}
	out := make([]Estimate, len(temps))
	for ti := range temps {
		est := jackknife(tp.blocks, func(leave int) []float64 {
			return []float64{scale * (tp.averages(ti, leave)[6] - tm.averages(ti, leave)[6])}
		})
		out[ti] = est[0]
	}
	return out, nil
}

// jackknife returns the estimates avg(-1) with their errors from the
// leave-one-block-out replicas avg(b), b < blocks (zero errors with fewer
// than two blocks).
func jackknife(blocks int, avg func(leave int) []float64) []Estimate {
	full := avg(-1)
	out := make([]Estimate, len(full))
	for q, v := range full {
		out[q].Value = v
	}
	if blocks < 2 {
		return out
	}
	reps := make([][]float64, blocks)
	mean := make([]float64, len(full))
	for b := range blocks {
		reps[b] = avg(b)
		for q := range mean {
			mean[q] += reps[b][q] / float64(blocks)
		}
	}
	for q := range out {
		var ss float64
		for b := range blocks {
			d := reps[b][q] - mean[q]
			ss += d * d
		}
		out[q].Error = math.Sqrt(float64(blocks-1) / float64(blocks) * ss)
	}
	return out
}

// thermalSet is a validated set of samples with its per-sample moments at
// every temperature, ready for the averages of any jackknife replica.
type thermalSet struct {
	sectors    []SectorSamples
	temps      []float64
	shift      float64
	blocks     int
	observable bool
	refs       []sampleRef
	mom        [][]sampleMoment // [sample][temperature]
	count      [][]int          // [sector][block]: samples of a stochastic sector in a block
	lnc        []float64
	zs         []float64
}

type sampleRef struct {
	sector, block int
}

func newThermalSet(sectors []SectorSamples, temps []float64, shift float64) (*thermalSet, error) {
	if len(sectors) == 0 {
		return nil, errors.New("lanczos: no sectors")
	}
	blocks := 0
	withObs, without := 0, 0
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
			switch {
			case r.Observable == nil:
				without++
			case len(r.Observable) != len(r.Values):
				return nil, fmt.Errorf("lanczos: sector %d: sample %d has %d observable weights for %d Ritz values", i, j, len(r.Observable), len(r.Values))
			default:
				withObs++
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
	if withObs > 0 && without > 0 {
		return nil, fmt.Errorf("lanczos: %d samples carry observable weights and %d do not: all or none must", withObs, without)
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
	ts := &thermalSet{sectors: sectors, temps: temps, shift: shift, blocks: blocks, observable: withObs > 0,
		count: make([][]int, len(sectors)), lnc: make([]float64, len(sectors)), zs: make([]float64, len(sectors))}
	nt := len(temps)
	// Per sample and temperature: ln z_r = ln sum_j w_j e^{-e_j/T}, the mean
	// m_r and the variance v_r of e_j under the weights w_j e^{-e_j/T}, and
	// the observable's share.
	for si, s := range sectors {
		rs := len(s.Samples)
		if !s.Exact {
			ts.count[si] = make([]int, blocks)
		}
		for r, rz := range s.Samples {
			block := -1
			if !s.Exact {
				block = r * blocks / rs
				ts.count[si][block]++
			}
			ts.refs = append(ts.refs, sampleRef{si, block})
			row := make([]sampleMoment, nt)
			for ti, T := range temps {
				row[ti] = sampleMoments(rz, s.Offset-shift, T)
			}
			ts.mom = append(ts.mom, row)
		}
	}
	return ts, nil
}

// averages returns ln Z, E, C, S, <x>, Var x and <A> (0 without observable
// weights) at temperature index ti, leaving block leave out (-1: none).
func (ts *thermalSet) averages(ti, leave int) [7]float64 {
	T := ts.temps[ti]
	sectors, refs, mom, lnc, zs := ts.sectors, ts.refs, ts.mom, ts.lnc, ts.zs
	for si, s := range sectors {
		zs[si] = 0
		if s.Exact {
			lnc[si] = 0
			continue
		}
		used := len(s.Samples)
		if leave >= 0 {
			used -= ts.count[si][leave]
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
	var z, e1, a1 float64
	for i, ref := range refs {
		if ref.block >= 0 && ref.block == leave {
			continue
		}
		p := math.Exp(lnc[ref.sector] + mom[i][ti].lz - top)
		z += p
		zs[ref.sector] += p
		e1 += p * mom[i][ti].mean
		a1 += p * mom[i][ti].obs
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
	var a [7]float64
	invT := 1 / T
	a[0] = lnZ - ts.shift*invT
	a[1] = ts.shift + e1
	a[2] = varE * invT * invT
	a[3] = lnZ + e1*invT
	a[4] = x1
	a[5] = varX
	a[6] = a1 / z
	return a
}

// sampleMoment is one sample's contribution at one temperature: lz = ln
// sum_j w_j e^{-e_j/T}, the mean and variance of e_j under those weights,
// and obs = sum_j a_j e^{-e_j/T} / sum_j w_j e^{-e_j/T} (a_j the
// observable weights; 0 without).
type sampleMoment struct{ lz, mean, vari, obs float64 }

// sampleMoments returns the sampleMoment of rz with e_j = eps_j + off.
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
	if rz.Observable != nil {
		// |a_j| <= w_j^(1/2) ||A r||, so the exponent below stays far from
		// overflow wherever w_j is representable; an a_j whose w_j is 0
		// belongs to a Ritz vector orthogonal to r (to rounding) and is 0
		// or negligible.
		var s float64
		for j, e := range rz.Values {
			if a := rz.Observable[j]; a != 0 && rz.Weights[j] > 0 {
				s += math.Copysign(math.Exp(math.Log(math.Abs(a))-(e+off)*invT-top), a)
			}
		}
		m.obs = s / z
	}
	return m
}
