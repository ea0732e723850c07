package ed_test

// Invariants of the engine's results. Each check says "invariant, no source"
// or names the theorem it rests on.

import (
	"math"
	"math/rand/v2"
	"testing"

	"frustum/cluster"
	"frustum/ed"
)

// anisotropicCluster: mixed spins, DM, XXZ, a full bond tensor, single-ion
// terms and different, non-symmetric g tensors; every site in a group.
func anisotropicCluster() *cluster.Model {
	m := &cluster.Model{Name: "anisotropic", Sites: []cluster.Site{
		{Label: "c", TwoS: 1, G: [9]float64{2.25, 0.1, -0.05, 0.0, 2.05, 0.08, 0.12, 0, 1.95}, Group: "centre"},
		{Label: "p", TwoS: 2, G: [9]float64{1.9, 0, 0, 0.15, 2.2, 0, 0, -0.1, 2.0}, Group: "outer", SingleIon: 4.5},
		{Label: "q", TwoS: 1, G: cluster.IsotropicG(2.0), Group: "outer"},
		{Label: "r", TwoS: 3, G: [9]float64{2.0, 0.2, 0, 0.2, 1.8, 0, 0, 0, 2.4}, Group: "far", SingleIon: -3},
	}, Bonds: []cluster.Bond{
		{A: 0, B: 1, J: 12, Jz: 10, DM: [3]float64{1.5, -0.8, 2.2}},
		{A: 1, B: 2, J: 8, Jz: 8, Tensor: [9]float64{0.5, 0.3, 0, 0.3, -0.2, 0.4, 0, 0.4, 0.1}},
		{A: 2, B: 0, J: 5, Jz: 6.5, DM: [3]float64{0, 0, -1.2}},
		{A: 2, B: 3, J: -4, Jz: -4, DM: [3]float64{0.7, 0.4, 0}},
	}}
	return m
}

// su2Cluster: a frustrated Heisenberg cluster of mixed spins, one g.
func su2Cluster() *cluster.Model {
	m := &cluster.Model{Name: "SU2 mixed", Sites: []cluster.Site{
		site("a", 1, 2.1), site("b", 2, 2.1), site("c", 1, 2.1), site("d", 3, 2.1), site("e", 1, 2.1),
	}, Bonds: []cluster.Bond{heis(0, 1, 10), heis(1, 2, 7), heis(2, 0, 9), heis(2, 3, 4), heis(3, 4, 6), heis(4, 0, 3)}}
	return m
}

func TestInvariantSectorDimensions(t *testing.T) {
	// Invariant, no source: the sectors the report lists partition the Hilbert
	// space, so their dimensions add up to prod_i (2 S_i + 1); the grouped
	// levels hold as many states as there are energies.
	cases := []struct {
		m     *cluster.Model
		field [3]float64
	}{
		{su2Cluster(), [3]float64{}},
		{su2Cluster(), [3]float64{1, 2, 3}},
		{anisotropicCluster(), [3]float64{0, 0, 2}},
		{anisotropicCluster(), [3]float64{}},
		{ringModel(8, 1, 1, 0.5, 0), [3]float64{0, 0, 1}},
		{ringModel(8, 1, 1, 0.5, 0), [3]float64{1, 0, 0}},
		{starModel(3, 4, 5), [3]float64{}},
		{completeModel(4, 2, 3), [3]float64{0, 0, 0.5}},
	}
	for _, c := range cases {
		r := spectrum(t, c.m, ed.SpectrumRequest{Field: c.field})
		d, _ := c.m.Dimension()
		sum := 0
		for _, s := range r.Report.Sectors {
			sum += s.Dimension
		}
		if r.Report.Dimension != d {
			t.Errorf("%s, B = %v: report dimension %d, want %d", c.m.Name, c.field, r.Report.Dimension, d)
		}
		if int64(sum) != d {
			t.Errorf("%s, B = %v: sector dimensions add up to %d, want %d (sectors %+v)", c.m.Name, c.field, sum, d, r.Report.Sectors)
		}
		if int64(len(r.Energies)) != d || r.TotalStates != d || r.Truncated {
			t.Errorf("%s, B = %v: %d energies, total states %d, truncated %v; want %d, %d, false",
				c.m.Name, c.field, len(r.Energies), r.TotalStates, r.Truncated, d, d)
		}
		n := 0
		for _, l := range r.Levels {
			n += l.Degeneracy
			if l.Degeneracy < 1 {
				t.Errorf("%s: level %+v has degeneracy < 1", c.m.Name, l)
			}
		}
		if n != len(r.Energies) {
			t.Errorf("%s, B = %v: levels hold %d states, energies %d", c.m.Name, c.field, n, len(r.Energies))
		}
		for i := 1; i < len(r.Energies); i++ {
			if r.Energies[i] < r.Energies[i-1] {
				t.Fatalf("%s: energies not ascending at %d", c.m.Name, i)
			}
		}
		// With Levels: K, the K lowest energies of the full list.
		rk := spectrum(t, c.m, ed.SpectrumRequest{Field: c.field, Levels: 5})
		if len(rk.Energies) < 5 {
			t.Fatalf("%s: Levels 5 gave %d energies", c.m.Name, len(rk.Energies))
		}
		for i := 0; i < 5; i++ {
			expect(t, c.m.Name+" lowest energies with Levels = 5", rk.Energies[i], r.Energies[i], 1e-9*math.Max(1, math.Abs(r.Energies[i])))
		}
	}
}

