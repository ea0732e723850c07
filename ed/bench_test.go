package ed

import (
	"context"
	"encoding/binary"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"frustum/cluster"
	"frustum/ed/eigen"
)

// The seven-site defect multimer (SU(2), one g): 5 temperatures x 301 fields
// from one zero-field diagonalization.
func BenchmarkMagnetizationMultimer7Sites5T301B(b *testing.B) {
	m := cluster.DefectMultimer(cluster.MultimerParams{JPlanar: 180, JDefect: 20, GHost: 2.1, GCentre: 2.1})
	req := MagnetizationRequest{Temperatures: []float64{1, 2, 5, 10, 20}, Direction: [3]float64{0, 0, 1}}
	for i := 0; i <= 300; i++ {
		req.Fields = append(req.Fields, 15*float64(i)/300)
	}
	for b.Loop() {
		if _, err := Magnetization(context.Background(), m, req, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// The same multimer with different g values (per-field diagonalization in
// S^z sectors) and with its group moments.
func BenchmarkMagnetizationMultimer7SitesTwoG5T301B(b *testing.B) {
	m := cluster.DefectMultimer(cluster.MultimerParams{JPlanar: 180, JDefect: 20, GHost: 2.1, GCentre: 2.3})
	req := MagnetizationRequest{Temperatures: []float64{1, 2, 5, 10, 20}, Direction: [3]float64{0, 0, 1}}
	for i := 0; i <= 300; i++ {
		req.Fields = append(req.Fields, 15*float64(i)/300)
	}
	for b.Loop() {
		if _, err := Magnetization(context.Background(), m, req, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// 12-site periodic Heisenberg chain (4096 states): thermodynamics on 200
// temperatures.
func BenchmarkThermoHeisenberg12Sites200T(b *testing.B) {
	m := cluster.Chain(12, 0.5, 1, true)
	req := ThermoRequest{}
	for i := 0; i < 200; i++ {
		req.Temperatures = append(req.Temperatures, 0.01*math.Pow(1e6, float64(i)/199))
	}
	for b.Loop() {
		if _, err := Thermo(context.Background(), m, req, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// dmChain10 is a 10-site open chain with J, a DM vector along z and a field
// along x: 1024 states, complex, no S^z sectors.
func dmChain10() (*cluster.Model, [3]float64) {
	m := cluster.Chain(10, 0.5, 10, false)
	for i := range m.Bonds {
		m.Bonds[i].DM = [3]float64{0, 0, 1.5}
	}
	return m, [3]float64{3, 0, 0}
}

// One full spectrum of the 10-site DM chain through the engine.
func BenchmarkSpectrum10SiteDMFieldX(b *testing.B) {
	m, field := dmChain10()
	for b.Loop() {
		if _, err := Spectrum(context.Background(), m, SpectrumRequest{Field: field}, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// The same 1024 x 1024 complex Hermitian matrix diagonalized by our dense
// solver and by numpy.linalg.eigvalsh (Debian's python3-numpy) in the same
// run; reports both times and their ratio. Skipped without numpy.
func BenchmarkSpectrum10SiteDMFieldXAgainstNumpy(b *testing.B) {
	py := benchNumpyPython()
	if py == "" {
		b.Skip("no python3 with numpy")
	}
	m, field := dmChain10()
	n, B := unit(field)
	st := newSetup(m, n, true)
	bs := newBasisSet(st.sys, st.conserveSz)
	a := denseComplex(st.sys, bs, bs.sectors[0], st.hamiltonian(B))
	dim := bs.sectors[0].dim()
	path := filepath.Join(b.TempDir(), "h.bin")
	buf := make([]byte, 16*len(a))
	for i, z := range a {
		binary.LittleEndian.PutUint64(buf[16*i:], math.Float64bits(real(z)))
		binary.LittleEndian.PutUint64(buf[16*i+8:], math.Float64bits(imag(z)))
	}
	if err := os.WriteFile(path, buf, 0o600); err != nil {
		b.Fatal(err)
	}
	out, err := exec.Command(py, "testdata/time_eigvalsh.py", path, strconv.Itoa(dim), "3").Output()
	if err != nil {
		b.Fatal(err)
	}
	var np struct{ Seconds, Lowest float64 }
	if err := json.Unmarshal(out, &np); err != nil {
		b.Fatal(err)
	}
	var ours time.Duration
	for b.Loop() {
		c := append([]complex128(nil), a...)
		t0 := time.Now()
		vals, _, ok := eigen.Hermitian(c, dim, false)
		ours = time.Since(t0)
		if !ok || math.Abs(vals[0]-np.Lowest) > 1e-9*math.Abs(np.Lowest) {
			b.Fatalf("lowest eigenvalue %v, numpy %v", vals[0], np.Lowest)
		}
	}
	b.ReportMetric(np.Seconds*1e3, "numpy-ms")
	b.ReportMetric(ours.Seconds()*1e3, "ours-ms")
	b.ReportMetric(ours.Seconds()/np.Seconds, "ratio")
}

// benchNumpyPython returns a python interpreter that imports numpy, or "".
func benchNumpyPython() string {
	for _, p := range []string{"/usr/bin/python3", "python3"} {
		if exec.Command(p, "-c", "import numpy").Run() == nil {
			return p
		}
	}
	return ""
}

// kagomeDM12 is the benchmark cluster of the dense sweeps: the 12-site
// kagome torus (2 x 2 cells, J = 20 K) with DM vectors (0.6, -0.4, 2) K on
// every bond (the builder's D^z plus in-plane parts, which break S^z
// conservation), and on each of the three sublattices a uniaxial g tensor
// g = 2.0 I + 0.3 u u^T whose axis u leans 35 degrees from z towards 0,
// 120 or 240 degrees in the plane. With a tilted field no S^z, spatial
// symmetry or reality survives: every field is one complex Hermitian block
// of 4096 states. Invented for benchmarks, not a material.
func kagomeDM12(b *testing.B) *cluster.Model {
	m, err := cluster.Kagome(2, 2, cluster.LatticeParams{J: 20, DM: 2}, true)
	if err != nil {
		b.Fatal(err)
	}
	m.Symmetries = nil
	for i := range m.Bonds {
		m.Bonds[i].DM[0], m.Bonds[i].DM[1] = 0.6, -0.4
	}
	theta := 35 * math.Pi / 180
	for i := range m.Sites {
		phi := 2 * math.Pi * float64(i%3) / 3
		u := [3]float64{math.Sin(theta) * math.Cos(phi), math.Sin(theta) * math.Sin(phi), math.Cos(theta)}
		var g [9]float64
		for a := 0; a < 3; a++ {
			for c := 0; c < 3; c++ {
				g[3*a+c] = 0.3 * u[a] * u[c]
			}
			g[4*a] += 2.0
		}
		m.Sites[i].G = g
	}
	return m
}

// sweepRequest is the benchmark sweep: nb fields from 0 to 14 T at 5
// temperatures from 0.25 to 4 K (T << J, where the defects dominate), along
// the tilted direction (1, 0.5, 2), or a powder average over at least powder
// directions.
func sweepRequest(nb, powder int) MagnetizationRequest {
	req := MagnetizationRequest{Temperatures: []float64{0.25, 0.5, 1, 2, 4}, Method: MethodFull}
	if powder > 0 {
		req.Powder = powder
	} else {
		req.Direction = [3]float64{1, 0.5, 2}
	}
	if nb == 1 {
		req.Fields = []float64{14}
	}
	for i := 0; i < nb && nb > 1; i++ {
		req.Fields = append(req.Fields, 14*float64(i)/float64(nb-1))
	}
	return req
}

// BenchmarkSweepKagomeDM12 times M(B) of kagomeDM12 at 5 temperatures
// (0.25-4 K) with the build's dense backend (pure Go, or LAPACK with
// -tags lapack): fields=201 is the whole sweep, fields=3 a sample of it
// (the fields are independent, so the sweep costs about 201/3 of it);
// powder=50 averages one field (14 T) over the 50-point rule (the
// directions left after the symmetry reduction each cost one
// diagonalization). Run it with -benchtime 1x; it reports the seconds per
// diagonalization and the share of eigenvectors computed.
func BenchmarkSweepKagomeDM12(b *testing.B) {
	m := kagomeDM12(b)
	for _, c := range []struct {
		name       string
		nb, powder int
	}{{"fields=3", 3, 0}, {"fields=201", 201, 0}, {"fields=1/powder=50", 1, 50}} {
		b.Run(c.name, func(b *testing.B) {
			req := sweepRequest(c.nb, c.powder)
			var res *MagnetizationResult
			start := time.Now()
			for b.Loop() {
				var err error
				if res, err = Magnetization(context.Background(), m, req, Options{}); err != nil {
					b.Fatal(err)
				}
			}
			rep := res.Report
			b.ReportMetric(time.Since(start).Seconds()/float64(b.N*rep.Diagonalizations), "s/diagonalization")
			b.ReportMetric(float64(rep.Eigenvectors)/float64(rep.Eigenvectors+rep.EigenvectorsSkipped), "vectors-share")
			b.ReportMetric(float64(rep.Diagonalizations), "diagonalizations")
		})
	}
}
