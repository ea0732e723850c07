package ed

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"strings"

	"frustum/cluster"
	"frustum/ed/eigen"
	"frustum/ed/hilbert"
	"frustum/ed/lanczos"
)

// The finite-temperature Lanczos routes of Thermo and Magnetization
// (Jaklic and Prelovsek, Phys. Rev. B 49, 5065 (1994)): in every symmetry
// sector s of dimension D_s, R random unit vectors r start M steps of plain
// Lanczos each, whose Ritz values eps_j and weights w_j = |<psi_j|r>|^2
// estimate every trace
//
//	Tr_s f(H) ~ (D_s / R) sum_r sum_j w_rj f(eps_rj),
//
// so Z, E, C and S follow with statistical errors from a jackknife over the
// random vectors (package lanczos). Sectors of at most FTLMExactLimit
// states are diagonalized exactly and carry no statistical error. M and chi
// come by one of two routes.
//
// One sample set for every field. Where the moment along the field is
// m S^z with S^z conserved (one effective g), each sector has its S^z, so
// M = m <S^z> and chi = (mu_B/k_B) m^2 Var(S^z) / T come from the same
// samples of the zero-field sectors, at any field, with the Zeeman energy
// -(mu_B/k_B) m B S^z added to each sector's Ritz values: a magnetization
// curve costs one FTLM run whatever its number of fields.
//
// One run per field. Otherwise (a site with another g, g tensors, DM with a
// transverse field: M_n does not commute with H0) each field is its own
// FTLM run on H(B) = H0 - (mu_B/k_B) B M_n, in the sectors of H(B) (S^z
// where H(B) conserves it, and the spatial symmetries of H0 and M_n), and
// the same recurrences estimate the moment by the observable weights
// a_j = Re <r|psi_j><psi_j|M_n|r> (lanczos.Sampler.SampleObservable):
//
//	M = Tr e^{-H/T} M_n / Z ~ sum_r sum_j (D_s/R) a_rj e^{-eps_rj/T} / Z.
//
// chi = dM/dB along the field (the isothermal susceptibility of the dense
// route, Van Vleck part included) is the central difference
// (M(B + h) - M(B - h)) / 2h of two more runs with the same random vectors
// (common random numbers; see ftlmStep for h), whose jackknife error is that
// of the difference (lanczos.ObservableDifference): the noise that the two
// sides share cancels, so the error does not grow like 1/h. The cost is
// per field: Thermo samples B and B +- h (three runs); a magnetization
// curve one run per field, three with chi (at B = 0, where M = 0 by time
// reversal, none or two; fieldRuns). Each run costs somewhat more than the
// first route's single run (the field breaks the spin inversion and the
// S^z mirror), so the first route is kept wherever it applies. The memory
// plan counts, per sector, the basis, the CSR matrix and the vectors the
// sampler allocates (ftlmSectorBytes), one sector at a time.

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
	// perField: M_n is not mz S^z; every field is its own run on H(B),
	// with M = <M_n> from the observable weights of moment, the operator
	// M_n (mu_B), and chi by the central difference of step (T).
	perField bool
	moment   *hilbert.Hamiltonian
	step     float64
}

// planFTLM lays out the FTLM sectors of op (every sector: thermodynamics
// needs them all) and checks memory: one sector at a time, its basis, its
// matrix when it fits, and what the sampler allocates (ftlmSectorBytes).
// observable: the samples carry the moment's weights (the per-field route).
func planFTLM(m *cluster.Model, st *setup, op *operator, opts FTLMOptions, inversion, spatial, mirror, observable bool, l Limits) (*ftlmPlan, error) {
	// planKrylov counts a Lanczos basis for the lowest levels; the sectors
	// are the same, the memory is counted here.
	kp, err := planKrylov(m, st, op, 1, false, inversion, spatial, mirror, !observable, Limits{MaxMemory: math.MaxInt64}, nil)
	if err != nil {
		return nil, err
	}
	fp := &ftlmPlan{kp: kp, opts: opts.withDefaults()}
	limit := l.MaxMemory
	if limit <= 0 {
		limit = DefaultMaxMemory
	}
	need := func(csr bool) int64 {
		var peak int64
		for _, s := range kp.sectors {
			if !s.mirror {
				peak = max(peak, ftlmSectorBytes(s.mem, fp.opts, csr, observable))
			}
		}
		return peak + baseOverhead
	}
	if err := kp.fitMemory(need, limit, st.sys.total); err != nil {
		return nil, err
	}
	return fp, nil
}

