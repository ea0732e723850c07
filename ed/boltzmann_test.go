package ed

import (
	"context"
	"fmt"
	"math"
	"testing"

	"frustum/cluster"
	"frustum/sphere"
)

// freeSpins returns n uncoupled spins 1/2 with the g tensors gs (cycled).
func freeSpins(n int, gs [][9]float64, groups []string) *cluster.Model {
	m := &cluster.Model{Name: "free spins"}
	for i := 0; i < n; i++ {
		s := cluster.Site{Label: fmt.Sprintf("s%d", i), TwoS: 1, G: gs[i%len(gs)]}
		if groups != nil {
			s.Group = groups[i%len(groups)]
		}
		m.Sites = append(m.Sites, s)
	}
	return m
}

// freeSpinMoment is the moment along the unit n of a free spin 1/2 with g
// tensor g (mu = g S, mu_B) in the field B n (T) at T (K): with b = g^T n,
// H = -(mu_B/k_B) B b.S has the levels -+ (mu_B/k_B) B |b|/2, and
//
//	<n.mu> = (|b|/2) tanh(mu_B B |b| / (2 k_B T)),
//
// the Brillouin function of S = 1/2 (any statistical-mechanics text, e.g.
// Kittel, Introduction to Solid State Physics, the chapter on
// paramagnetism); |b|/2 at T = 0.
func freeSpinMoment(g [9]float64, n [3]float64, B, T float64) float64 {
	var b [3]float64
	for nu := 0; nu < 3; nu++ {
		for mu := 0; mu < 3; mu++ {
			b[nu] += n[mu] * g[3*mu+nu]
		}
	}
	gb := math.Sqrt(b[0]*b[0] + b[1]*b[1] + b[2]*b[2])
	if T == 0 {
		return gb / 2
	}
	return gb / 2 * math.Tanh(MuBOverKB*B*gb/(2*T))
}

