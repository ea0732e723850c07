package ed

import (
	"context"
	"fmt"
	"math"

	"frustum/cluster"
)

// Magnetization returns M(B) along the unit direction n at every temperature:
// M = <M_n> with M_n = sum_i n . (g_i S_i) in mu_B per cluster, and the same
// for the sites of each group. T = 0 gives the ground-state limit (the
// average over the degenerate ground states).
//
// Where H(B) = H0 - (mu_B/k_B) B m S^z_total with [H0, S^z] = 0 (an SU(2)
// cluster with one g, or S^z-conserving exchange with one g_zz and the field
// along z), H0 is diagonalized once and every field follows from the sector
// partition functions:
//
//	Z(B, T) = sum_s exp(-(e0_s - h M_s)/T) Z_s(T),  h = (mu_B/k_B) m B,
//
// with Z_s(T) the partition function of sector s about its lowest energy e0_s.
// Otherwise each field is diagonalized (in S^z sectors where they survive).
//
// With req.Susceptibility every curve also carries chi = dM/dB along the
// field (isothermal, mu_B/T per cluster), exactly: on the first route
// chi = (mu_B/k_B) m^2 Var(S^z)/T from the same sector sums, on the second the
// Kubo sum with its Van Vleck part (see Thermo) from the moment's matrix
// elements between the eigenstates at each field. At T = 0 chi is reported
// as 0, the zero-temperature derivative away from level crossings (at a
// crossing M jumps and dM/dB is not defined).
//
// With req.Powder > 0 the curves, the group moments, chi, Saturation and
// GroupSaturation are powder averages over the directions of a quadrature
// rule on the sphere (see PowderReport and powder.go); req.Direction must be
// zero then, and the result's Direction is zero.
func Magnetization(ctx context.Context, m *cluster.Model, req MagnetizationRequest, opt Options) (*MagnetizationResult, error) {
	return magnetization(ctx, m, req, opt, true)
}

// magnetization is Magnetization with the powder average's symmetry reduction
// switchable: reduce = false evaluates every direction of the rule (tests).
func magnetization(ctx context.Context, m *cluster.Model, req MagnetizationRequest, opt Options, reduce bool) (*MagnetizationResult, error) {
	if err := checkMagnetization(m, req); err != nil {
		return nil, err
	}
	if req.Powder > 0 {
		pp, err := planPowder(m, req, opt, reduce)
		if err != nil {
			return nil, err
		}
		return runPowder(ctx, pp, req, opt)
	}
	n, _ := unit(req.Direction)
	p, err := planDirection(m, req, n, opt)
	if err != nil {
		return nil, err
	}
	return runDirection(ctx, p, req, opt)
}

// runDirection runs the plan of one field direction p.direction.
func runDirection(ctx context.Context, p *taskPlan, req MagnetizationRequest, opt Options) (*MagnetizationResult, error) {
	opt.Workers = p.workers
	st, n := p.st, p.direction
	nb, ng := len(req.Fields), len(st.groups)
	res := &MagnetizationResult{Field: append([]float64(nil), req.Fields...), Direction: n, Saturation: st.saturation}
	if ng > 0 {
		res.GroupSaturation = map[string]float64{}
		for g, name := range st.groups {
			res.GroupSaturation[name] = st.groupSaturation[g]
		}
	}
	for _, T := range req.Temperatures {
		c := Curve{Temperature: T, Magnetization: make([]float64, nb)}
		if ng > 0 {
			c.Groups = map[string][]float64{}
			for _, g := range st.groups {
				c.Groups[g] = make([]float64, nb)
			}
		}
		if req.Susceptibility {
			c.Susceptibility = make([]float64, nb)
		}
		res.Curves = append(res.Curves, c)
	}
	var err error
	switch {
	case p.ftlm != nil:
		err = magnetizationFTLM(ctx, p, req, opt, res)
	case p.analytic:
		err = magnetizationShortcut(ctx, p, req, opt, res)
	default:
		err = magnetizationPerField(ctx, p, req, opt, res)
	}
	if err != nil {
		return nil, err
	}
	// Time reversal: no moment without a field (exactly, not to rounding).
	for bi, B := range req.Fields {
		if B != 0 {
			continue
		}
		for _, c := range res.Curves {
			c.Magnetization[bi] = 0
			for _, g := range c.Groups {
				g[bi] = 0
			}
		}
	}
	res.Report = p.rep
	return res, nil
}

// sectorStates holds one sector's eigenvalues and the expectation values of
// the moment and of each group's moment in its eigenstates.
type sectorStates struct {
	twoSz  int
	e      []float64
	moment []float64   // nil in the shortcut (it is mz * Sz)
	groups [][]float64 // per group, per eigenstate
}

