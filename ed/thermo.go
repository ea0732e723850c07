package ed

import (
	"context"
	"fmt"
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/gonum"

	"frustum/cluster"
)

// Thermo returns the thermodynamics of the cluster at one field from its full
// spectrum, per cluster, at every temperature T (K):
//
//	E = <H>                          (K)
//	C = (<H^2> - <H>^2) / T^2         (k_B)
//	S = ln Z' + (E - E_min)/T,  Z' = sum_v exp(-(E_v - E_min)/T)   (k_B)
//	M = <M_n>                        (mu_B, along the field; 0 at zero field)
//	chi = dM/dB at fixed direction   (mu_B/T)
//
// Boltzmann weights are shifted by the ground energy, so nothing overflows;
// variances are summed about the mean (two passes), so C stays exact at high
// T and vanishes cleanly at low T. The susceptibility is the isothermal
// derivative including the Van Vleck part: with p_v the Boltzmann
// probabilities and M_vw the moment's matrix elements between eigenstates,
//
//	chi = (mu_B/k_B) [ sum_{v,w} |M_vw|^2 (p_v - p_w)/(E_w - E_v) - <M>^2/T ],
//
// the degenerate terms taken as their limit p_v/T; it is summed as the
// variance of the diagonal elements over T plus the non-negative pair terms
// (kuboMoment), so nothing cancels. When M_n is proportional
// to the conserved total S^z this reduces to (mu_B/k_B) m^2 Var(S^z)/T, which
// is used without eigenvectors.
func Thermo(ctx context.Context, m *cluster.Model, req ThermoRequest, opt Options) (*ThermoResult, error) {
	p, err := planThermo(m, req, opt)
	if err != nil {
		return nil, err
	}
	if p.ftlm != nil {
		return thermoFTLM(ctx, req, opt, p)
	}
	opt.Workers = p.workers
	st, op, isReal, B, rep := p.st, p.op, p.isReal, p.B, p.rep
	kubo := !p.analytic
	nt := len(req.Temperatures)
	res := &ThermoResult{Field: req.Field, Direction: p.direction, Temperature: append([]float64(nil), req.Temperatures...),
		Energy: make([]float64, nt), SpecificHeat: make([]float64, nt), Entropy: make([]float64, nt),
		Magnetization: make([]float64, nt), Susceptibility: make([]float64, nt)}
	bs := newBasisSet(st.sys, st.conserveSz)
	h := MuBOverKB * B * st.mz

	// Per sector: eigenvalues (with the analytic Zeeman shift when uniform)
	// and, for the Kubo route, the per-temperature sums of kuboSums.
	energies := make([][]float64, len(bs.sectors))
	sums := make([]kuboSums, len(bs.sectors))
	src := bs.mirrorSources(st.flipSymmetric && !kubo)
	solve := solvedSectors(src)
	err = parallel(ctx, len(solve), func(i int) int { return bs.sectors[solve[i]].dim() }, opt, "diagonalize sectors", func(si int) error {
		i := solve[si]
		sec := bs.sectors[i]
		sp, err := diagonalize(ctx, st.sys, bs, sec, op, isReal, kubo, nil)
		if err != nil {
			return err
		}
		energies[i] = sp.values
		if !kubo {
			return nil
		}
		m2, err := momentMatrix(ctx, st.sys, bs, sp, st.moment)
		if err != nil {
			return err
		}
		sums[i], err = sectorKubo(ctx, sp.values, m2, req.Temperatures)
		return err
	})
	if err != nil {
		return nil, err
	}
	rep.Diagonalizations = len(solve)
	if !kubo {
		// Zeeman shift -h S^z of each sector; mirrored sectors copy their source.
		raw := append([][]float64(nil), energies...)
		for i, sec := range bs.sectors {
			from := raw[i]
			if src[i] >= 0 {
				from = raw[src[i]]
			}
			e := make([]float64, len(from))
			for j, x := range from {
				e[j] = x - h*sec.sz()
			}
			energies[i] = e
		}
	}

	emin := math.Inf(1)
	for _, e := range energies {
		for _, x := range e {
			emin = math.Min(emin, x)
		}
	}
	for ti, T := range req.Temperatures {
		var z, e1 float64
		var szSum float64
		for i, e := range energies {
			sz := bs.sectors[i].sz()
			for _, x := range e {
				p := math.Exp(-(x - emin) / T)
				z += p
				e1 += p * (x - emin)
				szSum += p * sz
			}
		}
		mean := e1 / z
		var v2, szVar float64
		szMean := szSum / z
		for i, e := range energies {
			sz := bs.sectors[i].sz()
			for _, x := range e {
				p := math.Exp(-(x - emin) / T)
				d := x - emin - mean
				v2 += p * d * d
				szVar += p * (sz - szMean) * (sz - szMean)
			}
		}
		res.Energy[ti] = emin + mean
		res.SpecificHeat[ti] = v2 / z / (T * T)
		res.Entropy[ti] = math.Log(z) + mean/T
		if !kubo {
			res.Magnetization[ti] = st.mz * szMean
			res.Susceptibility[ti] = MuBOverKB * st.mz * st.mz * (szVar / z) / T
		} else {
			res.Magnetization[ti], res.Susceptibility[ti] = kuboMoment(sums, emin, ti, T)
		}
		if B == 0 {
			// Time reversal: no moment without a field.
			res.Magnetization[ti] = 0
		}
	}
	res.Report = rep
	return res, nil
}

