package compare

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"frustum/cluster"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// dimer is two spins 1/2 with exchange J (K) and g values g0, g1.
func dimer(J, g0, g1 float64) *frustumv1.Cluster {
	return &frustumv1.Cluster{
		Name: "dimer",
		Sites: []*frustumv1.Site{
			{Label: "a", G: proto.Float64(g0), Group: "left"},
			{Label: "b", G: proto.Float64(g1), Group: "right"},
		},
		Bonds: []*frustumv1.Bond{{A: "a", B: "b", Exchange: proto.Float64(J)}},
	}
}

// synthetic returns data y = a O + c + noise for the model's observable on
// a grid of fields at the given temperatures; the noise is Gaussian with
// standard deviation sigma (known, and given to the fit).
func synthetic(t *testing.T, c *frustumv1.Cluster, o Observable, temps []float64, a, off, sigma float64, rng *rand.Rand) *Data {
	t.Helper()
	d := &Data{Name: "synthetic", ValueUnit: "1"}
	for _, T := range temps {
		for k := 0; k <= 14; k++ {
			d.Temperature = append(d.Temperature, T)
			d.Field = append(d.Field, float64(k))
		}
	}
	m, err := cluster.FromProto(c)
	if err != nil {
		t.Fatal(err)
	}
	ev, err := clusterObservable(context.Background(), m, o, fieldGeometry{}, newGrid(d), ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range ev.values {
		d.Value = append(d.Value, a*v+off+sigma*rng.NormFloat64())
		d.Sigma = append(d.Sigma, sigma)
	}
	return d
}

// Recovery of known parameters (common practice, no source: a fit to data
// made by the model itself plus Gaussian noise of known size must return
// the true values within its reported errors, so that the pulls
// (fitted - true)/error have mean near 0 and spread near 1 over many noise
// draws). Two parameters: the exchange and one site's g, through the
// per-field route of the engine (two g values).
func TestFitRecoversParametersWithUnitPulls(t *testing.T) {
	const trueJ, trueG = 12.0, 2.3
	truth := dimer(trueJ, 2.0, trueG)
	o := Observable{Kind: Polarization}
	vary := []Parameter{
		{Name: "J", Paths: []string{"bonds[0].exchange"}, Min: 0, Max: 40, HasMin: true, HasMax: true},
		{Name: "gb", Paths: []string{"sites[1].g"}, Min: 1.5, Max: 3, HasMin: true, HasMax: true},
	}
	seeds := 24
	var pulls [2][]float64
	for seed := 0; seed < seeds; seed++ {
		rng := rand.New(rand.NewPCG(uint64(seed), 7))
		d := synthetic(t, truth, o, []float64{2, 5, 10}, -0.4, 0.05, 0.003, rng)
		start := dimer(10, 2.0, 2.1)
		res, err := Fit(context.Background(), Request{Data: d, Models: []*frustumv1.Cluster{start}, Observable: o, Vary: vary}, ed.Options{})
		if err != nil {
			t.Fatal(err)
		}
		m := res.Models[0]
		if !m.Converged {
			t.Errorf("seed %d: not converged: %v", seed, m.Warnings)
		}
		for i, want := range []float64{trueJ, trueG} {
			p := m.Parameters[i]
			if !(p.Error > 0) || math.IsInf(p.Error, 0) {
				t.Fatalf("seed %d: %s error %v", seed, p.Name, p.Error)
			}
			pulls[i] = append(pulls[i], (p.Value-want)/p.Error)
		}
		if seed == 0 {
			l := m.Links[0]
			if math.Abs(l.Scale+0.4) > 5*l.ScaleError || math.Abs(l.Offset-0.05) > 5*l.OffsetError {
				t.Errorf("link a = %v +- %v, c = %v +- %v; want -0.4, 0.05", l.Scale, l.ScaleError, l.Offset, l.OffsetError)
			}
			if m.DegreesOfFreedom != d.Len()-4 {
				t.Errorf("degrees of freedom %d, want %d", m.DegreesOfFreedom, d.Len()-4)
			}
		}
	}
	for i, name := range []string{"J", "gb"} {
		mean, rms := 0.0, 0.0
		for _, p := range pulls[i] {
			mean += p
			rms += p * p
		}
		mean /= float64(seeds)
		rms = math.Sqrt(rms / float64(seeds))
		t.Logf("%s: pull mean %.3f, rms %.3f over %d seeds", name, mean, rms, seeds)
		// For 24 draws of a unit normal the mean has standard error 0.2 and
		// the rms lies within [0.65, 1.35] with probability far above 99%.
		if math.Abs(mean) > 0.7 || rms < 0.6 || rms > 1.45 {
			t.Errorf("%s: pulls mean %.3f rms %.3f, want about 0 and 1", name, mean, rms)
		}
	}
}

// The free-spin baselines against the Brillouin closed form (Brillouin, J.
// Phys. Radium 8, 74 (1927)): data made from a free spin 1/2 with g = 2.12
// give back g for the free spin 1/2, a reduced chi-square near 1, and the
// lowest AIC of the two baselines.
func TestFreeSpinBaselineRecoversG(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	d := &Data{Name: "free", ValueUnit: "1"}
	for _, T := range []float64{1.5, 3, 6} {
		for k := 1; k <= 20; k++ {
			B := 0.5 * float64(k)
			d.Temperature = append(d.Temperature, T)
			d.Field = append(d.Field, B)
			// tanh form of the S = 1/2 Brillouin function.
			x := 2.12 * ed.MuBOverKB * B / (2 * T)
			d.Value = append(d.Value, 0.8*math.Tanh(x)+0.002*rng.NormFloat64())
			d.Sigma = append(d.Sigma, 0.002)
		}
	}
	res, err := Fit(context.Background(), Request{Data: d, Observable: Observable{Kind: Polarization}}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Models) != 2 || res.Models[0].Name != "free spin 1/2" || res.Models[1].Name != "free spin 1" {
		t.Fatalf("models %v", names(res))
	}
	m := res.Models[0]
	g := m.Parameters[0]
	if math.Abs(g.Value-2.12) > 4*g.Error {
		t.Errorf("g = %v +- %v, want 2.12", g.Value, g.Error)
	}
	if m.ReducedChiSquare > 1.6 || m.ReducedChiSquare < 0.5 {
		t.Errorf("reduced chi-square %v, want about 1", m.ReducedChiSquare)
	}
	if res.Best != "free spin 1/2" {
		t.Errorf("best %q", res.Best)
	}
	// A spin 1 curve has another shape: with its own g and link it still
	// misses by far more than the noise (Delta AIC > 25).
	if res.Models[1].AIC < m.AIC+25 {
		t.Errorf("free spin 1 fits a spin 1/2 as well: AIC %v against %v", res.Models[1].AIC, m.AIC)
	}
	if !m.Baseline || m.AIC != m.ChiSquare+2*3 || math.Abs(m.BIC-(m.ChiSquare+3*math.Log(60))) > 1e-9 {
		t.Errorf("baseline %v, AIC %v, BIC %v, chi2 %v", m.Baseline, m.AIC, m.BIC, m.ChiSquare)
	}
	for i := range d.Field {
		if x := ScalingVariable(2, d.Field[i], d.Temperature[i]); res.Scaling[i] != x {
			t.Fatalf("scaling[%d] = %v, want %v", i, res.Scaling[i], x)
		}
	}
}

func names(r *Result) []string {
	var out []string
	for _, m := range r.Models {
		out = append(out, m.Name)
	}
	return out
}

// The scaling variable: a free spin's polarization depends on
// x = g mu_B B/(2 k_B T) alone (Brillouin closed form), a coupled cluster's
// does not (derivation: the exchange J sets a second energy scale, so
// doubling B and T together changes the Boltzmann weights of the singlet
// against the triplet, exp(-J/T)).
func TestScalingHoldsForFreeSpinsOnly(t *testing.T) {
	d := &Data{ValueUnit: "1", Temperature: []float64{1, 2, 4}, Field: []float64{1.5, 3, 6}}
	o := Observable{Kind: Polarization}
	free := freeSpinObservable(FreeSpin{S: 0.5, G: 2}, o, d)
	for i := 1; i < 3; i++ {
		if math.Abs(free[i]-free[0]) > 1e-15 {
			t.Errorf("free spin: P = %v at point %d, %v at point 0", free[i], i, free[0])
		}
	}
	// A single site cluster is a free spin for the engine too.
	single := &frustumv1.Cluster{Name: "one", Sites: []*frustumv1.Site{{Label: "s"}}, Bonds: nil}
	m, err := cluster.FromProto(single)
	if err != nil {
		t.Fatal(err)
	}
	ev, err := clusterObservable(context.Background(), m, o, fieldGeometry{}, newGrid(d), ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for i := range ev.values {
		if math.Abs(ev.values[i]-free[i]) > 1e-12 {
			t.Errorf("engine single spin %v, Brillouin %v", ev.values[i], free[i])
		}
	}
	m, err = cluster.FromProto(dimer(3, 2, 2))
	if err != nil {
		t.Fatal(err)
	}
	ev, err = clusterObservable(context.Background(), m, o, fieldGeometry{}, newGrid(d), ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(ev.values[1]-ev.values[0]) < 1e-3 || math.Abs(ev.values[2]-ev.values[1]) < 1e-3 {
		t.Errorf("coupled dimer obeys the free-spin scaling: %v", ev.values)
	}
}

// An exactly degenerate pair (derivation: an isotropic tensor t 1 added to a
// bond acts as the exchange J + t, so J and t enter only as their sum) is
// flagged, with infinite errors, instead of reporting a spurious precision.
func TestDegenerateParametersAreFlagged(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	o := Observable{Kind: Polarization}
	d := synthetic(t, dimer(8, 2, 2), o, []float64{2, 4}, 1, 0, 0.002, rng)
	vary := []Parameter{
		{Name: "J", Paths: []string{"bonds[0].exchange"}, Min: 0, Max: 20, HasMin: true, HasMax: true},
		{Name: "t", Paths: []string{"bonds[0].tensor[0]", "bonds[0].tensor[4]", "bonds[0].tensor[8]"}, Min: -5, Max: 5, HasMin: true, HasMax: true},
	}
	c := dimer(6, 2, 2)
	c.Bonds[0].Tensor = make([]float64, 9)
	res, err := Fit(context.Background(), Request{Data: d, Models: []*frustumv1.Cluster{c}, Observable: o, Vary: vary}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	m := res.Models[0]
	joined := strings.Join(m.Warnings, "\n")
	if !strings.Contains(joined, "degenerate") {
		t.Fatalf("no degeneracy warning: %q", joined)
	}
	for _, p := range m.Parameters {
		if !math.IsInf(p.Error, 1) {
			t.Errorf("%s error %v, want +Inf", p.Name, p.Error)
		}
	}
	if sum := m.Parameters[0].Value + m.Parameters[1].Value; math.Abs(sum-8) > 0.05 {
		t.Errorf("J + t = %v, want 8", sum)
	}
}

// A per-temperature link has one (a, c) per temperature and so more fitted
// quantities (common practice, no source).
func TestPerTemperatureLink(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	o := Observable{Kind: Moment}
	d := synthetic(t, dimer(5, 2, 2), o, []float64{2, 4, 8}, 2, 0.1, 0.001, rng)
	res, err := Fit(context.Background(), Request{Data: d, Models: []*frustumv1.Cluster{dimer(5, 2, 2)}, Observable: o, Link: PerTemperatureLink}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	m := res.Models[0]
	if len(m.Links) != 3 || m.DegreesOfFreedom != d.Len()-6 {
		t.Fatalf("links %d, dof %d", len(m.Links), m.DegreesOfFreedom)
	}
	for _, l := range m.Links {
		if math.Abs(l.Scale-2) > 5*l.ScaleError || math.IsNaN(l.Temperature) {
			t.Errorf("T = %v: a = %v +- %v, want 2", l.Temperature, l.Scale, l.ScaleError)
		}
	}
	if len(m.Parameters) != 0 || m.Cluster == nil {
		t.Errorf("parameters %v", m.Parameters)
	}
}

// Bad requests name their field.
func TestFitRequestErrors(t *testing.T) {
	d := &Data{ValueUnit: "1", Temperature: []float64{1, 1, 2, 2, 3, 3}, Field: []float64{1, 2, 1, 2, 1, 2}, Value: []float64{1, 2, 1, 2, 1, 2}}
	o := Observable{Kind: Polarization}
	cases := []struct {
		name  string
		req   Request
		field string
	}{
		{"no data", Request{Observable: o}, "data"},
		{"no observable", Request{Data: d}, "observable"},
		{"bad path", Request{Data: d, Observable: o, Models: []*frustumv1.Cluster{dimer(1, 2, 2)}, Vary: []Parameter{{Name: "J", Paths: []string{"bonds[0].exchang"}}}}, "vary[0].paths[0]"},
		{"no name", Request{Data: d, Observable: o, Vary: []Parameter{{Paths: []string{"bonds[0].exchange"}}}}, "vary[0].name"},
		{"path twice", Request{Data: d, Observable: o, Models: []*frustumv1.Cluster{dimer(1, 2, 2)}, Vary: []Parameter{{Name: "J", Paths: []string{"bonds[0].exchange"}}, {Name: "K", Paths: []string{"bonds[0].exchange"}}}}, "vary[1].paths"},
		{"out of range", Request{Data: d, Observable: o, Models: []*frustumv1.Cluster{dimer(1, 2, 2)}, Vary: []Parameter{{Name: "J", Paths: []string{"bonds[3].exchange"}}}}, "vary[0].paths"},
		{"bad cluster", Request{Data: d, Observable: o, Models: []*frustumv1.Cluster{{Sites: []*frustumv1.Site{{Label: "a"}}, Bonds: []*frustumv1.Bond{{A: "a", B: "z", Exchange: proto.Float64(1)}}}}}, "models[0].bonds[0].b"},
		{"no group", Request{Data: d, Observable: Observable{Kind: Polarization, Group: "centre"}, Models: []*frustumv1.Cluster{dimer(1, 2, 2)}}, "models[0]"},
		{"min above max", Request{Data: d, Observable: o, Vary: []Parameter{{Name: "J", Paths: []string{"bonds[0].exchange"}, Min: 3, Max: 1, HasMin: true, HasMax: true}}}, "vary[0].max"},
		{"too few points", Request{Data: d, Observable: o, Link: PerTemperatureLink}, "data"},
		{"powder and direction", Request{Data: d, Observable: o, Powder: 6, Direction: [3]float64{1, 0, 0}}, "direction"},
	}
	for _, c := range cases {
		_, err := Fit(context.Background(), c.req, ed.Options{})
		var re *ed.RequestError
		if !errors.As(err, &re) {
			t.Errorf("%s: error %v, want a RequestError", c.name, err)
			continue
		}
		if re.Field != c.field {
			t.Errorf("%s: field %q (%v), want %q", c.name, re.Field, err, c.field)
		}
	}
}

// Cancellation stops a fit with ctx.Err().
func TestFitCancelled(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	o := Observable{Kind: Polarization}
	d := synthetic(t, dimer(8, 2, 2.2), o, []float64{2, 4}, 1, 0, 0.002, rng)
	ctx, cancel := context.WithCancel(context.Background())
	n := 0
	opt := ed.Options{Progress: func(string, int, int) {
		n++
		if n == 5 {
			cancel()
		}
	}}
	_, err := Fit(ctx, Request{Data: d, Models: []*frustumv1.Cluster{dimer(5, 2, 2.2)}, Observable: o,
		Vary: []Parameter{{Name: "J", Paths: []string{"bonds[0].exchange"}}}}, opt)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("error %v, want context.Canceled", err)
	}
}

// A powder fit of an isotropic cluster is the single-direction fit
// (derivation: with one scalar g on every site and SU(2) exchange every
// field direction gives the same curve), and it reports its quadrature.
func TestPowderFitOfIsotropicCluster(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 11))
	o := Observable{Kind: Polarization}
	d := synthetic(t, dimer(6, 2.1, 2.1), o, []float64{2, 4}, 1, 0, 0.003, rng)
	vary := []Parameter{{Name: "J", Paths: []string{"bonds[0].exchange"}, Min: 0, Max: 20, HasMin: true, HasMax: true}}
	one, err := Fit(context.Background(), Request{Data: d, Models: []*frustumv1.Cluster{dimer(4, 2.1, 2.1)}, Observable: o, Vary: vary}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	pow, err := Fit(context.Background(), Request{Data: d, Models: []*frustumv1.Cluster{dimer(4, 2.1, 2.1)}, Observable: o, Vary: vary, Powder: 26}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	a, b := one.Models[0], pow.Models[0]
	if math.Abs(a.Parameters[0].Value-b.Parameters[0].Value) > 1e-9 || math.Abs(a.ChiSquare-b.ChiSquare) > 1e-9*a.ChiSquare {
		t.Errorf("one direction J = %v chi2 %v; powder J = %v chi2 %v", a.Parameters[0].Value, a.ChiSquare, b.Parameters[0].Value, b.ChiSquare)
	}
	if b.Powder == nil || b.Powder.Directions < 26 || a.Powder != nil {
		t.Errorf("powder reports: one %v, powder %v", a.Powder, b.Powder)
	}
}

// An anisotropic g tensor makes the powder fit differ from the fit along z
// (derivation: M along the field depends on |g n|), and the fit still
// recovers the exchange from powder data made by the engine.
func TestPowderFitRecoversExchange(t *testing.T) {
	c := dimer(6, 2, 2)
	for _, s := range c.Sites {
		s.G = nil
		s.GTensor = []float64{1.9, 0, 0, 0, 1.9, 0, 0, 0, 2.4}
	}
	o := Observable{Kind: Polarization}
	d := &Data{ValueUnit: "1"}
	for _, T := range []float64{2, 4} {
		for k := 1; k <= 12; k++ {
			d.Temperature, d.Field = append(d.Temperature, T), append(d.Field, float64(k))
		}
	}
	m, err := cluster.FromProto(c)
	if err != nil {
		t.Fatal(err)
	}
	ev, err := clusterObservable(context.Background(), m, o, fieldGeometry{Powder: 26}, newGrid(d), ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(4, 4))
	for _, v := range ev.values {
		d.Value = append(d.Value, v+0.002*rng.NormFloat64())
		d.Sigma = append(d.Sigma, 0.002)
	}
	start := proto.Clone(c).(*frustumv1.Cluster)
	start.Bonds[0].Exchange = proto.Float64(4)
	vary := []Parameter{{Name: "J", Paths: []string{"bonds[0].exchange"}, Min: 0, Max: 20, HasMin: true, HasMax: true}}
	res, err := Fit(context.Background(), Request{Data: d, Models: []*frustumv1.Cluster{start}, Observable: o, Vary: vary, Powder: 26}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	p := res.Models[0].Parameters[0]
	if math.Abs(p.Value-6) > 4*p.Error {
		t.Errorf("J = %v +- %v, want 6", p.Value, p.Error)
	}
	z, err := Fit(context.Background(), Request{Data: d, Models: []*frustumv1.Cluster{start}, Observable: o, Vary: vary}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if z.Models[0].ChiSquare < res.Models[0].ChiSquare+10 {
		t.Errorf("the fit along z explains powder data as well: chi2 %v against %v", z.Models[0].ChiSquare, res.Models[0].ChiSquare)
	}
}
