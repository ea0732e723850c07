package ed_test

// Reference library check: seeded random small clusters are written in the
// cluster-file form of FORMAT.md, and testdata/reference_hamiltonian.py builds
// the full dense Hamiltonian with numpy from that JSON alone (Kronecker
// products of Sx, Sy, Sz, every term of FORMAT.md written out) and
// diagonalizes it. Its spectrum, and on the smaller clusters its E, C, S, M
// and Kubo susceptibility, must match the engine's.
//
// Source: FORMAT.md's Hamiltonian, evaluated by numpy (an outside library);
// tolerance 1e-9 of max |E| for the spectrum, 1e-8 relative for thermo.

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"testing"
	"time"

	"frustum/cluster"
	"frustum/ed"
)

// JSON of the cluster file (FORMAT.md), produced from a cluster.Model.
type refSite struct {
	Label     string     `json:"label"`
	Spin      float64    `json:"spin"`
	GTensor   [9]float64 `json:"gTensor"`
	SingleIon float64    `json:"singleIon,omitempty"`
	Group     string     `json:"group,omitempty"`
}

type refBond struct {
	A         string     `json:"a"`
	B         string     `json:"b"`
	Exchange  float64    `json:"exchange"`
	ExchangeZ float64    `json:"exchangeZ"`
	DM        [3]float64 `json:"dm"`
	Tensor    [9]float64 `json:"tensor"`
}

type refCluster struct {
	Name  string    `json:"name"`
	Sites []refSite `json:"sites"`
	Bonds []refBond `json:"bonds"`
}

type refCase struct {
	Cluster      refCluster `json:"cluster"`
	Field        [3]float64 `json:"field"`
	Temperatures []float64  `json:"temperatures,omitempty"`
}

type refThermo struct {
	Energy         []float64 `json:"energy"`
	SpecificHeat   []float64 `json:"specificHeat"`
	Entropy        []float64 `json:"entropy"`
	Magnetization  []float64 `json:"magnetization"`
	Susceptibility []float64 `json:"susceptibility"`
}

type refResult struct {
	Energies []float64  `json:"energies"`
	Thermo   *refThermo `json:"thermo"`
}

func toClusterFile(m *cluster.Model) refCluster {
	c := refCluster{Name: m.Name}
	for _, s := range m.Sites {
		c.Sites = append(c.Sites, refSite{Label: s.Label, Spin: s.Spin(), GTensor: s.G, SingleIon: s.SingleIon, Group: s.Group})
	}
	for _, b := range m.Bonds {
		c.Bonds = append(c.Bonds, refBond{A: m.Sites[b.A].Label, B: m.Sites[b.B].Label,
			Exchange: b.J, ExchangeZ: b.Jz, DM: b.DM, Tensor: b.Tensor})
	}
	return c
}

// numpyPython returns an interpreter that imports numpy: /usr/bin/python3
// first, then python3 on PATH.
func numpyPython() string {
	cands := []string{"/usr/bin/python3"}
	if p, err := exec.LookPath("python3"); err == nil {
		cands = append(cands, p)
	}
	for _, c := range cands {
		if exec.Command(c, "-c", "import numpy").Run() == nil {
			return c
		}
	}
	return ""
}

// runReference runs the python reference once for all cases.
func runReference(t *testing.T, cases []refCase) []refResult {
	t.Helper()
	py := numpyPython()
	if py == "" {
		if os.Getenv("CI") == "true" {
			t.Fatal("no python3 that imports numpy (CI installs python3-numpy)")
		}
		t.Skip("no python3 that imports numpy; install python3-numpy")
	}
	in, err := json.Marshal(cases)
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(py, "testdata/reference_hamiltonian.py")
	cmd.Stdin = bytes.NewReader(in)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	start := time.Now()
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("reference_hamiltonian.py: %v\n%s", err, stderr.String())
	}
	t.Logf("numpy reference: %d clusters in %.1f s", len(cases), time.Since(start).Seconds())
	var res []refResult
	if err := json.Unmarshal(out, &res); err != nil {
		t.Fatalf("reference output: %v", err)
	}
	if len(res) != len(cases) {
		t.Fatalf("reference gave %d results for %d clusters", len(res), len(cases))
	}
	return res
}