// planThermo validates the request and plans the thermodynamics task.
func planThermo(m *cluster.Model, req ThermoRequest, opt Options) (*taskPlan, error) {
	if m == nil || len(m.Sites) == 0 {
		return nil, &RequestError{Field: "cluster", Reason: "has no sites"}
	}
	if err := checkVector("field", req.Field); err != nil {
		return nil, err
	}
	if err := checkTemperatures(req.Temperatures, false); err != nil {
		return nil, err
	}
	switch req.Method {
	case "", MethodAuto, MethodFull, MethodFTLM:
	default:
		return nil, &RequestError{Field: "method", Reason: fmt.Sprintf("unknown method %q (auto, full or ftlm)", req.Method)}
	}
	if err := checkFTLM(req.FTLM); err != nil {
		return nil, err
	}
	dimension, ok := m.Dimension()
	if !ok {
		return nil, &RequestError{Field: "cluster", Reason: "Hilbert space too large to index"}
	}
	n, B := unit(req.Field)
	st := newSetup(m, n, true)
	p := &taskPlan{st: st, B: B, analytic: st.uniform, op: st.h0, direction: n}
	if !p.analytic {
		p.op = st.hamiltonian(B)
	}
	p.isReal = p.op.isReal() && st.moment.isReal()
	var denseErr error
	if dimension <= 1<<31-1 && req.Method != MethodFTLM {
		w := newWorkload(st, opt, !p.analytic, !p.analytic, false, 1)
		w.complex = !p.isReal
		mem, workers, err := w.check(opt.Limits)
		if err == nil {
			p.rep = w.report(st, mem)
			p.workers = workers
			p.rep.Route = thermoRoute(st, B)
			return p, nil
		}
		denseErr = err
		if req.Method == MethodFull {
			return nil, err
		}
	} else if req.Method == MethodFull {
		return nil, &RequestError{Field: "cluster", Reason: fmt.Sprintf("Hilbert space of %d sites is beyond full diagonalization (more than 2^31 states)", len(m.Sites))}
	}
	return planThermoFTLM(m, req, p, denseErr, dimension, opt)
}

// PlanThermo returns what Thermo would do without diagonalizing anything, or
// the error it would return before starting.
func PlanThermo(m *cluster.Model, req ThermoRequest, opt Options) (Report, error) {
	p, err := planThermo(m, req, opt)
	if err != nil {
		return Report{}, err
	}
	return p.rep, nil
}

func thermoRoute(st *setup, B float64) string {
	if st.uniform {
		return spectrumRoute(st, B, true) + "; M and chi from the S^z fluctuations (M_n = g_eff S^z commutes with H)"
	}
	return spectrumRoute(st, B, false) + "; M and chi from eigenvectors, chi with its Van Vleck part"
}

// kuboSums are one sector's Boltzmann sums about its lowest energy e0, one
// entry per temperature T: with p_v = exp(-(E_v - e0)/T) and M_vw the moment's
// matrix elements between the sector's eigenstates,
//
//	z    = sum_v p_v
//	mom  = sum_v p_v M_vv
//	dev2 = sum_v p_v (M_vv - mom/z)^2
//	kb   = sum_{v != w} |M_vw|^2 (p_v - p_w)/(E_w - E_v)
//	     = 2 sum_{v<w} |M_vw|^2 p_v (1 - e^{-(E_w - E_v)/T})/(E_w - E_v),
//
// degenerate pairs taken as their limit p_v/T (expm1 keeps the near-degenerate
// ones exact). Every term is non-negative, so the susceptibility assembled
// from them (kuboMoment) has no cancellation. Entries at T = 0 are left 0.
type kuboSums struct {
	e0               float64
	z, mom, dev2, kb []float64
}

