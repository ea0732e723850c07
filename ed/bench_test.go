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