// Kinds of random cluster, chosen so that every route of the engine runs.
const (
	kindGeneral = iota // everything random: complex, nothing conserved
	kindReal           // real H (no y-odd couplings, field in the xz plane)
	kindSz             // conserves S^z: XXZ, D^z, xy-symmetric tensors, field along z
	kindSzReal         // XXZ, single-ion, field along z, no DM: real and S^z
	kindSU2            // Heisenberg, one isotropic g, any field
	kindAxis           // conserves S.n for a common axis n (DM, XXZ tensor, field along n)
)

var kindNames = []string{"general", "real", "Sz", "Sz-real", "SU2", "axis"}

type randomCluster struct {
	model *cluster.Model
	field [3]float64
	kind  int
}

// randomModel draws a cluster of nSites (mixed spins when mixed) with total
// dimension at most maxDim.
func randomModel(rng *rand.Rand, kind, nSites int, mixed bool, maxDim int) randomCluster {
	u := func(a, b float64) float64 { return a + (b-a)*rng.Float64() }
	var twoS []int
	for {
		twoS = twoS[:0]
		d := 1
		for i := 0; i < nSites; i++ {
			ts := 1
			if mixed {
				ts = 1 + rng.IntN(3)
			}
			twoS = append(twoS, ts)
			d *= ts + 1
		}
		if d <= maxDim {
			break
		}
	}
	// A common axis for kindAxis.
	axis := [3]float64{0, 0, 1}
	if kind == kindAxis {
		th, ph := u(0.2, 2.9), u(0, 2*math.Pi)
		axis = [3]float64{math.Sin(th) * math.Cos(ph), math.Sin(th) * math.Sin(ph), math.Cos(th)}
	}
	gIso := u(1.9, 2.3)
	m := &cluster.Model{Name: kindNames[kind]}
	for i, ts := range twoS {
		s := cluster.Site{Label: "r" + formatG(float64(i)), TwoS: ts}
		switch kind {
		case kindSU2:
			s.G = cluster.IsotropicG(gIso)
		case kindAxis:
			s.G = cluster.IsotropicG(u(1.9, 2.3))
		default:
			for k := range s.G {
				s.G[k] = u(-0.25, 0.25)
			}
			s.G[0] += u(1.9, 2.3)
			s.G[4] += u(1.9, 2.3)
			s.G[8] += u(1.9, 2.3)
			switch kind {
			case kindReal:
				s.G[1], s.G[7] = 0, 0 // no S^y in B_x g^{x.} S + B_z g^{z.} S
			case kindSz, kindSzReal:
				s.G[6], s.G[7] = 0, 0 // B_z g^{z nu} S^nu = B_z g^{zz} S^z
			}
		}
		if ts >= 2 && kind != kindSU2 && kind != kindAxis {
			s.SingleIon = u(-10, 10)
		}
		m.Sites = append(m.Sites, s)
	}
	// Bonds: a random spanning path and a few extra pairs.
	perm := rng.Perm(nSites)
	seen := map[[2]int]bool{}
	var pairs [][2]int
	add := func(a, b int) {
		if a == b || seen[[2]int{a, b}] || seen[[2]int{b, a}] {
			return
		}
		seen[[2]int{a, b}] = true
		pairs = append(pairs, [2]int{a, b})
	}
	for i := 0; i+1 < nSites; i++ {
		add(perm[i], perm[i+1])
	}
	for k := rng.IntN(nSites + 1); k > 0; k-- {
		add(rng.IntN(nSites), rng.IntN(nSites))
	}
	for _, p := range pairs {
		b := cluster.Bond{A: p[0], B: p[1]}
		j := u(-20, 20)
		switch kind {
		case kindGeneral:
			b.J, b.Jz = j, j+u(-5, 5)
			b.DM = [3]float64{u(-5, 5), u(-5, 5), u(-5, 5)}
			for k := range b.Tensor {
				b.Tensor[k] = u(-3, 3)
			}
		case kindReal:
			b.J, b.Jz = j, j+u(-5, 5)
			b.DM = [3]float64{0, u(-5, 5), 0} // D^y couples x and z: real
			for _, k := range []int{0, 2, 4, 6, 8} {
				b.Tensor[k] = u(-3, 3)
			}
		case kindSz:
			b.J, b.Jz = j, j+u(-5, 5)
			b.DM = [3]float64{0, 0, u(-5, 5)}
			a, c, z := u(-3, 3), u(-3, 3), u(-3, 3)
			b.Tensor = [9]float64{a, c, 0, -c, a, 0, 0, 0, z}
		case kindSzReal:
			b.J, b.Jz = j, j+u(-5, 5)
		case kindSU2:
			b.J, b.Jz = j, j
		case kindAxis:
			// J S.S + D n.(Sa x Sb) + (Jz - J)(n.Sa)(n.Sb)
			b.J, b.Jz = j, j
			d := u(-5, 5)
			b.DM = [3]float64{d * axis[0], d * axis[1], d * axis[2]}
			dj := u(-5, 5)
			for mu := 0; mu < 3; mu++ {
				for nu := 0; nu < 3; nu++ {
					b.Tensor[3*mu+nu] = dj * axis[mu] * axis[nu]
				}
			}
		}
		m.Bonds = append(m.Bonds, b)
	}
	// Field: tilted, magnitude up to 10 T; along z or n where the kind needs it.
	bm := u(0.5, 10)
	var field [3]float64
	switch kind {
	case kindGeneral, kindSU2:
		th, ph := u(0.2, 2.9), u(0, 2*math.Pi)
		field = [3]float64{bm * math.Sin(th) * math.Cos(ph), bm * math.Sin(th) * math.Sin(ph), bm * math.Cos(th)}
	case kindReal:
		th := u(0.2, 2.9)
		field = [3]float64{bm * math.Sin(th), 0, bm * math.Cos(th)}
	case kindSz, kindSzReal:
		field = [3]float64{0, 0, bm}
	case kindAxis:
		field = [3]float64{bm * axis[0], bm * axis[1], bm * axis[2]}
	}
	if rng.IntN(6) == 0 {
		field = [3]float64{}
	}
	return randomCluster{model: m, field: field, kind: kind}
}

