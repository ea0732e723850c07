package ed

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"frustum/cluster"
	"frustum/ed/eigen"
	"frustum/ed/hilbert"
	"frustum/ed/lanczos"
)

// The finite-temperature Lanczos route of Thermo (Jaklic and Prelovsek,
// Phys. Rev. B 49, 5065 (1994)): in every symmetry sector s of dimension
// D_s, R random unit vectors r start M steps of plain Lanczos each, whose
// Ritz values eps_j and weights w_j = |<psi_j|r>|^2 estimate every trace
//
//	Tr_s f(H) ~ (D_s / R) sum_r sum_j w_rj f(eps_rj),
//
// so Z, E, C and S follow with statistical errors from a jackknife over the
// random vectors (package lanczos). Sectors of at most FTLMExactLimit
// states are diagonalized exactly and carry no statistical error. Where
// the moment along the field is m S^z with S^z conserved (one effective g),
// each sector has its S^z, so M = m <S^z> and chi = (mu_B/k_B) m^2 Var(S^z)
// / T come from the same samples, at any field, with the Zeeman energy
// -(mu_B/k_B) m B S^z added to each sector's Ritz values.

// FTLM defaults.
const (
	DefaultFTLMVectors = 20
	DefaultFTLMSteps   = 100
	// FTLMExactLimit is the largest sector the FTLM route diagonalizes
	// exactly instead of sampling.
	FTLMExactLimit = 400
)

// FTLMOptions tune the finite-temperature Lanczos route; zero values select
// the defaults.
type FTLMOptions struct {
	// Vectors is the number of random vectors per sector (at least 2);
	// DefaultFTLMVectors when 0.
	Vectors int
	// Steps is the Lanczos depth per vector; DefaultFTLMSteps when 0.
	Steps int
	// Seed selects the random vectors (the same seed gives the same result).
	Seed uint64
	// ExactBelow: sectors of at most this many states are diagonalized
	// exactly (no statistical error); FTLMExactLimit when 0, none when
	// negative.
	ExactBelow int
}

func (o FTLMOptions) withDefaults() FTLMOptions {
	if o.Vectors == 0 {
		o.Vectors = DefaultFTLMVectors
	}
	if o.Steps == 0 {
		o.Steps = DefaultFTLMSteps
	}
	if o.ExactBelow == 0 {
		o.ExactBelow = FTLMExactLimit
	}
	return o
}

func checkFTLM(o FTLMOptions) error {
	switch {
	case o.Vectors < 0 || o.Vectors == 1:
		return &RequestError{Field: "ftlm.vectors", Reason: fmt.Sprintf("%d: the error estimate needs at least 2 random vectors per sector (0: the default %d)", o.Vectors, DefaultFTLMVectors)}
	case o.Steps < 0:
		return &RequestError{Field: "ftlm.steps", Reason: fmt.Sprintf("%d: must be >= 0 (0: the default %d)", o.Steps, DefaultFTLMSteps)}
	}
	return nil
}

// ftlmPlan is the plan of the FTLM route.
type ftlmPlan struct {
	kp   *krylovPlan
	opts FTLMOptions
	// moments: M = mz S^z, so that M and chi come from the sector S^z.
	moments bool
}

// planFTLM lays out the FTLM sectors (every sector: thermodynamics needs
// them all) and checks memory: one sector at a time, its basis, its matrix
// when it fits, and the Lanczos work vectors.
func planFTLM(m *cluster.Model, st *setup, op *operator, opts FTLMOptions, inversion, spatial, mirror bool, l Limits) (*ftlmPlan, error) {
	kp, err := planKrylov(m, st, op, 1, false, inversion, spatial, mirror, l, nil)
	if err != nil {
		return nil, err
	}
	return &ftlmPlan{kp: kp, opts: opts.withDefaults()}, nil
}

// report starts the engine report of the FTLM route.
func (fp *ftlmPlan) report(dimension int64) Report {
	return fp.kp.report("finite-temperature Lanczos", dimension,
		fmt.Sprintf("plain Lanczos, %d random vectors of %d steps per sector; sectors of at most %d states dense", fp.opts.Vectors, fp.opts.Steps, max(fp.opts.ExactBelow, 0)))
}