// ftlmSectorBytes is the peak memory of one sector of the FTLM route: its
// basis and group tables, its CSR matrix when csr, and either the dense
// matrix of an exact sector (with observable also its eigenvectors and the
// solver's rotations, two more n x n arrays, and three work vectors) or
// the sampler's vectors: lanczos.SampleVectors, the random start vector
// and, with observable, lanczos.ObservableVectors for M_n r. The moment's
// sector shares the basis (hilbert.Sector.WithHamiltonian) and is applied
// matrix-free, so it adds only its small term tables.
func ftlmSectorBytes(mem hilbert.Memory, opts FTLMOptions, csr, observable bool) int64 {
	b := mem.Basis + mem.Tables
	if csr {
		b += mem.Matrix
	}
	n := mem.Dim
	elem := int64(16)
	if mem.Real {
		elem = 8
	}
	if n <= int64(opts.ExactBelow) {
		arrays := int64(1)
		if observable {
			arrays = 3
			b += 3 * mem.Vector
		}
		return b + arrays*n*n*elem + 2*mem.Vector
	}
	vectors := int64(lanczos.SampleVectors + 1)
	if observable {
		vectors += lanczos.ObservableVectors
	}
	return b + vectors*mem.Vector
}

// report starts the engine report of the FTLM route.
func (fp *ftlmPlan) report(dimension int64) Report {
	solver := fmt.Sprintf("plain Lanczos, %d random vectors of %d steps per sector; sectors of at most %d states dense (%s)",
		fp.opts.Vectors, fp.opts.Steps, max(fp.opts.ExactBelow, 0), strings.SplitN(eigen.Solver, " (", 2)[0])
	if fp.perField {
		solver += "; M from the moment's weights <r|psi_j><psi_j|M_n|r> of the same recurrences"
	}
	return fp.kp.report("finite-temperature Lanczos", dimension, solver)
}

// sampleSector returns the FTLM samples of one sector: exact for small
// sectors, R random vectors of M steps otherwise.
func sampleSector(ctx context.Context, fp *ftlmPlan, s krylovSector, index int, opt Options) (lanczos.SectorSamples, int, error) {
	sec, err := hilbert.NewSectorContext(ctx, fp.kp.h, s.twoSz, s.group, s.irrep, hilbert.SectorOptions{Workers: opt.Workers})
	if err != nil {
		return lanczos.SectorSamples{Dimension: s.mem.Dim}, 0, err
	}
	rng := sectorRand(fp, index)
	re, cx, err := sectorOperator(ctx, sec, fp.kp.csr)
	if err != nil {
		return lanczos.SectorSamples{Dimension: s.mem.Dim}, 0, err
	}
	if re != nil {
		return sampleOperator(ctx, re, nil, s.mem.Dim, fp.opts, rng, solveReal(ctx))
	}
	return sampleOperator(ctx, cx, nil, s.mem.Dim, fp.opts, rng, solveComplex(ctx))
}

// sectorRand is the generator of the random vectors of sector index: the
// same for every field and every run, so that runs at different fields
// share their random vectors (common random numbers).
func sectorRand(fp *ftlmPlan, index int) *rand.Rand {
	return rand.New(rand.NewPCG(fp.opts.Seed, uint64(index)+0x5eed))
}

// solveReal and solveComplex are the dense eigensolvers of exact sectors.
func solveReal(ctx context.Context) func(a []float64, n int, vectors bool) ([]float64, []float64, error) {
	return func(a []float64, n int, vectors bool) ([]float64, []float64, error) {
		return eigen.SymmetricContext(ctx, a, n, vectors)
	}
}

func solveComplex(ctx context.Context) func(a []complex128, n int, vectors bool) ([]float64, []complex128, error) {
	return func(a []complex128, n int, vectors bool) ([]float64, []complex128, error) {
		return eigen.HermitianContext(ctx, a, n, vectors)
	}
}