// sectorKubo returns the kuboSums of a sector with ascending eigenvalues e and
// moment elements m2, at every temperature of temps.
func sectorKubo(ctx context.Context, e []float64, m2 momentElements, temps []float64) (kuboSums, error) {
	nt := len(temps)
	s := kuboSums{e0: e[0], z: make([]float64, nt), mom: make([]float64, nt), dev2: make([]float64, nt), kb: make([]float64, nt)}
	dim := len(e)
	p := make([]float64, dim)
	for ti, T := range temps {
		if err := ctx.Err(); err != nil {
			return s, err
		}
		if T == 0 {
			continue
		}
		for v := range e {
			p[v] = math.Exp(-(e[v] - s.e0) / T)
			s.z[ti] += p[v]
			s.mom[ti] += p[v] * m2.diag[v]
		}
		mean := s.mom[ti] / s.z[ti]
		k := 0.0
		for v := 0; v < dim; v++ {
			if p[v] == 0 {
				continue
			}
			d := m2.diag[v] - mean
			s.dev2[ti] += p[v] * d * d
			row := m2.abs2[v*dim : (v+1)*dim]
			pair := 0.0
			for u := v + 1; u < dim; u++ {
				if row[u] == 0 {
					continue
				}
				d := e[u] - e[v]
				if d <= 0 {
					pair += row[u] / T
				} else {
					pair += row[u] * (-math.Expm1(-d / T)) / d
				}
			}
			k += 2 * p[v] * pair
		}
		s.kb[ti] = k
	}
	return s, nil
}

// kuboMoment combines the sectors' sums at temperature index ti (T > 0) into
// the moment <M_n> (mu_B) and the isothermal susceptibility
//
//	chi = (mu_B/k_B) [ sum_{v,w} |M_vw|^2 (p_v - p_w)/(E_w - E_v) / Z - <M_n>^2 / T ]
//	    = (mu_B/k_B) [ Var(M_vv)/T + kb/Z ]   (mu_B/T),
//
// the diagonal terms p_v M_vv^2 / T minus <M_n>^2 / T being the variance of
// the diagonal elements, combined over the sectors about the overall mean
// (sum_s [dev2_s + z_s (mom_s/z_s - <M_n>)^2] / Z). Each sector is weighted by
// exp(-(e0_s - emin)/T), emin the lowest energy over all sectors; sectors
// with no sums (none computed) are skipped.
func kuboMoment(sums []kuboSums, emin float64, ti int, T float64) (m, chi float64) {
	var zz, mom, kb float64
	for _, s := range sums {
		if s.z == nil {
			continue
		}
		f := math.Exp(-(s.e0 - emin) / T)
		zz += f * s.z[ti]
		mom += f * s.mom[ti]
		kb += f * s.kb[ti]
	}
	m = mom / zz
	v := 0.0
	for _, s := range sums {
		if s.z == nil || s.z[ti] == 0 {
			continue
		}
		f := math.Exp(-(s.e0 - emin) / T)
		d := s.mom[ti]/s.z[ti] - m
		v += f * (s.dev2[ti] + s.z[ti]*d*d)
	}
	return m, MuBOverKB * (v/zz/T + kb/zz)
}

// momentElements holds an operator's matrix elements between the eigenstates
// of one sector: the diagonal <v|O|v> and |<v|O|w>|^2 (row-major dim x dim).
type momentElements struct {
	diag, abs2 []float64
}