// sampleSector returns the FTLM samples of one sector: exact for small
// sectors, R random vectors of M steps otherwise.
func sampleSector(ctx context.Context, fp *ftlmPlan, s krylovSector, index int, opt Options) (lanczos.SectorSamples, int, error) {
	sec, err := hilbert.NewSectorContext(ctx, fp.kp.h, s.twoSz, s.group, s.irrep, hilbert.SectorOptions{Workers: opt.Workers})
	if err != nil {
		return lanczos.SectorSamples{Dimension: s.mem.Dim}, 0, err
	}
	rng := rand.New(rand.NewPCG(fp.opts.Seed, uint64(index)+0x5eed))
	re, cx, err := sectorOperator(ctx, sec, fp.kp.csr)
	if err != nil {
		return lanczos.SectorSamples{Dimension: s.mem.Dim}, 0, err
	}
	if re != nil {
		return sampleOperator(ctx, re, s.mem.Dim, fp.opts, rng, func(a []float64, n int) ([]float64, error) {
			v, _, err := eigen.SymmetricContext(ctx, a, n, false)
			return v, err
		})
	}
	return sampleOperator(ctx, cx, s.mem.Dim, fp.opts, rng, func(a []complex128, n int) ([]float64, error) {
		v, _, err := eigen.HermitianContext(ctx, a, n, false)
		return v, err
	})
}

// sampleOperator samples op: exactly (every eigenvalue with weight 1, from
// the dense matrix and solve) up to opts.ExactBelow states, else from
// opts.Vectors random vectors of opts.Steps Lanczos steps. It returns the
// samples and the operator applications used.
func sampleOperator[T lanczos.Scalar](ctx context.Context, op lanczos.Operator[T], dim int64, opts FTLMOptions, rng *rand.Rand,
	solve func(a []T, n int) ([]float64, error)) (lanczos.SectorSamples, int, error) {
	out := lanczos.SectorSamples{Dimension: dim}
	n := op.Dim()
	if n <= opts.ExactBelow {
		a, err := denseOf(ctx, op)
		if err != nil {
			return out, 0, err
		}
		vals, err := solve(a, n)
		if err != nil {
			return out, n, ftlmSolverError(err)
		}
		w := make([]float64, n)
		for i := range w {
			w[i] = 1
		}
		out.Exact, out.Samples = true, []*lanczos.Ritz{{Values: vals, Weights: w, Norm: math.Sqrt(float64(n)), Steps: n}}
		return out, n, nil
	}
	smp := lanczos.NewSampler(op)
	mv := 0
	for v := 0; v < opts.Vectors; v++ {
		r, err := smp.Sample(ctx, lanczos.RandomVector[T](n, rng), opts.Steps)
		if err != nil {
			return out, mv, err
		}
		mv += r.Steps
		out.Samples = append(out.Samples, r)
	}
	return out, mv, nil
}

// denseOf returns the matrix of op, row-major, from its action on the unit
// vectors (one application per column).
func denseOf[T lanczos.Scalar](ctx context.Context, op lanczos.Operator[T]) ([]T, error) {
	n := op.Dim()
	a := make([]T, n*n)
	e := make([]T, n)
	col := make([]T, n)
	for j := 0; j < n; j++ {
		e[j] = 1
		if err := op.Apply(ctx, col, e); err != nil {
			return nil, err
		}
		e[j] = 0
		for i := 0; i < n; i++ {
			a[i*n+j] = col[i]
		}
	}
	return a, nil
}

// ftlmSolverError names a dense failure on a small FTLM sector.
func ftlmSolverError(err error) error {
	if errors.Is(err, eigen.ErrNoConvergence) {
		return &NumericalError{Sector: "of the FTLM route", Detail: err.Error()}
	}
	return err
}

// ftlmSamples samples every sector of the plan (mirror sectors reuse their
// partner's samples with S^z negated).
func ftlmSamples(ctx context.Context, fp *ftlmPlan, opt Options) ([]lanczos.SectorSamples, []int, int64, int, error) {
	kp := fp.kp
	out := make([]lanczos.SectorSamples, len(kp.sectors))
	twoSz := make([]int, len(kp.sectors))
	done := make([]bool, len(kp.sectors))
	var matvecs int64
	solved := 0
	key := func(v int, label string) string { return fmt.Sprintf("%d|%s", v, label) }
	index := map[string]int{}
	for i, s := range kp.sectors {
		index[key(s.twoSz, s.irrep.Label)] = i
	}
	for pass := 0; pass < 2; pass++ {
		for i, s := range kp.sectors {
			if s.mirror != (pass == 1) {
				continue
			}
			if err := ctx.Err(); err != nil {
				return nil, nil, 0, 0, err
			}
			if opt.Progress != nil {
				opt.Progress("FTLM sectors", solved, len(kp.sectors))
			}
			twoSz[i] = s.twoSz
			if s.mirror {
				j, ok := index[key(-s.twoSz, s.irrep.Label)]
				if !ok || !done[j] {
					return nil, nil, 0, 0, fmt.Errorf("ed: no partner sector for %s", s.label)
				}
				out[i] = out[j]
				done[i] = true
				continue
			}
			smp, mv, err := sampleSector(ctx, fp, s, i, opt)
			if err != nil {
				return nil, nil, 0, 0, err
			}
			out[i], done[i] = smp, true
			matvecs += int64(mv)
			solved++
		}
	}
	return out, twoSz, matvecs, solved, nil
}