// sampleOperator samples op: exactly (every eigenvalue with weight 1, from
// the dense matrix and solve) up to opts.ExactBelow states, else from
// opts.Vectors random vectors of opts.Steps Lanczos steps. With an
// observable obs (nil: none) every sample also carries the weights
// Re <r|psi_j><psi_j|obs|r> (exact sectors: the diagonal elements
// <psi_j|obs|psi_j> of the eigenvectors). It returns the samples and the
// operator applications used.
func sampleOperator[T lanczos.Scalar](ctx context.Context, op, obs lanczos.Operator[T], dim int64, opts FTLMOptions, rng *rand.Rand,
	solve func(a []T, n int, vectors bool) ([]float64, []T, error)) (lanczos.SectorSamples, int, error) {
	out := lanczos.SectorSamples{Dimension: dim}
	n := op.Dim()
	if n <= opts.ExactBelow {
		a, err := denseOf(ctx, op)
		if err != nil {
			return out, 0, err
		}
		vals, vecs, err := solve(a, n, obs != nil)
		if err != nil {
			return out, n, ftlmSolverError(err)
		}
		w := make([]float64, n)
		for i := range w {
			w[i] = 1
		}
		rz := &lanczos.Ritz{Values: vals, Weights: w, Norm: math.Sqrt(float64(n)), Steps: n}
		if obs != nil {
			if rz.Observable, err = diagonalElements(ctx, obs, vecs, n); err != nil {
				return out, n, err
			}
		}
		out.Exact, out.Samples = true, []*lanczos.Ritz{rz}
		return out, n, nil
	}
	smp := lanczos.NewSampler(op)
	mv := 0
	for v := 0; v < opts.Vectors; v++ {
		var r *lanczos.Ritz
		var err error
		if obs == nil {
			r, err = smp.Sample(ctx, lanczos.RandomVector[T](n, rng), opts.Steps)
		} else {
			r, err = smp.SampleObservable(ctx, lanczos.RandomVector[T](n, rng), opts.Steps, obs)
		}
		if err != nil {
			return out, mv, err
		}
		mv += r.Steps
		out.Samples = append(out.Samples, r)
	}
	return out, mv, nil
}

// diagonalElements returns Re <u_k|obs|u_k> for the columns u_k of the
// n x n row-major matrix vecs (one application of obs per column).
func diagonalElements[T lanczos.Scalar](ctx context.Context, obs lanczos.Operator[T], vecs []T, n int) ([]float64, error) {
	out := make([]float64, n)
	u := make([]T, n)
	au := make([]T, n)
	for k := range n {
		for i := range n {
			u[i] = vecs[i*n+k]
		}
		if err := obs.Apply(ctx, au, u); err != nil {
			return nil, err
		}
		var d float64
		for i := range n {
			d += realOf(conjOf(u[i]) * au[i])
		}
		out[k] = d
	}
	return out, nil
}

// conjOf and realOf are the conjugate and the real part of a real or
// complex scalar.
func conjOf[T lanczos.Scalar](x T) T {
	if c, ok := any(x).(complex128); ok {
		return any(cmplx.Conj(c)).(T)
	}
	return x
}

