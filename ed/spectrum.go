package ed

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sort"

	"frustum/cluster"
)

// Spectrum diagonalizes the cluster at one field and returns every eigenvalue
// (or the lowest req.Levels) with the levels grouped by degeneracy, labelled
// with S^z and total S where those are good quantum numbers.
//
// Where the field-free Hamiltonian conserves S^z and the Zeeman term is
// -(mu_B/k_B) B m S^z_total (one g value, or an SU(2)-invariant H0 with the
// quantization axis turned onto the field), the zero-field sectors are
// diagonalized and shifted by -(mu_B/k_B) B m S^z; otherwise H(B) is
// diagonalized in S^z sectors when it conserves S^z, and whole otherwise.
func Spectrum(ctx context.Context, m *cluster.Model, req SpectrumRequest, opt Options) (*SpectrumResult, error) {
	p, err := planSpectrum(m, req, opt)
	if err != nil {
		return nil, err
	}
	if p.krylov != nil {
		return spectrumKrylov(ctx, m, req, opt, p, p.krylov)
	}
	opt.Workers = p.workers
	st, op, isReal, B, applyAnalytically, rep := p.st, p.op, p.isReal, p.B, p.analytic, p.rep
	bs := newBasisSet(st.sys, st.conserveSz)
	spectra := make([]*sectorSpectrum, len(bs.sectors))
	src := bs.mirrorSources(st.flipSymmetric && op == st.h0)
	solve := solvedSectors(src)
	err = parallel(ctx, len(solve), func(i int) int { return bs.sectors[solve[i]].dim() }, opt, "diagonalize sectors", func(i int) error {
		sp, err := diagonalize(ctx, st.sys, bs, bs.sectors[solve[i]], op, isReal, false, nil)
		spectra[solve[i]] = sp
		return err
	})
	if err != nil {
		return nil, err
	}
	for i, j := range src {
		if j >= 0 {
			spectra[i] = &sectorSpectrum{sector: bs.sectors[i], values: spectra[j].values}
		}
	}
	rep.Diagonalizations = len(solve)

	h := 0.0
	if B != 0 && applyAnalytically {
		h = MuBOverKB * B * st.mz
	}
	var xs, zeroField []labelledEnergy
	for _, sp := range spectra {
		for _, e := range sp.values {
			x := labelledEnergy{e: e, twoSz: sp.sector.twoSz}
			zeroField = append(zeroField, x)
			x.e -= h * sp.sector.sz()
			xs = append(xs, x)
		}
	}
	res := &SpectrumResult{Field: req.Field, TotalStates: st.sys.total}
	res.Energies = make([]float64, len(xs))
	for i, x := range xs {
		res.Energies[i] = x.e
	}
	sort.Float64s(res.Energies)
	tol := levelTolerance(res.Energies)

	switch {
	case st.su2 && applyAnalytically:
		ms, ok := su2Multiplets(zeroField, tol)
		if ok {
			res.Levels = su2Levels(ms, h, tol)
			break
		}
		rep.Warnings = append(rep.Warnings, "total-spin labels dropped: near-degenerate levels closer than the grouping tolerance could not be assigned to multiplets")
		res.Levels = groupLevels(xs, tol, st.conserveSz && B != 0)
	case st.conserveSz:
		res.Levels = groupLevels(xs, tol, true)
	default:
		res.Levels = groupLevels(xs, tol, false)
	}
	if req.Levels > 0 && req.Levels < len(res.Energies) {
		res.Truncated = true
		res.Energies = res.Energies[:req.Levels]
		top := res.Energies[req.Levels-1] + tol
		k := 0
		for k < len(res.Levels) && res.Levels[k].Energy <= top {
			k++
		}
		res.Levels = res.Levels[:k]
		rep.Warnings = append(rep.Warnings, fmt.Sprintf("spectrum truncated to the lowest %d of %d eigenvalues (levels keep their whole degeneracy)", req.Levels, st.sys.total))
	}
	res.Report = rep
	return res, nil
}