// thermoFTLM is the FTLM route of Thermo.
func thermoFTLM(ctx context.Context, req ThermoRequest, opt Options, p *taskPlan) (*ThermoResult, error) {
	st, fp := p.st, p.ftlm
	samples, twoSz, matvecs, solved, err := ftlmSamples(ctx, fp, opt)
	if err != nil {
		return nil, err
	}
	h := 0.0
	if fp.moments {
		h = MuBOverKB * p.B * st.mz
	}
	for i := range samples {
		sz := 0.0
		if twoSz[i] != hilbert.NoSz {
			sz = float64(twoSz[i]) / 2
		}
		samples[i].Value = sz
		samples[i].Offset = -h * sz
	}
	th, err := lanczos.Thermodynamics(samples, req.Temperatures, math.NaN())
	if err != nil {
		return nil, err
	}
	nt := len(req.Temperatures)
	res := &ThermoResult{Field: req.Field, Direction: p.direction, Temperature: append([]float64(nil), req.Temperatures...),
		Energy: make([]float64, nt), SpecificHeat: make([]float64, nt), Entropy: make([]float64, nt),
		Magnetization: make([]float64, nt), Susceptibility: make([]float64, nt),
		EnergyError: make([]float64, nt), SpecificHeatError: make([]float64, nt), EntropyError: make([]float64, nt),
		MagnetizationError: make([]float64, nt), SusceptibilityError: make([]float64, nt)}
	for ti, T := range req.Temperatures {
		res.Energy[ti], res.EnergyError[ti] = th.Energy[ti].Value, th.Energy[ti].Error
		res.SpecificHeat[ti], res.SpecificHeatError[ti] = th.SpecificHeat[ti].Value, th.SpecificHeat[ti].Error
		res.Entropy[ti], res.EntropyError[ti] = th.Entropy[ti].Value, th.Entropy[ti].Error
		if fp.moments {
			res.Magnetization[ti] = st.mz * th.Mean[ti].Value
			res.MagnetizationError[ti] = math.Abs(st.mz) * th.Mean[ti].Error
			res.Susceptibility[ti] = MuBOverKB * st.mz * st.mz * th.Variance[ti].Value / T
			res.SusceptibilityError[ti] = MuBOverKB * st.mz * st.mz * th.Variance[ti].Error / T
			if p.B == 0 {
				res.Magnetization[ti], res.MagnetizationError[ti] = 0, 0
			}
		} else {
			res.Magnetization[ti], res.Susceptibility[ti] = math.NaN(), math.NaN()
			res.MagnetizationError[ti], res.SusceptibilityError[ti] = math.NaN(), math.NaN()
		}
	}
	rep := p.rep
	rep.Diagonalizations = solved
	rep.Matvecs = matvecs
	if !fp.moments {
		rep.Warnings = append(rep.Warnings, "finite-temperature Lanczos gives M and chi only where the moment along the field is m S^z with S^z conserved (one effective g); they are NaN here")
	}
	if th.Blocks > 0 {
		rep.Warnings = append(rep.Warnings, fmt.Sprintf("finite-temperature Lanczos: statistical estimates from %d random vectors of %d steps per sector (sectors of at most %d states exact); every value has its one-standard-deviation error beside it (jackknife over %d blocks); below the lowest excitation gaps the estimate rests on the lowest Ritz values found", fp.opts.Vectors, fp.opts.Steps, max(fp.opts.ExactBelow, 0), th.Blocks))
	}
	res.Report = rep
	return res, nil
}