func realOf[T lanczos.Scalar](x T) float64 {
	switch v := any(x).(type) {
	case complex128:
		return real(v)
	case float64:
		return v
	}
	panic("ed: scalar of an unknown type")
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
				j := s.partner
				if !done[j] {
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

// planThermoFTLM plans the FTLM route of Thermo, after full diagonalization
// was found not to fit (denseErr is that error, nil when FTLM was asked
// for): with one effective g the field is a shift of each S^z sector of
// H0, otherwise H(B) and B +- h are sampled (perFieldSamples).
func planThermoFTLM(m *cluster.Model, req ThermoRequest, p *taskPlan, denseErr error, dimension int64, opt Options) (*taskPlan, error) {
	st := p.st
	why := ""
	if denseErr != nil {
		why = fmt.Sprintf(" (full diagonalization does not fit: %v)", denseErr)
	}
	if p.analytic && st.conserveSz {
		inversion := st.flipSymmetric && p.op == st.h0 && st.conserveSz
		fp, err := planFTLM(m, st, p.op, req.FTLM, inversion, !req.NoSpatialSymmetry, inversion, false, opt.Limits)
		if err != nil {
			return nil, err
		}
		fp.moments = true
		p.ftlm = fp
		p.rep = fp.report(dimension)
		p.rep.Route = fmt.Sprintf("%s; finite-temperature Lanczos in %d sectors (%s)%s%s", thermoRoute(st, p.B), len(fp.kp.sectors), fp.kp.groups.about, fp.kp.partnersNote(), why)
		return p, nil
	}
	fp, err := planPerField(m, st, req.FTLM, !req.NoSpatialSymmetry, req.Temperatures, opt.Limits)
	if err != nil {
		return nil, err
	}
	p.ftlm = fp
	p.rep = fp.report(dimension)
	p.rep.Route = fmt.Sprintf("%s; finite-temperature Lanczos on H(B) in %d sectors (%s); M = <M_n> from the moment's weights of the same samples, chi = dM/dB by a central difference over B +- %.3g T with the same random vectors: 3 runs at this field%s",
		spectrumRoute(st, p.B, false), len(fp.kp.sectors), fp.kp.groups.about, fp.step, why)
	return p, nil
}

// thermoFTLM is the FTLM route of Thermo.
func thermoFTLM(ctx context.Context, req ThermoRequest, opt Options, p *taskPlan) (*ThermoResult, error) {
	st, fp := p.st, p.ftlm
	nt := len(req.Temperatures)
	res := &ThermoResult{Field: req.Field, Direction: p.direction, Temperature: append([]float64(nil), req.Temperatures...),
		Energy: make([]float64, nt), SpecificHeat: make([]float64, nt), Entropy: make([]float64, nt),
		Magnetization: make([]float64, nt), Susceptibility: make([]float64, nt),
		EnergyError: make([]float64, nt), SpecificHeatError: make([]float64, nt), EntropyError: make([]float64, nt),
		MagnetizationError: make([]float64, nt), SusceptibilityError: make([]float64, nt)}
	rep := p.rep
	var th *lanczos.Thermal
	if fp.perField {
		runs := []float64{p.B, p.B + fp.step, p.B - fp.step}
		sets, matvecs, solved, err := perFieldSamples(ctx, fp, st, runs, opt, "FTLM runs")
		if err != nil {
			return nil, err
		}
		rep.Diagonalizations, rep.Matvecs = solved, matvecs
		if th, err = lanczos.Thermodynamics(sets[0], req.Temperatures, math.NaN()); err != nil {
			return nil, err
		}
		chi, err := lanczos.ObservableDifference(sets[1], sets[2], req.Temperatures, 1/(2*fp.step))
		if err != nil {
			return nil, err
		}
		for ti := range req.Temperatures {
			res.Magnetization[ti], res.MagnetizationError[ti] = th.Observable[ti].Value, th.Observable[ti].Error
			res.Susceptibility[ti], res.SusceptibilityError[ti] = chi[ti].Value, chi[ti].Error
		}
	} else {
		samples, twoSz, matvecs, solved, err := ftlmSamples(ctx, fp, opt)
		if err != nil {
			return nil, err
		}
		rep.Diagonalizations, rep.Matvecs = solved, matvecs
		h := MuBOverKB * p.B * st.mz
		for i := range samples {
			sz := 0.0
			if twoSz[i] != hilbert.NoSz {
				sz = float64(twoSz[i]) / 2
			}
			samples[i].Value = sz
			samples[i].Offset = -h * sz
		}
		if th, err = lanczos.Thermodynamics(samples, req.Temperatures, math.NaN()); err != nil {
			return nil, err
		}
		for ti, T := range req.Temperatures {
			res.Magnetization[ti] = st.mz * th.Mean[ti].Value
			res.MagnetizationError[ti] = math.Abs(st.mz) * th.Mean[ti].Error
			res.Susceptibility[ti] = MuBOverKB * st.mz * st.mz * th.Variance[ti].Value / T
			res.SusceptibilityError[ti] = MuBOverKB * st.mz * st.mz * th.Variance[ti].Error / T
		}
	}
	for ti := range req.Temperatures {
		res.Energy[ti], res.EnergyError[ti] = th.Energy[ti].Value, th.Energy[ti].Error
		res.SpecificHeat[ti], res.SpecificHeatError[ti] = th.SpecificHeat[ti].Value, th.SpecificHeat[ti].Error
		res.Entropy[ti], res.EntropyError[ti] = th.Entropy[ti].Value, th.Entropy[ti].Error
		if p.B == 0 {
			// Time reversal: no moment without a field.
			res.Magnetization[ti], res.MagnetizationError[ti] = 0, 0
		}
	}
	if th.Blocks > 0 {
		rep.Warnings = append(rep.Warnings, fp.warning(th.Blocks, "beside it"))
	}
	res.Report = rep
	return res, nil
}

// warning is the report's statement that the values are statistical, with
// where their errors are.
func (fp *ftlmPlan) warning(blocks int, where string) string {
	w := fmt.Sprintf("finite-temperature Lanczos: statistical estimates from %d random vectors of %d steps per sector (sectors of at most %d states exact); every value has its one-standard-deviation error %s (jackknife over %d blocks); below the lowest excitation gaps the estimate rests on the lowest Ritz values found", fp.opts.Vectors, fp.opts.Steps, max(fp.opts.ExactBelow, 0), where, blocks)
	if fp.perField {
		w += fmt.Sprintf("; M is the FTLM estimate of Tr e^{-H/T} M_n / Z, whose noise at low T includes the moment's matrix elements between the lowest states and the rest; chi is (M(B+h) - M(B-h))/2h with h = %.3g T and the same random vectors on both sides (the step's truncation error is below 2e-7 of chi)", fp.step)
	}
	return w
}

// planMagnetizationFTLM plans the FTLM route of a magnetization curve along
// one direction, after full diagonalization was found not to fit (dense is
// that error, nil when FTLM was asked for). Where M = m S^z with S^z
// conserved every field is a shift -(mu_B/k_B) m B S^z of the zero-field
// sectors, sampled once; otherwise each field is its own run on H(B)
// (perFieldSamples). Both need T > 0, which is checked after the memory
// plan (a cluster that fits no route is refused with the LimitError).
func planMagnetizationFTLM(m *cluster.Model, req MagnetizationRequest, p *taskPlan, dense error, opt Options) (*taskPlan, error) {
	st := p.st
	uniform := p.analytic && st.conserveSz
	var fp *ftlmPlan
	var err error
	if uniform {
		inversion := st.flipSymmetric && st.conserveSz
		fp, err = planFTLM(m, st, st.h0, req.FTLM, inversion, !req.NoSpatialSymmetry, inversion, false, opt.Limits)
	} else {
		fp, err = planPerField(m, st, req.FTLM, !req.NoSpatialSymmetry, req.Temperatures, opt.Limits)
	}
	if err != nil {
		return nil, err
	}
	for i, T := range req.Temperatures {
		if T == 0 {
			return nil, &RequestError{Field: fmt.Sprintf("temperatures[%d]", i), Reason: "finite-temperature Lanczos needs T > 0 (the T = 0 limit is the Lanczos ground state: frustum spectrum)"}
		}
	}
	why := ""
	if dense != nil {
		why = fmt.Sprintf(" (full diagonalization does not fit: %v)", dense)
	}
	dimension, _ := m.Dimension()
	p.ftlm = fp
	if uniform {
		fp.moments = true
		kp := fp.kp
		p.rep = fp.report(dimension)
		p.rep.Route = fmt.Sprintf("%s; every field a Zeeman shift of the zero-field sectors, sampled once by finite-temperature Lanczos in %d sectors (%s)%s%s", spectrumRoute(st, 1, true), len(kp.sectors), kp.groups.about, kp.partnersNote(), why)
	} else {
		p.rep = fp.report(dimension)
		runs := 0
		for _, B := range req.Fields {
			runs += len(fieldRuns(B, fp.step, req.Susceptibility))
		}
		cost := "one run per field (none at B = 0, where M = 0)"
		if req.Susceptibility {
			cost = "three runs per field, B and B +- h for chi (two at B = 0, where M = 0)"
		}
		p.rep.Route = fmt.Sprintf("%s; each field its own finite-temperature Lanczos run on H(B) = H0 - (mu_B/k_B) B M_n in %d sectors (%s), M = <M_n> from the moment's weights of the same samples at every temperature", spectrumRoute(st, 1, false), len(fp.kp.sectors), fp.kp.groups.about)
		if req.Susceptibility {
			p.rep.Route += fmt.Sprintf(", chi = dM/dB by a central difference over B +- h, h = %.3g T, with the same random vectors", fp.step)
		}
		p.rep.Route += fmt.Sprintf("; the cost is per field: %s, %d runs in all%s", cost, runs, why)
	}
	if len(st.groups) > 0 {
		p.rep.Warnings = append(p.rep.Warnings, "finite-temperature Lanczos gives the moment of the whole cluster only: the group curves are not computed")
	}
	return p, nil
}

// magnetizationFTLM fills the curves of res: from one set of FTLM samples
// of the zero-field sectors, shifted for every field, or by one run per
// field (magnetizationPerFieldFTLM).
func magnetizationFTLM(ctx context.Context, p *taskPlan, req MagnetizationRequest, opt Options, res *MagnetizationResult) error {
	st, fp := p.st, p.ftlm
	for ci := range res.Curves {
		res.Curves[ci].Groups = nil
		res.Curves[ci].MagnetizationError = make([]float64, len(req.Fields))
		if req.Susceptibility {
			res.Curves[ci].SusceptibilityError = make([]float64, len(req.Fields))
		}
	}
	if fp.perField {
		return magnetizationPerFieldFTLM(ctx, p, req, opt, res)
	}
	samples, twoSz, matvecs, solved, err := ftlmSamples(ctx, fp, opt)
	if err != nil {
		return err
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
		p.rep.Warnings = append(p.rep.Warnings, fp.warning(blocks, "(magnetizationError, susceptibilityError)"))
	}
	return nil
}