// taskPlan is what the engine decides before a task runs.
type taskPlan struct {
	st       *setup
	op       *operator // the operator diagonalized (H0 or H(B))
	isReal   bool
	B        float64 // field magnitude (T)
	analytic bool    // the field is applied to the zero-field sectors exactly
	// direction is the unit field direction (z at zero field).
	direction [3]float64
	// workers: how many blocks may be diagonalized at once within the
	// memory limit.
	workers int
	rep     Report
	// krylov is the plan of the Lanczos route and ftlm that of the
	// finite-temperature Lanczos route (nil: full diagonalization).
	krylov *krylovPlan
	ftlm   *ftlmPlan
}

// planSpectrum validates the request and plans the spectrum task: full
// diagonalization, or the Lanczos route (see Method).
func planSpectrum(m *cluster.Model, req SpectrumRequest, opt Options) (*taskPlan, error) {
	if m == nil || len(m.Sites) == 0 {
		return nil, &RequestError{Field: "cluster", Reason: "has no sites"}
	}
	if err := checkVector("field", req.Field); err != nil {
		return nil, err
	}
	if req.Levels < 0 {
		return nil, &RequestError{Field: "levels", Reason: fmt.Sprintf("%d is negative", req.Levels)}
	}
	switch req.Method {
	case "", MethodAuto, MethodFull, MethodLanczos:
	default:
		return nil, &RequestError{Field: "method", Reason: fmt.Sprintf("unknown method %q (auto, full or lanczos)", req.Method)}
	}
	if req.Method == MethodFull && req.Correlations {
		return nil, &RequestError{Field: "correlations", Reason: "ground-state correlations come from the Lanczos route: use method auto or lanczos"}
	}
	if err := checkLanczos(req.Lanczos); err != nil {
		return nil, err
	}
	n, B := unit(req.Field)
	dimension, ok := m.Dimension()
	if !ok {
		return nil, &RequestError{Field: "cluster", Reason: "Hilbert space too large to index"}
	}
	st := newSetup(m, n, B != 0)
	// Diagonalize H0 when the field only shifts its sectors.
	p := &taskPlan{st: st, B: B, analytic: B == 0 || st.uniform, op: st.h0}
	if !p.analytic {
		p.op = st.hamiltonian(B)
	}
	p.isReal = p.op.isReal()
	var denseErr error
	if dimension <= 1<<31-1 {
		w := newWorkload(st, opt, false, false, false, 1)
		w.complex = !p.isReal
		mem, workers, err := w.check(opt.Limits)
		denseErr = err
		if err == nil {
			p.rep = w.report(st, mem)
			p.workers = workers
			p.rep.Route = spectrumRoute(st, B, p.analytic)
		}
		largest := int64(0)
		for _, d := range sectorDimensions(st.sys, st.conserveSz) {
			largest = max(largest, d)
		}
		useDense := false
		switch req.Method {
		case MethodFull:
			if err != nil {
				return nil, err
			}
			useDense = true
		case "", MethodAuto:
			useDense = err == nil && !req.Correlations && (req.Levels == 0 || largest <= AutoDenseLimit)
		}
		if useDense {
			return p, nil
		}
	} else if req.Method == MethodFull {
		return nil, &RequestError{Field: "cluster", Reason: fmt.Sprintf("Hilbert space of %d sites is beyond full diagonalization (more than 2^31 states)", len(m.Sites))}
	}
	// The Lanczos route.
	k := req.Levels
	var why string
	if k == 0 {
		k = DefaultLanczosLevels
		why = fmt.Sprintf("; all levels were asked for, but full diagonalization does not fit (%v): the lowest %d instead", denseErr, k)
	}
	mirror := st.flipSymmetric && p.op == st.h0
	inversion := st.flipSymmetric && p.op == st.h0 && st.conserveSz
	// A selection of sectors breaks the pairing of S^z with -S^z: no
	// mirrors then.
	mirror = mirror && len(req.Sectors) == 0
	kp, err := planKrylov(m, st, p.op, k, req.Correlations, inversion, !req.NoSpatialSymmetry, mirror, true, opt.Limits, req.Sectors)
	if err != nil {
		var le *LimitError
		if errors.As(err, &le) && denseErr != nil && req.Levels == 0 {
			// All levels were asked for: the dense figures are the ones
			// that matter.
			return nil, denseErr
		}
		return nil, err
	}
	p.krylov = kp
	p.rep = kp.report("Lanczos", dimension, "thick-restart Lanczos, partial reorthogonalization")
	op := "matrix-free"
	if kp.csr {
		op = "compact CSR matrix per sector"
	}
	p.rep.Route = fmt.Sprintf("%s; Lanczos in %d sectors (%s; %s)%s, the lowest %d of each%s", spectrumRoute(st, B, p.analytic), len(kp.sectors), kp.groups.about, op, kp.partnersNote(), k, why)
	if why != "" {
		p.rep.Warnings = append(p.rep.Warnings, fmt.Sprintf("all levels were asked for, but the cluster is too large for full diagonalization: the lowest %d from Lanczos", k))
	}
	if len(req.Sectors) > 0 {
		if len(kp.sectors) == 0 {
			return nil, &RequestError{Field: "sectors", Reason: fmt.Sprintf("%q matches no sector (labels are like \"Sz=0, T1:k=0/16,flip:+\"; frustum spectrum without --sector lists them)", req.Sectors)}
		}
		p.rep.Route += fmt.Sprintf("; restricted to the sectors matching %q", req.Sectors)
		p.rep.Warnings = append(p.rep.Warnings, fmt.Sprintf("only %d of %d sectors were solved (those matching %q): levels of the others are not in the result", len(kp.sectors), len(kp.sectors)+kp.excluded, req.Sectors))
	}
	return p, nil
}