func magnetizationShortcut(ctx context.Context, p *taskPlan, req MagnetizationRequest, opt Options, res *MagnetizationResult) error {
	st := p.st
	ng := len(st.groups)
	bs := newBasisSet(st.sys, true)
	secs := make([]sectorStates, len(bs.sectors))
	src := bs.mirrorSources(st.flipSymmetric)
	solve := solvedSectors(src)
	// The field shifts a sector's levels together, so the eigenstates whose
	// Boltzmann weight is negligible within their sector at H0 stay so at
	// every field: only the others get eigenvectors (boltzmannVectors).
	keep := boltzmannVectors(req.Temperatures)
	tally := make([]vectorTally, len(bs.sectors))
	solveSector := func(i int, keep func([]float64) int) error {
		sp, err := diagonalize(ctx, st.sys, bs, bs.sectors[i], st.h0, p.isReal, ng > 0, keep)
		if err != nil {
			return err
		}
		s := sectorStates{twoSz: bs.sectors[i].twoSz, e: sp.values}
		for _, op := range st.groupMoment {
			s.groups = append(s.groups, expectations(st.sys, bs, sp, op))
		}
		secs[i] = s
		if ng > 0 {
			tally[i] = vectorTally{computed: int64(sp.nvec), total: int64(len(sp.values))}
		}
		return nil
	}
	err := parallel(ctx, len(solve), func(i int) int { return bs.sectors[solve[i]].dim() }, opt, "diagonalize sectors", func(si int) error {
		return solveSector(solve[si], keep)
	})
	if err != nil {
		return err
	}
	if ng > 0 {
		var all []float64
		for _, i := range solve {
			all = append(all, secs[i].e...)
		}
		tol := levelTolerance(all)
		for _, i := range solve {
			share := sectorShare(secs[i].e, len(secs[i].groups[0]), req.Temperatures, tol)
			if share > 10*boltzmannCut {
				// A ground level wider than zeroWindow: every eigenvector.
				if err := solveSector(i, nil); err != nil {
					return err
				}
				share = 0
			}
			tally[i].share = share
		}
	}
	for _, t := range tally {
		p.rep.addVectors(t)
	}
	for i, j := range src {
		if j < 0 {
			continue
		}
		// The flip maps sector -Sz onto Sz with the same energies and
		// opposite group moments.
		s := sectorStates{twoSz: bs.sectors[i].twoSz, e: secs[j].e}
		for _, g := range secs[j].groups {
			neg := make([]float64, len(g))
			for v, x := range g {
				neg[v] = -x
			}
			s.groups = append(s.groups, neg)
		}
		secs[i] = s
	}
	p.rep.Diagonalizations = len(solve)
	var all []float64
	for _, s := range secs {
		all = append(all, s.e...)
	}
	tol := levelTolerance(all)

	// Per temperature and sector: ln Z_s(T) about e0_s and the sector's mean
	// group moments.
	for ti, T := range req.Temperatures {
		logZ := make([]float64, len(secs))
		gavg := make([][]float64, len(secs))
		for si, s := range secs {
			wts := weights(s.e, s.e[0], T, tol)
			z := 0.0
			for _, p := range wts {
				z += p
			}
			logZ[si] = math.Log(z)
			gavg[si] = make([]float64, ng)
			for g := 0; g < ng; g++ {
				a := 0.0
				for v, p := range wts[:len(s.groups[g])] {
					a += p * s.groups[g][v]
				}
				gavg[si][g] = a / z
			}
		}
		curve := &res.Curves[ti]
		a := make([]float64, len(secs))
		pz := make([]float64, len(secs))
		for bi, B := range req.Fields {
			h := MuBOverKB * B * st.mz
			lo := math.Inf(1)
			for si, s := range secs {
				a[si] = s.e[0] - h*float64(s.twoSz)/2
				lo = math.Min(lo, a[si])
			}
			var z, sz float64
			gm := make([]float64, ng)
			for si, s := range secs {
				var p float64
				if T == 0 {
					if a[si]-lo > tol {
						pz[si] = 0
						continue
					}
					p = math.Exp(logZ[si])
				} else {
					p = math.Exp(-(a[si]-lo)/T + logZ[si])
				}
				pz[si] = p
				z += p
				sz += p * float64(s.twoSz) / 2
				for g := range gm {
					gm[g] += p * gavg[si][g]
				}
			}
			mean := sz / z
			curve.Magnetization[bi] = st.mz * mean
			if curve.Susceptibility != nil && T > 0 {
				// S^z is constant on a sector: Var(S^z) is the spread of
				// the sectors' S^z, summed about the mean.
				v := 0.0
				for si, s := range secs {
					d := float64(s.twoSz)/2 - mean
					v += pz[si] * d * d
				}
				curve.Susceptibility[bi] = MuBOverKB * st.mz * st.mz * (v / z) / T
			}
			for g, name := range st.groups {
				curve.Groups[name][bi] = gm[g] / z
			}
		}
	}
	return nil
}