func TestInvariantMagnetizationOddInField(t *testing.T) {
	// Time reversal (theorem): H(-B) = Theta H(B) Theta^-1 and Theta S Theta^-1 = -S,
	// so M(-B) = -M(B) at every T, for any couplings and g tensors.
	m := anisotropicCluster()
	dir := [3]float64{0.3, -0.5, 0.8}
	fields := []float64{-9, -3, -0.4, 0.4, 3, 9}
	mr := magnetization(t, m, dir, []float64{0.3, 2, 15}, fields)
	for _, c := range mr.Curves {
		for i := 0; i < len(fields)/2; i++ {
			j := len(fields) - 1 - i
			expect(t, "M(-B) + M(B), T = "+formatG(c.Temperature)+", B = "+formatG(fields[j]),
				c.Magnetization[i]+c.Magnetization[j], 0, 1e-10)
			for g, v := range c.Groups {
				expect(t, "group "+g+" moment odd in B", v[i]+v[j], 0, 1e-10)
			}
		}
	}
	// And the thermo task at opposite field vectors.
	b := [3]float64{1.2, -2, 3.1}
	nb := [3]float64{-1.2, 2, -3.1}
	rp := thermo(t, m, b, 0.5, 5)
	rn := thermo(t, m, nb, 0.5, 5)
	for i := range rp.Temperature {
		// M is measured along the field, so M(-B) along -n equals M(B) along n.
		expect(t, "thermo M along the field, B vs -B", rn.Magnetization[i], rp.Magnetization[i], 1e-10)
		expect(t, "thermo chi, B vs -B", rn.Susceptibility[i], rp.Susceptibility[i], 1e-9*math.Max(1, math.Abs(rp.Susceptibility[i])))
		expect(t, "thermo E, B vs -B", rn.Energy[i], rp.Energy[i], 1e-9)
	}
}

func TestInvariantSaturation(t *testing.T) {
	// Invariant, no source (the fully polarized state is an exact eigenstate of
	// an S^z-conserving cluster and the lowest one at high field): at high
	// field and low T, M -> sum_i g_i S_i.
	m := &cluster.Model{Name: "saturation", Sites: []cluster.Site{
		site("a", 1, 2.2), site("b", 2, 1.9), site("c", 3, 2.05), site("d", 1, 2.0),
	}, Bonds: []cluster.Bond{heis(0, 1, 6), heis(1, 2, 4), {A: 2, B: 3, J: 5, Jz: 3}, heis(3, 0, 2), heis(0, 2, 3)}}
	sat := 0.0
	for _, s := range m.Sites {
		sat += s.G[8] * s.Spin()
	}
	mr := magnetization(t, m, [3]float64{0, 0, 1}, []float64{0, 0.1}, []float64{150, 400})
	for _, c := range mr.Curves {
		for i, v := range c.Magnetization {
			expect(t, "M at T = "+formatG(c.Temperature)+", B = "+formatG(mr.Field[i]), v, sat, 1e-9)
		}
	}
	expect(t, "reported saturation", mr.Saturation, sat, 1e-12)
	// With g tensors the saturation along n is sum_i |g_i^T n| S_i (api.go) and
	// M approaches it from below.
	a := anisotropicCluster()
	dir := [3]float64{0.2, 0.4, -0.9}
	nd := math.Sqrt(dir[0]*dir[0] + dir[1]*dir[1] + dir[2]*dir[2])
	want := 0.0
	for _, s := range a.Sites {
		var v [3]float64
		for nu := 0; nu < 3; nu++ {
			for mu := 0; mu < 3; mu++ {
				v[nu] += dir[mu] / nd * s.G[3*mu+nu]
			}
		}
		want += math.Sqrt(v[0]*v[0]+v[1]*v[1]+v[2]*v[2]) * s.Spin()
	}
	mr = magnetization(t, a, dir, []float64{0.05}, []float64{2000})
	expect(t, "anisotropic saturation", mr.Saturation, want, 1e-12)
	got := mr.Curves[0].Magnetization[0]
	if got > want+1e-9 || got < want-0.02*want {
		t.Errorf("anisotropic cluster at 2000 T: M = %.10g, want just below %.10g", got, want)
	}
}