// planMagnetizationFTLM plans the FTLM route of a magnetization curve along
// one direction, after full diagonalization was found not to fit (dense is
// that error, nil when FTLM was asked for). It needs M = m S^z with S^z
// conserved, so that every field is a shift -(mu_B/k_B) m B S^z of the
// zero-field sectors, and T > 0.
func planMagnetizationFTLM(m *cluster.Model, req MagnetizationRequest, p *taskPlan, dense error, opt Options) (*taskPlan, error) {
	st := p.st
	if !(p.analytic && st.conserveSz) {
		why := "finite-temperature Lanczos gives M(B) only where the moment along the field is m S^z with S^z conserved (one effective g); this cluster needs each field diagonalized"
		if dense != nil {
			return nil, fmt.Errorf("%w; %s", dense, why)
		}
		return nil, &RequestError{Field: "method", Reason: why}
	}
	for i, T := range req.Temperatures {
		if T == 0 {
			return nil, &RequestError{Field: fmt.Sprintf("temperatures[%d]", i), Reason: "finite-temperature Lanczos needs T > 0 (the T = 0 limit is the Lanczos ground state: frustum spectrum)"}
		}
	}
	inversion := st.flipSymmetric && st.conserveSz
	fp, err := planFTLM(m, st, st.h0, req.FTLM, inversion, !req.NoSpatialSymmetry, inversion, opt.Limits)
	if err != nil {
		return nil, err
	}
	fp.moments = true
	p.ftlm = fp
	dimension, _ := m.Dimension()
	kp := fp.kp
	p.rep = fp.report(dimension)
	why := ""
	if dense != nil {
		why = fmt.Sprintf(" (full diagonalization does not fit: %v)", dense)
	}
	p.rep.Route = fmt.Sprintf("%s; every field a Zeeman shift of the zero-field sectors, sampled once by finite-temperature Lanczos in %d sectors (%s)%s", spectrumRoute(st, 1, true), len(kp.sectors), kp.groups.about, why)
	if len(st.groups) > 0 {
		p.rep.Warnings = append(p.rep.Warnings, "finite-temperature Lanczos gives the moment of the whole cluster only: the group curves are not computed")
	}
	return p, nil
}

// magnetizationFTLM fills the curves of res from one set of FTLM samples of
// the zero-field sectors, shifted for every field.
func magnetizationFTLM(ctx context.Context, p *taskPlan, req MagnetizationRequest, opt Options, res *MagnetizationResult) error {
	st, fp := p.st, p.ftlm
	samples, twoSz, matvecs, solved, err := ftlmSamples(ctx, fp, opt)
	if err != nil {
		return err
	}
	for ci := range res.Curves {
		res.Curves[ci].Groups = nil
		res.Curves[ci].MagnetizationError = make([]float64, len(req.Fields))
		if req.Susceptibility {
			res.Curves[ci].SusceptibilityError = make([]float64, len(req.Fields))
		}
	}
	blocks := 0
	for bi, B := range req.Fields {
		if err := ctx.Err(); err != nil {
			return err
		}
		h := MuBOverKB * B * st.mz
		for i := range samples {
			sz := float64(twoSz[i]) / 2
			samples[i].Value, samples[i].Offset = sz, -h*sz
		}
		th, err := lanczos.Thermodynamics(samples, req.Temperatures, math.NaN())
		if err != nil {
			return err
		}
		blocks = th.Blocks
		for ti, T := range req.Temperatures {
			c := &res.Curves[ti]
			c.Magnetization[bi] = st.mz * th.Mean[ti].Value
			c.MagnetizationError[bi] = math.Abs(st.mz) * th.Mean[ti].Error
			if req.Susceptibility {
				c.Susceptibility[bi] = MuBOverKB * st.mz * st.mz * th.Variance[ti].Value / T
				c.SusceptibilityError[bi] = MuBOverKB * st.mz * st.mz * th.Variance[ti].Error / T
			}
			if B == 0 {
				c.MagnetizationError[bi] = 0
			}
		}
	}
	p.rep.Diagonalizations = solved
	p.rep.Matvecs = matvecs
	if blocks > 0 {
		p.rep.Warnings = append(p.rep.Warnings, fmt.Sprintf("finite-temperature Lanczos: statistical estimates from %d random vectors of %d steps per sector; every value has its one-standard-deviation error (magnetizationError, jackknife over %d blocks)", fp.opts.Vectors, fp.opts.Steps, blocks))
	}
	return nil
}
