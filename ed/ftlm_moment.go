package ed

import (
	"context"
	"math"

	"frustum/cluster"
	"frustum/ed/hilbert"
	"frustum/ed/lanczos"
)

// The per-field route of FTLM: where the moment along the field M_n does
// not commute with H0 (see the top of ftlm.go), every field B is sampled on
// H(B) = H0 - (mu_B/k_B) B M_n, and M_n is applied on the same sector basis
// (hilbert.Sector.WithHamiltonian) to give its observable weights.

// diffStepFraction is the Zeeman energy of the central-difference step of
// chi, as a fraction of the lowest temperature (see ftlmStep).
const diffStepFraction = 1e-3

// ftlmStep returns the field step h (T) of the central difference
// chi = (M(B + h) - M(B - h)) / 2h of the per-field route:
//
//	h = 1e-3 T_min / ((mu_B/k_B) M_sat),   M_sat = sum_i |g_i^T n| S_i >= ||M_n||,
//
// so that the step changes H by at most 1e-3 of the lowest temperature.
// Why this size: every B-derivative of a thermal average brings a factor of
// at most about (mu_B/k_B) M_sat / T, so the truncation error
// (h^2/6) d^3M/dB^3 is about (1e-3 T_min/T)^2 / 6 <= 2e-7 of chi, far
// below any statistical error. Since both sides start from the same random
// vectors, the two estimates differ only through H(B +- h), smoothly: the
// noise of their difference is proportional to h, and that of the quotient
// stays that of the derivative of the per-sample estimates, independent of
// h (lanczos.ObservableDifference), so a larger step would buy nothing but
// truncation error. Rounding (about 1e-15 of M_sat in each M, divided by
// 2h) stays near 1e-12 of (mu_B/k_B) M_sat^2 / T_min; a much smaller step
// would let it in. With every sector dense the route reproduces the dense
// route's chi to about 1e-9 (TestFTLMDMTransverseMatchesDense).
func ftlmStep(st *setup, temps []float64) float64 {
	tmin := math.Inf(1)
	for _, T := range temps {
		tmin = math.Min(tmin, T)
	}
	if st.saturation <= 0 || math.IsInf(tmin, 1) {
		return 1 // no moment: M = 0 at every field, any step gives chi = 0
	}
	return diffStepFraction * tmin / (MuBOverKB * st.saturation)
}

// fieldRuns returns the fields that the per-field route samples for the
// field B of a magnetization curve: B for M (not at B = 0, where M = 0 by
// time reversal), and B + h, B - h for chi.
func fieldRuns(B, h float64, chi bool) []float64 {
	var runs []float64
	if B != 0 {
		runs = append(runs, B)
	}
	if chi {
		runs = append(runs, B+h, B-h)
	}
	return runs
}

// planPerField plans the per-field route: the sectors of H(B) (S^z where
// H(B) conserves it for every B, the spatial symmetries of the cluster,
// which keep H0 and M_n; no spin inversion or S^z mirror, which the field
// breaks), planned with a nonzero field so that the memory plan counts the
// moment's terms in H(B), and the moment's observable vector.
func planPerField(m *cluster.Model, st *setup, opts FTLMOptions, spatial bool, temps []float64, l Limits) (*ftlmPlan, error) {
	fp, err := planFTLM(m, st, st.hamiltonian(1), opts, false, spatial, false, true, l)
	if err != nil {
		return nil, err
	}
	fp.perField = true
	fp.moment = toHilbert(st.sys, st.moment)
	fp.step = ftlmStep(st, temps)
	return fp, nil
}