// permuted returns m with its sites reordered (new site k is old site p[k])
// and bonds remapped, keeping each bond's a -> b orientation.
func permuted(m *cluster.Model, p []int) *cluster.Model {
	inv := make([]int, len(p))
	for k, old := range p {
		inv[old] = k
	}
	out := &cluster.Model{Name: m.Name + " (permuted)"}
	for _, old := range p {
		out.Sites = append(out.Sites, m.Sites[old])
	}
	for i := len(m.Bonds) - 1; i >= 0; i-- { // bond order reversed too
		b := m.Bonds[i]
		b.A, b.B = inv[b.A], inv[b.B]
		out.Bonds = append(out.Bonds, b)
	}
	return out
}

func TestInvariantSitePermutation(t *testing.T) {
	// Invariant, no source: relabelling sites (reordering Sites and remapping
	// bonds) changes no result.
	rng := rand.New(rand.NewPCG(5, 11))
	models := []*cluster.Model{anisotropicCluster(), su2Cluster(),
		randomModel(rng, kindGeneral, 5, true, 300).model, randomModel(rng, kindSz, 6, false, 64).model}
	field := [3]float64{0.8, -1.1, 2.5}
	temps := []float64{0.4, 3, 25}
	dir := [3]float64{-0.3, 0.2, 1}
	bs := []float64{0.5, 4, 11}
	for _, m := range models {
		for trial := 0; trial < 2; trial++ {
			p := rng.Perm(len(m.Sites))
			pm := permuted(m, p)
			f := field
			if trial == 1 {
				f = [3]float64{}
			}
			a := spectrum(t, m, ed.SpectrumRequest{Field: f})
			b := spectrum(t, pm, ed.SpectrumRequest{Field: f})
			scale := math.Max(math.Abs(a.Energies[0]), math.Abs(a.Energies[len(a.Energies)-1]))
			expectEnergies(t, m.Name+" permuted spectrum", b.Energies, a.Energies, 1e-10*scale)
			ta := thermo(t, m, f, temps...)
			tb := thermo(t, pm, f, temps...)
			for i := range temps {
				expect(t, m.Name+" permuted E", tb.Energy[i], ta.Energy[i], 1e-10*scale)
				expect(t, m.Name+" permuted C", tb.SpecificHeat[i], ta.SpecificHeat[i], 1e-9)
				expect(t, m.Name+" permuted S", tb.Entropy[i], ta.Entropy[i], 1e-9)
				expect(t, m.Name+" permuted M", tb.Magnetization[i], ta.Magnetization[i], 1e-9)
				expect(t, m.Name+" permuted chi", tb.Susceptibility[i], ta.Susceptibility[i], 1e-8*math.Max(1, math.Abs(ta.Susceptibility[i])))
			}
			ma := magnetization(t, m, dir, temps, bs)
			mb := magnetization(t, pm, dir, temps, bs)
			for k := range ma.Curves {
				for i := range bs {
					expect(t, m.Name+" permuted M(B)", mb.Curves[k].Magnetization[i], ma.Curves[k].Magnetization[i], 1e-9)
					for g, v := range ma.Curves[k].Groups {
						w, ok := mb.Curves[k].Groups[g]
						if !ok {
							t.Fatalf("%s: group %q missing after permutation", m.Name, g)
						}
						expect(t, m.Name+" permuted group "+g, w[i], v[i], 1e-9)
					}
				}
			}
		}
	}
}