func magnetizationPerField(ctx context.Context, p *taskPlan, req MagnetizationRequest, opt Options, res *MagnetizationResult) error {
	st := p.st
	nb := len(req.Fields)
	bs := newBasisSet(st.sys, st.conserveSz)
	// Without the Kubo sums only the thermally populated eigenstates need
	// their vectors (boltzmannVectors); the Kubo sums need them all.
	var keep func([]float64) int
	if !req.Susceptibility {
		keep = boltzmannVectors(req.Temperatures)
	}
	tally := make([]vectorTally, nb)
	err := parallel(ctx, nb, nil, opt, "diagonalize fields", func(bi int) error {
		t, err := magnetizationField(ctx, p, req, bs, bi, keep, res)
		if err == nil && t.share > 10*boltzmannCut {
			// A ground level wider than zeroWindow across sectors: redo
			// this field with every eigenvector.
			t, err = magnetizationField(ctx, p, req, bs, bi, nil, res)
		}
		tally[bi] = t
		return err
	})
	if err != nil {
		return err
	}
	p.rep.Diagonalizations = nb * len(bs.sectors)
	for _, t := range tally {
		p.rep.addVectors(t)
	}
	return nil
}

// magnetizationField diagonalizes every sector at the field req.Fields[bi]
// (the eigenvectors chosen by keep, nil for all) and writes the curves'
// entries bi. It returns what it computed and left out.
func magnetizationField(ctx context.Context, p *taskPlan, req MagnetizationRequest, bs *basisSet, bi int, keep func([]float64) int, res *MagnetizationResult) (vectorTally, error) {
	st, isReal := p.st, p.isReal
	ng := len(st.groups)
	var t vectorTally
	B := req.Fields[bi]
	op := st.hamiltonian(B)
	secs := make([]sectorStates, len(bs.sectors))
	var kubo []kuboSums
	if req.Susceptibility {
		kubo = make([]kuboSums, len(bs.sectors))
	}
	var all []float64
	for si, sec := range bs.sectors {
		if err := ctx.Err(); err != nil {
			return t, err
		}
		sp, err := diagonalize(ctx, st.sys, bs, sec, op, isReal, true, keep)
		if err != nil {
			return t, err
		}
		t.computed += int64(sp.nvec)
		t.total += int64(len(sp.values))
		s := sectorStates{twoSz: sec.twoSz, e: sp.values}
		if req.Susceptibility {
			m2, err := momentMatrix(ctx, st.sys, bs, sp, st.moment)
			if err != nil {
				return t, err
			}
			s.moment = m2.diag
			if kubo[si], err = sectorKubo(ctx, sp.values, m2, req.Temperatures); err != nil {
				return t, err
			}
		} else {
			s.moment = expectations(st.sys, bs, sp, st.moment)
		}
		for _, g := range st.groupMoment {
			s.groups = append(s.groups, expectations(st.sys, bs, sp, g))
		}
		secs[si] = s
		all = append(all, sp.values...)
	}
	tol := levelTolerance(all)
	emin := math.Inf(1)
	for _, e := range all {
		emin = math.Min(emin, e)
	}
	for ti, T := range req.Temperatures {
		var z, mm, left float64
		gm := make([]float64, ng)
		for _, s := range secs {
			for v, p := range weights(s.e, emin, T, tol) {
				if p == 0 {
					continue
				}
				z += p
				if v >= len(s.moment) {
					left += p // no eigenvector (boltzmannVectors)
					continue
				}
				mm += p * s.moment[v]
				for g := range gm {
					gm[g] += p * s.groups[g][v]
				}
			}
		}
		t.share = math.Max(t.share, left/z)
		// Distinct fields write distinct entries: no lock needed.
		res.Curves[ti].Magnetization[bi] = mm / z
		for g, name := range st.groups {
			res.Curves[ti].Groups[name][bi] = gm[g] / z
		}
		if kubo != nil && T > 0 {
			_, res.Curves[ti].Susceptibility[bi] = kuboMoment(kubo, emin, ti, T)
		}
	}
	return t, nil
}