// referenceClusters is the seeded set: about 30 clusters of 2 to 8 sites.
func referenceClusters() []randomCluster {
	rng := rand.New(rand.NewPCG(20240611, 7))
	var out []randomCluster
	// Mixed spins 1/2, 1, 3/2, every kind.
	for _, c := range []struct{ kind, n, maxDim int }{
		{kindGeneral, 2, 16}, {kindGeneral, 3, 64}, {kindGeneral, 4, 200}, {kindGeneral, 5, 400},
		{kindGeneral, 6, 1500},
		{kindReal, 3, 64}, {kindReal, 4, 200}, {kindReal, 5, 600},
		{kindSz, 2, 16}, {kindSz, 4, 200}, {kindSz, 5, 500}, {kindSz, 6, 1500},
		{kindSzReal, 3, 64}, {kindSzReal, 5, 600},
		{kindSU2, 3, 64}, {kindSU2, 4, 200}, {kindSU2, 6, 1200},
		{kindAxis, 3, 64}, {kindAxis, 4, 300}, {kindAxis, 5, 600},
	} {
		out = append(out, randomModel(rng, c.kind, c.n, true, c.maxDim))
	}
	// Spin 1/2 only, up to 8 sites.
	for _, c := range []struct{ kind, n int }{
		{kindGeneral, 8}, {kindGeneral, 7}, {kindReal, 8}, {kindSz, 8}, {kindSzReal, 8},
		{kindSU2, 8}, {kindSU2, 7}, {kindAxis, 8}, {kindGeneral, 2}, {kindSz, 3},
	} {
		out = append(out, randomModel(rng, c.kind, c.n, false, 256))
	}
	return out
}