func TestInvariantLiebMattis(t *testing.T) {
	// Lieb and Mattis, J. Math. Phys. 3, 749 (1962): a connected bipartite
	// cluster with antiferromagnetic bonds between the sublattices has a
	// ground state of spin |N_A s_A - N_B s_B| (sum over sublattices in
	// general), non-degenerate apart from its 2S+1 states.
	rng := rand.New(rand.NewPCG(3, 9))
	cases := []struct {
		name string
		twoS []int   // spins of the chain/ring sites, alternating sublattices
		ring bool    // close the (even) ring
		want float64 // |sum_A S - sum_B S|
	}{
		{"open chain 1, 1/2 x3", []int{2, 1, 2, 1, 2, 1}, false, 1.5},
		{"open chain 1/2, 1, 1/2, 1, 1/2", []int{1, 2, 1, 2, 1}, false, 0.5},
		{"open chain 3/2, 1/2, 3/2, 1/2", []int{3, 1, 3, 1}, false, 2},
		{"ring 1, 1/2 x3", []int{2, 1, 2, 1, 2, 1}, true, 1.5},
		{"open chain 1, 1/2, 1/2, ...", []int{2, 1, 1, 1, 2, 1, 1}, false, 1.5},
	}
	for _, c := range cases {
		m := &cluster.Model{Name: c.name}
		for i, ts := range c.twoS {
			m.Sites = append(m.Sites, site(siteLabel(i), ts, 2))
		}
		n := len(c.twoS)
		for i := 0; i+1 < n; i++ {
			m.Bonds = append(m.Bonds, heis(i, i+1, 0.5+9.5*rng.Float64()))
		}
		if c.ring {
			m.Bonds = append(m.Bonds, heis(n-1, 0, 0.5+9.5*rng.Float64()))
		}
		// A further A-B bond (1 -> 4, even distance 3) keeps it bipartite.
		if n >= 5 {
			m.Bonds = append(m.Bonds, heis(1, 4, 0.5+9.5*rng.Float64()))
		}
		var sa, sb float64
		for i, ts := range c.twoS {
			if i%2 == 0 {
				sa += float64(ts) / 2
			} else {
				sb += float64(ts) / 2
			}
		}
		if math.Abs(sa-sb) != c.want {
			t.Fatalf("%s: table value %g, sublattice sum %g", c.name, c.want, math.Abs(sa-sb))
		}
		r := spectrum(t, m, ed.SpectrumRequest{})
		g := r.Levels[0]
		if !g.HasTotalSpin {
			t.Errorf("%s: ground level has no totalSpin label: %+v", c.name, g)
			continue
		}
		expect(t, c.name+": ground-state spin", g.TotalSpin, c.want, 1e-12)
		// Exactly 2S+1 ground states.
		deg := 0
		for _, e := range r.Energies {
			if e < r.Energies[0]+1e-9*math.Max(1, math.Abs(r.Energies[0])) {
				deg++
			}
		}
		if deg != int(math.Round(2*c.want+1)) {
			t.Errorf("%s: %d ground states, want %d", c.name, deg, int(2*c.want+1))
		}
	}
}

func TestInvariantMonotoneMagnetization(t *testing.T) {
	// Invariant (for [M, H] = 0, dM/dB = (<M^2> - <M>^2)/T >= 0): on an SU(2)
	// cluster with one g, M(B) is non-decreasing at T > 0.
	m := su2Cluster()
	var fields []float64
	for i := 0; i <= 160; i++ {
		fields = append(fields, 0.25*float64(i))
	}
	mr := magnetization(t, m, [3]float64{1, 1, 0}, []float64{0.05, 0.5, 3}, fields)
	for _, c := range mr.Curves {
		for i := 1; i < len(fields); i++ {
			if c.Magnetization[i] < c.Magnetization[i-1]-1e-10 {
				t.Errorf("T = %g: M decreases from %.12g at %g T to %.12g at %g T",
					c.Temperature, c.Magnetization[i-1], fields[i-1], c.Magnetization[i], fields[i])
			}
		}
		expect(t, "M(0)", c.Magnetization[0], 0, 1e-12)
	}
	r := thermo(t, m, [3]float64{0, 3, 4}, 0.05, 0.5, 3, 30)
	for i, v := range r.Susceptibility {
		if v < -1e-10 {
			t.Errorf("chi at T = %g is negative: %g", r.Temperature[i], v)
		}
	}
}