// perFieldSamples samples H(B) at every field of fields, sector by sector:
// the sector's basis is built once (for the first field) and shared by the
// Hamiltonians of the other fields and by the moment M_n, and every field's
// run starts from the same random vectors (sectorRand), so that differences
// between the fields carry little noise. Every sample carries the moment's
// observable weights; all runs of a sector use real arithmetic only when
// every one of them and M_n are real there. It returns one sample set per
// field, the operator applications and the sector runs. Progress is
// reported per sector under stage (none when stage is empty).
func perFieldSamples(ctx context.Context, fp *ftlmPlan, st *setup, fields []float64, opt Options, stage string) ([][]lanczos.SectorSamples, int64, int, error) {
	kp := fp.kp
	hs := make([]*hilbert.Hamiltonian, len(fields))
	for k, B := range fields {
		hs[k] = toHilbert(st.sys, st.hamiltonian(B))
	}
	sets := make([][]lanczos.SectorSamples, len(fields))
	for k := range sets {
		sets[k] = make([]lanczos.SectorSamples, len(kp.sectors))
	}
	var matvecs int64
	runs := 0
	for i, s := range kp.sectors {
		if err := ctx.Err(); err != nil {
			return nil, 0, 0, err
		}
		if stage != "" && opt.Progress != nil {
			opt.Progress(stage, i, len(kp.sectors))
		}
		base, err := hilbert.NewSectorContext(ctx, hs[0], s.twoSz, s.group, s.irrep, hilbert.SectorOptions{Workers: opt.Workers})
		if err != nil {
			return nil, 0, 0, err
		}
		mom, err := base.WithHamiltonian(fp.moment)
		if err != nil {
			return nil, 0, 0, err
		}
		secs := []*hilbert.Sector{base}
		real := mom.IsReal() && base.IsReal()
		for _, h := range hs[1:] {
			sec, err := base.WithHamiltonian(h)
			if err != nil {
				return nil, 0, 0, err
			}
			secs = append(secs, sec)
			real = real && sec.IsReal()
		}
		sz := 0.0
		if s.twoSz != hilbert.NoSz {
			sz = float64(s.twoSz) / 2
		}
		// A CSR matrix only where it is applied many times: sampled sectors.
		csr := kp.csr && s.mem.Dim > int64(fp.opts.ExactBelow)
		for k, sec := range secs {
			var smp lanczos.SectorSamples
			var mv int
			if real {
				var op lanczos.Operator[float64]
				if op, err = realOperator(ctx, sec, csr); err == nil {
					a, _ := mom.Real()
					smp, mv, err = sampleOperator[float64](ctx, op, a, s.mem.Dim, fp.opts, sectorRand(fp, i), solveReal(ctx))
				}
			} else {
				var op lanczos.Operator[complex128]
				if op, err = complexOperator(ctx, sec, csr); err == nil {
					smp, mv, err = sampleOperator[complex128](ctx, op, mom, s.mem.Dim, fp.opts, sectorRand(fp, i), solveComplex(ctx))
				}
			}
			if err != nil {
				return nil, 0, 0, err
			}
			smp.Value = sz
			sets[k][i] = smp
			matvecs += int64(mv)
			runs++
		}
	}
	if stage != "" && opt.Progress != nil {
		opt.Progress(stage, len(kp.sectors), len(kp.sectors))
	}
	return sets, matvecs, runs, nil
}

// realOperator and complexOperator return a sector's operator: its CSR
// matrix when csr, matrix-free otherwise (complexOperator also for a real
// sector, whose matrix is then applied to complex vectors).
func realOperator(ctx context.Context, sec *hilbert.Sector, csr bool) (lanczos.Operator[float64], error) {
	if csr {
		return sec.MatrixReal(ctx)
	}
	return sec.Real()
}

func complexOperator(ctx context.Context, sec *hilbert.Sector, csr bool) (lanczos.Operator[complex128], error) {
	if csr {
		return sec.Matrix(ctx)
	}
	return sec, nil
}

// sampleBlocks returns the jackknife blocks of a sample set: the fewest
// samples of a stochastic sector, 0 when every sector is exact.
func sampleBlocks(set []lanczos.SectorSamples) int {
	b := 0
	for _, s := range set {
		if !s.Exact && (b == 0 || len(s.Samples) < b) {
			b = len(s.Samples)
		}
	}
	return b
}

// magnetizationPerFieldFTLM fills the curves of res by one FTLM run per
// field (three with chi; see fieldRuns), reporting progress per field.
func magnetizationPerFieldFTLM(ctx context.Context, p *taskPlan, req MagnetizationRequest, opt Options, res *MagnetizationResult) error {
	st, fp := p.st, p.ftlm
	nb := len(req.Fields)
	var matvecs int64
	solved, blocks := 0, 0
	for bi, B := range req.Fields {
		if err := ctx.Err(); err != nil {
			return err
		}
		if opt.Progress != nil {
			opt.Progress("FTLM fields", bi, nb)
		}
		runs := fieldRuns(B, fp.step, req.Susceptibility)
		if len(runs) == 0 {
			continue // B = 0 without chi: M = 0
		}
		sets, mv, n, err := perFieldSamples(ctx, fp, st, runs, opt, "")
		if err != nil {
			return err
		}
		matvecs += mv
		solved += n
		blocks = max(blocks, sampleBlocks(sets[0]))
		k := 0
		if B != 0 {
			th, err := lanczos.Thermodynamics(sets[0], req.Temperatures, math.NaN())
			if err != nil {
				return err
			}
			for ti := range req.Temperatures {
				c := &res.Curves[ti]
				c.Magnetization[bi], c.MagnetizationError[bi] = th.Observable[ti].Value, th.Observable[ti].Error
			}
			k = 1
		}
		if req.Susceptibility {
			chi, err := lanczos.ObservableDifference(sets[k], sets[k+1], req.Temperatures, 1/(2*fp.step))
			if err != nil {
				return err
			}
			for ti := range req.Temperatures {
				c := &res.Curves[ti]
				c.Susceptibility[bi], c.SusceptibilityError[bi] = chi[ti].Value, chi[ti].Error
			}
		}
	}
	if opt.Progress != nil {
		opt.Progress("FTLM fields", nb, nb)
	}
	p.rep.Diagonalizations = solved
	p.rep.Matvecs = matvecs
	if blocks > 0 {
		p.rep.Warnings = append(p.rep.Warnings, fp.warning(blocks, "(magnetizationError, susceptibilityError)"))
	}
	return nil
}