// checkLanczos refuses negative or non-finite Lanczos options.
func checkLanczos(l LanczosOptions) error {
	switch {
	case l.Tol < 0 || math.IsNaN(l.Tol) || math.IsInf(l.Tol, 0):
		return &RequestError{Field: "lanczos.tol", Reason: fmt.Sprintf("%v: must be a finite number >= 0 (0: the default 1e-10)", l.Tol)}
	case l.MaxIterations < 0:
		return &RequestError{Field: "lanczos.max_iterations", Reason: "must be >= 0 (0: the default)"}
	case l.Basis < 0:
		return &RequestError{Field: "lanczos.basis", Reason: "must be >= 0 (0: the default)"}
	}
	return nil
}

// PlanSpectrum returns what Spectrum would do (method, route, sectors,
// memory estimate) without diagonalizing anything, or the error it would
// return before starting (a *RequestError or *LimitError).
func PlanSpectrum(m *cluster.Model, req SpectrumRequest, opt Options) (Report, error) {
	p, err := planSpectrum(m, req, opt)
	if err != nil {
		return Report{}, err
	}
	return p.rep, nil
}

func spectrumRoute(st *setup, B float64, analytic bool) string {
	sym := "no conserved S^z"
	if st.conserveSz {
		sym = "total S^z conserved"
		if st.su2 {
			sym = "SU(2)-invariant exchange, total S^z conserved"
		}
		if st.rotated && B != 0 {
			sym += " (quantization axis along the field)"
		}
	}
	switch {
	case B == 0:
		return "zero field: " + sym
	case analytic:
		return sym + "; one effective g along the field: zero-field sectors diagonalized, Zeeman shift -(mu_B/k_B) B g_eff S^z applied exactly"
	}
	return sym + "; Hamiltonian diagonalized at this field"
}

func checkVector(name string, v [3]float64) error {
	for i, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return &RequestError{Field: fmt.Sprintf("%s[%d]", name, i), Reason: fmt.Sprintf("%v is not a finite number", x)}
		}
	}
	return nil
}