func TestInvariantGroupMomentsSum(t *testing.T) {
	// Invariant, no source: when every site has a group, the group moments
	// add up to the magnetization.
	m := anisotropicCluster()
	fields := []float64{0, 0.7, 3, 12}
	for _, dir := range [][3]float64{{0, 0, 1}, {1, -2, 0.5}} {
		mr := magnetization(t, m, dir, []float64{0, 0.4, 6}, fields)
		for _, c := range mr.Curves {
			if len(c.Groups) != 3 {
				t.Errorf("T = %g: %d groups, want 3 (centre, outer, far)", c.Temperature, len(c.Groups))
			}
			for i := range fields {
				sum := 0.0
				for _, v := range c.Groups {
					sum += v[i]
				}
				expect(t, "sum of group moments, T = "+formatG(c.Temperature)+", B = "+formatG(fields[i]),
					sum, c.Magnetization[i], 1e-10)
			}
		}
	}
}

func TestInvariantThermoMatchesFiniteDifferences(t *testing.T) {
	// Invariant (thermodynamic identities, no source): M = -(1/MuBOverKB) dF/dB
	// with F = E - T S, and chi = dM/dB, checked by five-point central
	// differences (error O(delta^4)) of the thermo task's F and of the
	// magnetization task's M(B), on a cluster with DM and different g tensors
	// in a tilted field, where M does not commute with H: this checks the Van
	// Vleck part of chi.
	m := anisotropicCluster()
	dir := [3]float64{0.36, -0.48, 0.8}
	temps := []float64{0.8, 3, 12}
	const delta = 1e-3
	d5 := func(f []float64) float64 { // f at b0 - 2d, b0 - d, b0, b0 + d, b0 + 2d
		return (f[0] - 8*f[1] + 8*f[3] - f[4]) / (12 * delta)
	}
	offsets := []float64{-2 * delta, -delta, 0, delta, 2 * delta}
	for _, b0 := range []float64{0, 1.5, 6} {
		at := func(b float64) [3]float64 { return [3]float64{b * dir[0], b * dir[1], b * dir[2]} }
		var th []*ed.ThermoResult
		var fields []float64
		for _, o := range offsets {
			th = append(th, thermo(t, m, at(b0+o), temps...))
			fields = append(fields, b0+o)
		}
		r := th[2]
		mr := magnetization(t, m, dir, temps, fields)
		for i, T := range temps {
			name := "B = " + formatG(b0) + " T, T = " + formatG(T) + " K: "
			F := make([]float64, len(offsets))
			for k := range offsets {
				F[k] = th[k].Energy[i] - T*th[k].Entropy[i]
			}
			mF := -d5(F) / ed.MuBOverKB
			c := mr.Curves[i]
			chiFD := d5(c.Magnetization)
			if b0 == 0 {
				// Thermo's zero-field direction is z, not dir; see below.
				expect(t, name+"M(0)", c.Magnetization[2], 0, 1e-12)
			} else {
				expect(t, name+"thermo M vs -dF/dB", r.Magnetization[i], mF, 1e-8)
				expect(t, name+"thermo M vs magnetization task", r.Magnetization[i], c.Magnetization[2], 1e-10)
				expect(t, name+"thermo chi vs dM/dB", r.Susceptibility[i], chiFD, 1e-7*math.Max(1, math.Abs(chiFD)))
			}
			expect(t, name+"magnetization task M vs -dF/dB", c.Magnetization[2], mF, 1e-8)
		}
	}
	// At zero field along z (thermo's zero-field direction).
	z := [3]float64{0, 0, 1}
	r := thermo(t, m, [3]float64{}, temps...)
	mr := magnetization(t, m, z, temps, offsets)
	for i, T := range temps {
		chiFD := d5(mr.Curves[i].Magnetization)
		expect(t, "zero-field chi vs dM/dB along z, T = "+formatG(T), r.Susceptibility[i], chiFD, 1e-7*math.Max(1, math.Abs(chiFD)))
	}
}