// TestBoltzmannVectorsFreeSpins checks the moments computed from the
// eigenvectors of the thermally populated states only (boltzmannVectors)
// against the closed form of free spins 1/2 (freeSpinMoment), to 1e-10 mu_B:
// nine spins with three g tensors whose off-diagonal parts leave no S^z
// conserved (complex blocks of 512 states, diagonalized at every field);
// and the group moments of four Heisenberg dimers in a field along z (the
// zero-field shortcut) against the dimer's closed form. The
// fields and temperatures leave most states without eigenvectors (the
// report must say how many, and a neglected weight of at most 1e-15);
// the hottest temperature keeps every state in play.
func TestBoltzmannVectorsFreeSpins(t *testing.T) {
	ctx := context.Background()
	gs := [][9]float64{
		{2.1, 0.3, 0, 0.3, 1.9, 0.2, 0, 0.2, 2.3},
		{1.8, -0.4, 0.1, -0.4, 2.2, 0, 0.1, 0, 2.0},
		{2.5, 0, 0.3, 0, 2.0, -0.3, 0.3, -0.3, 1.7},
	}
	m := freeSpins(9, gs, nil)
	dir := [3]float64{0.3, -0.5, 0.8}
	norm := math.Sqrt(dir[0]*dir[0] + dir[1]*dir[1] + dir[2]*dir[2])
	n := [3]float64{dir[0] / norm, dir[1] / norm, dir[2] / norm}
	temps := []float64{0, 0.05, 0.3}
	fields := []float64{0.5, 2, 6}
	res, err := Magnetization(ctx, m, MagnetizationRequest{Temperatures: temps, Fields: fields, Direction: dir}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for ti, T := range temps {
		for bi, B := range fields {
			want := 0.0
			for i := range m.Sites {
				want += freeSpinMoment(gs[i%3], n, B, T)
			}
			if got := res.Curves[ti].Magnetization[bi]; math.Abs(got-want) > 1e-10 {
				t.Errorf("T=%g B=%g: M = %.12f, closed form %.12f", T, B, got, want)
			}
		}
	}
	rep := res.Report
	if rep.EigenvectorsSkipped == 0 || rep.Eigenvectors+rep.EigenvectorsSkipped != int64(len(fields))*512 {
		t.Errorf("report: %d eigenvectors, %d skipped; want some skipped of %d", rep.Eigenvectors, rep.EigenvectorsSkipped, len(fields)*512)
	}
	if rep.NeglectedWeight > boltzmannCut {
		t.Errorf("neglected weight %g > %g", rep.NeglectedWeight, boltzmannCut)
	}

	// The powder average over sphere.ForCount(26): sum_k w_k M(n_k) of the
	// closed form at the rule's points (the quadrature's definition), and
	// the skipped eigenvectors of every direction in the report.
	rule, err := sphere.ForCount(26)
	if err != nil {
		t.Fatal(err)
	}
	pw, err := Magnetization(ctx, m, MagnetizationRequest{Temperatures: []float64{0.05}, Fields: []float64{2}, Powder: 26}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	want := 0.0
	for k, p := range rule.Points {
		for i := range m.Sites {
			want += rule.Weights[k] * freeSpinMoment(gs[i%3], p, 2, 0.05)
		}
	}
	if got := pw.Curves[0].Magnetization[0]; math.Abs(got-want) > 1e-10 {
		t.Errorf("powder: M = %.12f, closed form over the rule %.12f", got, want)
	}
	if r := pw.Report; r.EigenvectorsSkipped == 0 || r.Eigenvectors+r.EigenvectorsSkipped != int64(pw.Powder.Evaluated)*512 || r.NeglectedWeight > boltzmannCut {
		t.Errorf("powder report: %d eigenvectors, %d skipped over %d directions, neglected %g", r.Eigenvectors, r.EigenvectorsSkipped, pw.Powder.Evaluated, r.NeglectedWeight)
	}

	// A hot temperature needs every eigenvector.
	hot, err := Magnetization(ctx, m, MagnetizationRequest{Temperatures: []float64{0.05, 50}, Fields: []float64{1}, Direction: dir}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if hot.Report.EigenvectorsSkipped != 0 || hot.Report.NeglectedWeight != 0 {
		t.Errorf("T = 50 K: %d skipped, neglected %g; want none", hot.Report.EigenvectorsSkipped, hot.Report.NeglectedWeight)
	}

	// The shortcut: four uncoupled Heisenberg dimers (J = 10 K) with one
	// isotropic g = 2 and the field along z, group a the first site of each
	// dimer, b the second. A dimer has the singlet at -3J/4 and the triplet
	// at J/4 - m h, h = (mu_B/k_B) g B, so (Kittel, ibid., or any text on
	// exchange-coupled pairs)
	//
	//	<S^z_tot> = e^{-J/4T} (e^{h/T} - e^{-h/T}) / Z,
	//	Z = e^{3J/4T} + e^{-J/4T} (e^{h/T} + 1 + e^{-h/T}),
	//
	// each site carrying half of it; each group moment is 4 g <S^z_tot>/2.
	// At T <= 0.25 K (J/T >= 40) the excited states of every sector are
	// left without eigenvectors.
	const J = 10.0
	md := &cluster.Model{Name: "four dimers"}
	for i := 0; i < 8; i++ {
		md.Sites = append(md.Sites, cluster.Site{Label: fmt.Sprintf("s%d", i), TwoS: 1, G: [9]float64{2, 0, 0, 0, 2, 0, 0, 0, 2}, Group: []string{"a", "b"}[i%2]})
	}
	for d := 0; d < 4; d++ {
		md.Bonds = append(md.Bonds, cluster.Bond{A: 2 * d, B: 2*d + 1, J: J, Jz: J})
	}
	dtemps := []float64{0, 0.1, 0.25}
	dfields := []float64{0.5, 2, 6}
	res, err = Magnetization(ctx, md, MagnetizationRequest{Temperatures: dtemps, Fields: dfields}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for ti, T := range dtemps {
		for bi, B := range dfields {
			h := MuBOverKB * 2 * B
			sz := 0.0
			if T > 0 {
				// Scaled by e^{-3J/4T} against overflow.
				up, down, mid := math.Exp((h-J)/T), math.Exp((-h-J)/T), math.Exp(-J/T)
				sz = (up - down) / (1 + up + mid + down)
			}
			want := 4 * 2 * sz / 2
			for _, g := range []string{"a", "b"} {
				if got := res.Curves[ti].Groups[g][bi]; math.Abs(got-want) > 1e-10 {
					t.Errorf("dimers group %s T=%g B=%g: %.12f, closed form %.12f", g, T, B, got, want)
				}
			}
		}
	}
	if res.Report.EigenvectorsSkipped == 0 || res.Report.NeglectedWeight > boltzmannCut {
		t.Errorf("shortcut report: %d skipped, neglected %g", res.Report.EigenvectorsSkipped, res.Report.NeglectedWeight)
	}
}

// TestBoltzmannVectorsRule checks boltzmannVectors' count on spectra whose
// Boltzmann tails are sums by hand (common practice, no source): the cut
// is the smallest m whose tail stays within boltzmannCut of Z at every
// temperature, T = 0 keeps the ground level within zeroWindow, and an empty
// spectrum keeps nothing.
func TestBoltzmannVectorsRule(t *testing.T) {
	// Levels 0, 1, 2, ... K at T = 1 K: the weight of level v is e^-v, the
	// tail from m is e^-m / (1 - e^-1) against Z = 1 / (1 - e^-1) (nearly:
	// 60 levels), so the cut is the first m with e^-m <= 1e-15: m = 35.
	e := make([]float64, 60)
	for v := range e {
		e[v] = float64(v)
	}
	if got := boltzmannVectors([]float64{1})(e); got != 35 {
		t.Errorf("ladder at T = 1: m = %d, want 35", got)
	}
	if got := boltzmannVectors([]float64{0.5, 1, 0})(e); got != 35 {
		t.Errorf("ladder at T = 0.5, 1, 0: m = %d, want 35 (the hottest decides)", got)
	}
	if got := boltzmannVectors([]float64{0})(e); got != 1 {
		t.Errorf("ladder at T = 0: m = %d, want 1", got)
	}
	deg := []float64{-3, -3 + 1e-8, -3 + 2e-8, 5, 6}
	if got := boltzmannVectors([]float64{0})(deg); got != 3 {
		t.Errorf("three-fold ground level split by 1e-8 at T = 0: m = %d, want 3", got)
	}
	if got := boltzmannVectors([]float64{1000})(deg); got != len(deg) {
		t.Errorf("T = 1000: m = %d, want all %d", got, len(deg))
	}
	if got := boltzmannVectors([]float64{1})(nil); got != 0 {
		t.Errorf("empty spectrum: m = %d", got)
	}
}

// TestBoltzmannVectorsRedo narrows the T = 0 window to nothing, so that the
// two-fold ground level of free spins with one spin that feels no field (its
// g tensor has n^T g = 0) loses its second eigenvector: the field must be
// recomputed with every eigenvector (the report counts them all, with
// nothing neglected) and still match the closed form (freeSpinMoment's
// sources).
func TestBoltzmannVectorsRedo(t *testing.T) {
	defer func(f float64) { zeroWindowFactor = f }(zeroWindowFactor)
	zeroWindowFactor = 0
	gs := [][9]float64{
		{2.1, 0.3, 0, 0.3, 1.9, 0.2, 0, 0.2, 2.3},
		{0, 0, 0, 0, 2, 0, 0, 0, 2}, // no moment along x
		{2.5, 0, 0.3, 0, 2.0, -0.3, 0.3, -0.3, 1.7},
	}
	m := freeSpins(6, gs, nil)
	n := [3]float64{1, 0, 0}
	res, err := Magnetization(context.Background(), m, MagnetizationRequest{Temperatures: []float64{0}, Fields: []float64{3}, Direction: n}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	want := 0.0
	for i := range m.Sites {
		want += freeSpinMoment(gs[i%3], n, 3, 0)
	}
	if got := res.Curves[0].Magnetization[0]; math.Abs(got-want) > 1e-10 {
		t.Errorf("M = %.12f, closed form %.12f", got, want)
	}
	if r := res.Report; r.EigenvectorsSkipped != 0 || r.Eigenvectors != 64 || r.NeglectedWeight != 0 {
		t.Errorf("report: %d eigenvectors, %d skipped, neglected %g; want the redo's 64, 0, 0", r.Eigenvectors, r.EigenvectorsSkipped, r.NeglectedWeight)
	}
}