// momentMatrix computes O_vw = U^dagger (O U) for the sector's eigenvectors U;
// O must keep the sector. The product runs in column panels, with ctx
// checked between them.
func momentMatrix(ctx context.Context, sys *spinSystem, bs *basisSet, sp *sectorSpectrum, op *operator) (momentElements, error) {
	sec := sp.sector
	n := sec.dim()
	if sp.nvec != n {
		panic(fmt.Sprintf("ed: momentMatrix needs every eigenvector (%d of %d computed)", sp.nvec, n))
	}
	k := make([]int, sys.n)
	out := momentElements{diag: make([]float64, n), abs2: make([]float64, n*n)}
	impl := gonum.Implementation{}
	if sp.vecsR != nil {
		u := sp.vecsR
		x := make([]float64, n*n)
		for c, s := range sec.states {
			sys.digits(s, k)
			if d := op.diagonal(sys, k); d != 0 {
				row, dst := u[c*n:(c+1)*n], x[c*n:(c+1)*n]
				for j := range row {
					dst[j] += d * row[j]
				}
			}
			op.apply(sys, s, k, func(y int64, amp complex128) {
				r := bs.index(y)
				a := real(amp)
				row, dst := u[c*n:(c+1)*n], x[r*n:(r+1)*n]
				for j := range row {
					dst[j] += a * row[j]
				}
			})
		}
		p := make([]float64, n*n)
		for j0 := 0; j0 < n; j0 += gemmPanel {
			if err := ctx.Err(); err != nil {
				return out, err
			}
			w := min(gemmPanel, n-j0)
			impl.Dgemm(blas.Trans, blas.NoTrans, n, w, n, 1, u, n, x[j0:], n, 0, p[j0:], n)
		}
		for i := range p {
			out.abs2[i] = p[i] * p[i]
		}
		for v := 0; v < n; v++ {
			out.diag[v] = p[v*n+v]
		}
		return out, nil
	}
	// Complex: P = U^dagger X with U = Ur + i Ui and X = O U = Xr + i Xi,
	//
	//	Re P = Ur^T Xr + Ui^T Xi,   Im P = Ur^T Xi - Ui^T Xr,
	//
	// as four real products (gonum's Dgemm is blocked, vectorized and
	// parallel; its Zgemm is about ten times slower), one column panel at a
	// time, keeping only |P_vw|^2 and the diagonal.
	u := sp.vecsC
	ur, ui := make([]float64, n*n), make([]float64, n*n)
	for i, v := range u {
		ur[i], ui[i] = real(v), imag(v)
	}
	xr, xi := make([]float64, n*n), make([]float64, n*n)
	for c, s := range sec.states {
		sys.digits(s, k)
		if d := op.diagonal(sys, k); d != 0 {
			sr, si := ur[c*n:(c+1)*n], ui[c*n:(c+1)*n]
			dr, di := xr[c*n:(c+1)*n], xi[c*n:(c+1)*n]
			for j := range sr {
				dr[j] += d * sr[j]
				di[j] += d * si[j]
			}
		}
		op.apply(sys, s, k, func(y int64, amp complex128) {
			r := bs.index(y)
			ar, ai := real(amp), imag(amp)
			sr, si := ur[c*n:(c+1)*n], ui[c*n:(c+1)*n]
			dr, di := xr[r*n:(r+1)*n], xi[r*n:(r+1)*n]
			for j := range sr {
				dr[j] += ar*sr[j] - ai*si[j]
				di[j] += ar*si[j] + ai*sr[j]
			}
		})
	}
	w := min(gemmPanel, n)
	pr, pi := make([]float64, n*w), make([]float64, n*w)
	for j0 := 0; j0 < n; j0 += gemmPanel {
		if err := ctx.Err(); err != nil {
			return out, err
		}
		w := min(gemmPanel, n-j0)
		impl.Dgemm(blas.Trans, blas.NoTrans, n, w, n, 1, ur, n, xr[j0:], n, 0, pr, w)
		impl.Dgemm(blas.Trans, blas.NoTrans, n, w, n, 1, ui, n, xi[j0:], n, 1, pr, w)
		impl.Dgemm(blas.Trans, blas.NoTrans, n, w, n, 1, ur, n, xi[j0:], n, 0, pi, w)
		impl.Dgemm(blas.Trans, blas.NoTrans, n, w, n, -1, ui, n, xr[j0:], n, 1, pi, w)
		for v := 0; v < n; v++ {
			a, b := pr[v*w:(v+1)*w], pi[v*w:(v+1)*w]
			dst := out.abs2[v*n+j0 : v*n+j0+w]
			for j := range dst {
				dst[j] = a[j]*a[j] + b[j]*b[j]
			}
			if v >= j0 && v < j0+w {
				out.diag[v] = a[v-j0]
			}
		}
	}
	return out, nil
}

// gemmPanel is the column width of the matrix products between cancellation
// checks.
const gemmPanel = 256

// checkTemperatures refuses an empty list, non-finite values and T < 0 (or
// T = 0 unless allowZero).
func checkTemperatures(ts []float64, allowZero bool) error {
	if len(ts) == 0 {
		return &RequestError{Field: "temperatures", Reason: "no temperatures given"}
	}
	for i, T := range ts {
		f := fmt.Sprintf("temperatures[%d]", i)
		switch {
		case math.IsNaN(T) || math.IsInf(T, 0):
			return &RequestError{Field: f, Reason: fmt.Sprintf("%v is not a finite number", T)}
		case T < 0:
			return &RequestError{Field: f, Reason: fmt.Sprintf("%g K is negative", T)}
		case T == 0 && !allowZero:
			return &RequestError{Field: f, Reason: "0 K: thermodynamics needs T > 0 K (the ground state is in the spectrum)"}
		}
	}
	return nil
}