func complexTag(c bool) string {
	if c {
		return " [complex]"
	}
	return " [real]"
}

func TestReferenceNumpy(t *testing.T) {
	clusters := referenceClusters()
	refTemps := []float64{0.7, 4, 35}
	cases := make([]refCase, len(clusters))
	for i, c := range clusters {
		cases[i] = refCase{Cluster: toClusterFile(c.model), Field: c.field}
		if d, _ := c.model.Dimension(); d <= 300 {
			cases[i].Temperatures = refTemps
		}
	}
	ref := runReference(t, cases)
	kindSeen := map[string]int{}
	routes := map[string]int{}
	for i, c := range clusters {
		d, _ := c.model.Dimension()
		name := formatG(float64(i)) + "-" + kindNames[c.kind] + "-" + formatG(float64(len(c.model.Sites))) + "sites-dim" + formatG(float64(d))
		kindSeen[kindNames[c.kind]]++
		t.Run(name, func(t *testing.T) {
			r, err := ed.Spectrum(context.Background(), c.model, ed.SpectrumRequest{Field: c.field}, ed.Options{})
			if err != nil {
				t.Fatalf("Spectrum: %v", err)
			}
			routes[r.Report.Route+complexTag(r.Report.Complex)]++
			sum := 0
			for _, sec := range r.Report.Sectors {
				sum += sec.Dimension
			}
			if int64(sum) != d || r.Report.Dimension != d {
				t.Errorf("sectors add up to %d, report dimension %d; want %d", sum, r.Report.Dimension, d)
			}
			want := ref[i].Energies
			if len(r.Energies) != len(want) {
				t.Fatalf("%d energies, numpy has %d", len(r.Energies), len(want))
			}
			scale := 0.0
			for _, e := range want {
				scale = math.Max(scale, math.Abs(e))
			}
			worst := 0.0
			for k := range want {
				worst = math.Max(worst, math.Abs(r.Energies[k]-want[k]))
			}
			if worst > 1e-9*scale {
				t.Errorf("spectrum differs from numpy by %.3g (max |E| %.4g, route %q); field %v\nlowest engine %v\nlowest numpy  %v",
					worst, scale, r.Report.Route, c.field, r.Energies[:min(6, len(want))], want[:min(6, len(want))])
			}
			n := 0
			for _, l := range r.Levels {
				n += l.Degeneracy
			}
			if n != len(r.Energies) {
				t.Errorf("levels hold %d states, energies %d", n, len(r.Energies))
			}
			if ref[i].Thermo == nil {
				return
			}
			th, err := ed.Thermo(context.Background(), c.model, ed.ThermoRequest{Temperatures: refTemps, Field: c.field}, ed.Options{})
			if err != nil {
				t.Fatalf("Thermo: %v", err)
			}
			rt := ref[i].Thermo
			for k, T := range refTemps {
				at := " at T = " + formatG(T)
				expect(t, "E"+at, th.Energy[k], rt.Energy[k], 1e-9*scale)
				expect(t, "C"+at, th.SpecificHeat[k], rt.SpecificHeat[k], 1e-8*math.Max(1, math.Abs(rt.SpecificHeat[k])))
				expect(t, "S"+at, th.Entropy[k], rt.Entropy[k], 1e-9*math.Max(1, rt.Entropy[k]))
				expect(t, "M"+at, th.Magnetization[k], rt.Magnetization[k], 1e-8*math.Max(1, math.Abs(rt.Magnetization[k])))
				expect(t, "chi"+at, th.Susceptibility[k], rt.Susceptibility[k], 1e-7*math.Max(1e-2, math.Abs(rt.Susceptibility[k])))
			}
		})
	}
	t.Logf("kinds %v", kindSeen)
	for r, n := range routes {
		t.Logf("engine route %q: %d clusters", r, n)
	}
}