// checkMagnetization validates the model and the request.
func checkMagnetization(m *cluster.Model, req MagnetizationRequest) error {
	if m == nil || len(m.Sites) == 0 {
		return &RequestError{Field: "cluster", Reason: "has no sites"}
	}
	if _, ok := m.Dimension(); !ok {
		return &RequestError{Field: "cluster", Reason: "Hilbert space too large to index"}
	}
	switch req.Method {
	case "", MethodAuto, MethodFull, MethodFTLM:
	default:
		return &RequestError{Field: "method", Reason: fmt.Sprintf("unknown method %q (auto, full or ftlm)", req.Method)}
	}
	if err := checkFTLM(req.FTLM); err != nil {
		return err
	}
	if err := checkVector("direction", req.Direction); err != nil {
		return err
	}
	if err := checkTemperatures(req.Temperatures, true); err != nil {
		return err
	}
	if len(req.Fields) == 0 {
		return &RequestError{Field: "fields", Reason: "no fields given"}
	}
	for i, b := range req.Fields {
		if math.IsNaN(b) || math.IsInf(b, 0) {
			return &RequestError{Field: fmt.Sprintf("fields[%d]", i), Reason: fmt.Sprintf("%v is not a finite number", b)}
		}
	}
	switch {
	case req.Powder < 0:
		return &RequestError{Field: "powder", Reason: fmt.Sprintf("%d directions: must be 0 (one direction) or more", req.Powder)}
	case req.Powder > 0 && req.Direction != [3]float64{}:
		return &RequestError{Field: "direction", Reason: fmt.Sprintf("%v given with a powder average over %d directions: give one or the other", req.Direction, req.Powder)}
	}
	return nil
}

// planDirection plans the magnetization task along the unit direction n; the
// request must have passed checkMagnetization.
func planDirection(m *cluster.Model, req MagnetizationRequest, n [3]float64, opt Options) (*taskPlan, error) {
	st := newSetup(m, n, true)
	p := &taskPlan{st: st, analytic: st.uniform, direction: n, op: st.h0}
	var w workload
	if p.analytic {
		w = newWorkload(st, opt, len(st.groups) > 0, false, false, 1)
		p.isReal = st.h0.isReal()
	} else {
		// The susceptibility needs the moment's matrix elements between
		// the eigenstates of each field (kubo).
		w = newWorkload(st, opt, true, req.Susceptibility, true, len(req.Fields))
		p.isReal = st.real
	}
	w.complex = !p.isReal
	dimension, _ := m.Dimension()
	var mem int64
	var workers int
	err := error(&RequestError{Field: "cluster", Reason: fmt.Sprintf("Hilbert space of %d sites is beyond full diagonalization (more than 2^31 states)", len(m.Sites))})
	if dimension <= 1<<31-1 && req.Method != MethodFTLM {
		mem, workers, err = w.check(opt.Limits)
	}
	if err != nil || req.Method == MethodFTLM {
		if req.Method == MethodFull {
			return nil, err
		}
		if req.Method == MethodFTLM {
			err = nil // asked for, not a fallback
		}
		return planMagnetizationFTLM(m, req, p, err, opt)
	}
	p.rep = w.report(st, mem)
	p.workers = workers
	if p.analytic {
		p.rep.Route = spectrumRoute(st, 1, true) + "; every field from the zero-field sector partition functions"
		if len(st.groups) > 0 {
			p.rep.Route += ", group moments from the eigenvectors of the states above 1e-15 of their sector's partition function at some temperature"
		}
		if req.Susceptibility {
			p.rep.Route += ", chi from the S^z fluctuations"
		}
	} else {
		why := "the Zeeman term does not commute with the field-free part"
		if st.conserveSz {
			why = "the sites' effective g values along the field differ"
		}
		p.rep.Route = spectrumRoute(st, 1, false) + "; each field diagonalized (" + why + "), "
		if req.Susceptibility {
			p.rep.Route += "moments from every eigenvector, chi with its Van Vleck part"
		} else {
			p.rep.Route += "moments from the eigenvectors of the states above 1e-15 of their sector's partition function at some temperature (every eigenvalue in Z)"
		}
	}
	return p, nil
}

// PlanMagnetization returns what Magnetization would do without
// diagonalizing anything, or the error it would return before starting. For
// a powder average it chooses the rule and reduces its directions by
// symmetry as Magnetization does, and reports the largest per-direction plan.
func PlanMagnetization(m *cluster.Model, req MagnetizationRequest, opt Options) (Report, error) {
	if err := checkMagnetization(m, req); err != nil {
		return Report{}, err
	}
	if req.Powder > 0 {
		pp, err := planPowder(m, req, opt, true)
		if err != nil {
			return Report{}, err
		}
		return pp.rep, nil
	}
	n, _ := unit(req.Direction)
	p, err := planDirection(m, req, n, opt)
	if err != nil {
		return Report{}, err
	}
	return p.rep, nil
}

// weights returns the Boltzmann factors exp(-(e_v - emin)/T), or at T = 0 the
// indicator of the states within tol of emin.
func weights(e []float64, emin, T, tol float64) []float64 {
	w := make([]float64, len(e))
	for v, x := range e {
		if T == 0 {
			if x-emin <= tol {
				w[v] = 1
			}
			continue
		}
		w[v] = math.Exp(-(x - emin) / T)
	}
	return w
}
