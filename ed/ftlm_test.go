package ed

import (
	"context"
	"errors"
	"math"
	"slices"
	"strings"
	"testing"

	"frustum/cluster"
	"frustum/ed/hilbert"
	"frustum/ed/lanczos"
)

// FTLM against full diagonalization on a frustrated 14-site J1-J2 ring in a
// field along z, from T = 0.05 J to 10 J: every FTLM value lies within a
// few of its own reported errors of the exact one (Jaklic and Prelovsek,
// Phys. Rev. B 49, 5065 (1994), for the method; the tolerance of 4 standard
// errors is common practice, no source), the errors are not all zero, and
// the high-temperature entropy tends to ln 2^N (textbook). The exact values
// are full diagonalization in the same symmetry sectors (every sector dense:
// ExactBelow above every dimension), whose spectra equal the dense route's
// (TestLanczosMatchesFullDiagonalization, and the sector tests of package
// hilbert); TestFTLMExactSectorsMatchDenseRoute ties them to the dense
// route's thermodynamics directly on a smaller ring. The FTLM run uses S^z
// sectors only (no spatial symmetry), so that its sectors are large enough
// to be sampled.
func TestFTLMMatchesFullDiagonalization(t *testing.T) {
	m, err := cluster.Ring(14, cluster.ChainParams{J1: 1, J2: 0.3})
	if err != nil {
		t.Fatal(err)
	}
	temps := []float64{0.05, 0.1, 0.2, 0.3, 0.5, 0.8, 1.2, 2, 3, 5, 10}
	field := [3]float64{0, 0, 0.3}
	full, err := Thermo(context.Background(), m, ThermoRequest{Temperatures: temps, Field: field, Method: MethodFTLM, FTLM: FTLMOptions{ExactBelow: 1 << 20}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	ft, err := Thermo(context.Background(), m, ThermoRequest{Temperatures: temps, Field: field, Method: MethodFTLM, NoSpatialSymmetry: true,
		FTLM: FTLMOptions{Vectors: 20, Steps: 80, Seed: 3, ExactBelow: 100}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if ft.Report.Method != "finite-temperature Lanczos" || ft.EnergyError == nil {
		t.Fatalf("method %q", ft.Report.Method)
	}
	nonzero := 0
	for i, T := range temps {
		for _, q := range []struct {
			name               string
			exact, value, sdev float64
		}{
			{"E", full.Energy[i], ft.Energy[i], ft.EnergyError[i]},
			{"C", full.SpecificHeat[i], ft.SpecificHeat[i], ft.SpecificHeatError[i]},
			{"S", full.Entropy[i], ft.Entropy[i], ft.EntropyError[i]},
			{"M", full.Magnetization[i], ft.Magnetization[i], ft.MagnetizationError[i]},
			{"chi", full.Susceptibility[i], ft.Susceptibility[i], ft.SusceptibilityError[i]},
		} {
			if q.sdev > 0 {
				nonzero++
			}
			if d := math.Abs(q.value - q.exact); d > 4*q.sdev+1e-9*math.Max(1, math.Abs(q.exact)) {
				t.Errorf("T = %g: %s FTLM %.8g +- %.2g, exact %.8g (%.1f sigma)", T, q.name, q.value, q.sdev, q.exact, d/q.sdev)
			}
		}
	}
	if nonzero == 0 {
		t.Error("every FTLM error is zero: nothing was sampled")
	}
	hot, err := Thermo(context.Background(), m, ThermoRequest{Temperatures: []float64{1e6}, Method: MethodFTLM}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if want := 14 * math.Ln2; math.Abs(hot.Entropy[0]-want) > 1e-5 {
		t.Errorf("S(T -> inf) = %v, want ln 2^14 = %v", hot.Entropy[0], want)
	}
}

// The exact-sector route (every symmetry sector dense) reproduces the dense
// route's thermodynamics (full diagonalization in S^z sectors, an
// independent construction) on a 10-site ring with DM and a field along z
// (derivation: both are exact traces of the same Hamiltonian).
func TestFTLMExactSectorsMatchDenseRoute(t *testing.T) {
	m, err := cluster.Ring(10, cluster.ChainParams{J1: 1, J2: 0.2, DM: [3]float64{0, 0, 0.2}})
	if err != nil {
		t.Fatal(err)
	}
	temps := []float64{0.1, 0.5, 2}
	field := [3]float64{0, 0, 0.4}
	dense, err := Thermo(context.Background(), m, ThermoRequest{Temperatures: temps, Field: field, Method: MethodFull}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	ex, err := Thermo(context.Background(), m, ThermoRequest{Temperatures: temps, Field: field, Method: MethodFTLM, FTLM: FTLMOptions{ExactBelow: 1 << 20}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for i := range temps {
		for _, q := range [][2]float64{{dense.Energy[i], ex.Energy[i]}, {dense.SpecificHeat[i], ex.SpecificHeat[i]},
			{dense.Entropy[i], ex.Entropy[i]}, {dense.Magnetization[i], ex.Magnetization[i]}, {dense.Susceptibility[i], ex.Susceptibility[i]}} {
			if math.Abs(q[0]-q[1]) > 1e-9*math.Max(1, math.Abs(q[0])) {
				t.Errorf("T = %g: dense %.12g, exact sectors %.12g", temps[i], q[0], q[1])
			}
		}
		if ex.EnergyError[i] != 0 {
			t.Errorf("exact sectors report a statistical error %v", ex.EnergyError[i])
		}
	}
}

// Magnetization curves by FTLM against the exact-sector route (every
// sector dense, see TestFTLMExactSectorsMatchDenseRoute) on a 14-site ring:
// within 4 of their reported errors (common practice, no source), and one
// set of samples serves every field.
func TestFTLMMagnetization(t *testing.T) {
	m, err := cluster.Ring(14, cluster.ChainParams{J1: 1})
	if err != nil {
		t.Fatal(err)
	}
	req := MagnetizationRequest{Temperatures: []float64{0.2, 1, 3}, Fields: []float64{0, 0.5, 1, 2, 3}, Susceptibility: true}
	exact := req
	exact.Method, exact.FTLM = MethodFTLM, FTLMOptions{ExactBelow: 1 << 20}
	ex, err := Magnetization(context.Background(), m, exact, Options{})
	if err != nil {
		t.Fatal(err)
	}
	stoch := req
	stoch.Method, stoch.NoSpatialSymmetry, stoch.FTLM = MethodFTLM, true, FTLMOptions{Vectors: 16, Steps: 60, ExactBelow: 100, Seed: 5}
	ft, err := Magnetization(context.Background(), m, stoch, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for ti := range req.Temperatures {
		a, b := ex.Curves[ti], ft.Curves[ti]
		for bi := range req.Fields {
			if d := math.Abs(a.Magnetization[bi] - b.Magnetization[bi]); d > 4*b.MagnetizationError[bi]+1e-9 {
				t.Errorf("T = %g, B = %g: M FTLM %v +- %v, exact %v", a.Temperature, req.Fields[bi], b.Magnetization[bi], b.MagnetizationError[bi], a.Magnetization[bi])
			}
			if d := math.Abs(a.Susceptibility[bi] - b.Susceptibility[bi]); d > 4*b.SusceptibilityError[bi]+1e-9 {
				t.Errorf("T = %g, B = %g: chi FTLM %v +- %v, exact %v", a.Temperature, req.Fields[bi], b.Susceptibility[bi], b.SusceptibilityError[bi], a.Susceptibility[bi])
			}
		}
	}
	if ft.Report.Method != "finite-temperature Lanczos" {
		t.Errorf("method %q", ft.Report.Method)
	}
	// T = 0 is refused by FTLM with the field named.
	zero := stoch
	zero.Temperatures = []float64{0}
	var re *RequestError
	if _, err := Magnetization(context.Background(), m, zero, Options{}); !errors.As(err, &re) || re.Field != "temperatures[0]" {
		t.Errorf("T = 0: %v", err)
	}
}

// The per-field route (M_n does not commute with H0): every field is its own
// FTLM run on H(B), M = <M_n> from the moment's observable weights, chi by a
// central difference over B +- h with the same random vectors. Checked
// against the dense route (full diagonalization with eigenvectors, chi from
// the Kubo sum with its Van Vleck part: an independent construction).

// defectRing is a J1-J2 ring (J2 = 0.3 J1) whose site 0 has g = 2.6 among
// g = 2: M_n = sum_i g_i S_i^z does not commute with H0, though S^z is
// conserved. Its declared symmetries (translations) no longer hold; the
// engine finds the reflection through the defect.
func defectRing(t *testing.T, n int) *cluster.Model {
	t.Helper()
	m, err := cluster.Ring(n, cluster.ChainParams{J1: 1, J2: 0.3})
	if err != nil {
		t.Fatal(err)
	}
	m.Sites[0].G = cluster.IsotropicG(2.6)
	m.Symmetries = nil
	return m
}

// ftlmTemps spans 0.05 J to 10 J (J = 1 K).
var ftlmTemps = []float64{0.05, 0.1, 0.2, 0.3, 0.5, 0.8, 1.2, 2, 3, 5, 10}

// checkThermoAgainstDense compares every quantity of an FTLM result with
// the dense one: within 4 of its own errors (common practice, no source)
// plus 1e-9 relative for the exact sectors' rounding, and the errors of M
// and chi not all zero.
func checkThermoAgainstDense(t *testing.T, name string, dense, ft *ThermoResult) {
	t.Helper()
	nonzero := map[string]bool{}
	for i, T := range dense.Temperature {
		for _, q := range []struct {
			name               string
			exact, value, sdev float64
		}{
			{"E", dense.Energy[i], ft.Energy[i], ft.EnergyError[i]},
			{"C", dense.SpecificHeat[i], ft.SpecificHeat[i], ft.SpecificHeatError[i]},
			{"S", dense.Entropy[i], ft.Entropy[i], ft.EntropyError[i]},
			{"M", dense.Magnetization[i], ft.Magnetization[i], ft.MagnetizationError[i]},
			{"chi", dense.Susceptibility[i], ft.Susceptibility[i], ft.SusceptibilityError[i]},
		} {
			if math.IsNaN(q.value) || math.IsNaN(q.sdev) {
				t.Errorf("%s T = %g: %s is %v +- %v", name, T, q.name, q.value, q.sdev)
			}
			if q.sdev > 0 {
				nonzero[q.name] = true
			}
			if d := math.Abs(q.value - q.exact); d > 4*q.sdev+1e-9*math.Max(1, math.Abs(q.exact)) {
				t.Errorf("%s T = %g: %s FTLM %.8g +- %.2g, dense %.8g (%.1f sigma)", name, T, q.name, q.value, q.sdev, q.exact, d/q.sdev)
			}
		}
	}
	for _, q := range []string{"M", "chi"} {
		if !nonzero[q] {
			t.Errorf("%s: every error of %s is zero: nothing was sampled", name, q)
		}
	}
}

// A 12-site defect ring in 0.5 T along z, sampled in S^z sectors (no
// spatial symmetry, so that the sectors are large enough to be sampled),
// against the dense route.
func TestFTLMDefectGMatchesDense(t *testing.T) {
	m := defectRing(t, 12)
	field := [3]float64{0, 0, 0.5}
	dense, err := Thermo(context.Background(), m, ThermoRequest{Temperatures: ftlmTemps, Field: field, Method: MethodFull}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	ft, err := Thermo(context.Background(), m, ThermoRequest{Temperatures: ftlmTemps, Field: field, Method: MethodFTLM, NoSpatialSymmetry: true,
		FTLM: FTLMOptions{Vectors: 20, Steps: 80, Seed: 3, ExactBelow: 100}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if ft.Report.Method != "finite-temperature Lanczos" || !strings.Contains(ft.Report.Route, "3 runs at this field") {
		t.Errorf("method %q, route %q", ft.Report.Method, ft.Report.Route)
	}
	checkThermoAgainstDense(t, "defect g", dense, ft)
}

// A 10-site ring with DM D = 0.3 J along z and 0.8 T along x (no conserved
// S^z, complex sectors): the whole space sampled as one sector, against the
// dense route; and every sector of the translations dense (ExactBelow above
// every dimension), which must give the dense route's M to 1e-9 and its chi
// to 1e-6 (the central difference's truncation error is below 2e-7 of chi,
// see ftlmStep; derivation: both are exact traces of the same Hamiltonian).
func TestFTLMDMTransverseMatchesDense(t *testing.T) {
	m, err := cluster.Ring(10, cluster.ChainParams{J1: 1, DM: [3]float64{0, 0, 0.3}})
	if err != nil {
		t.Fatal(err)
	}
	field := [3]float64{0.8, 0, 0}
	dense, err := Thermo(context.Background(), m, ThermoRequest{Temperatures: ftlmTemps, Field: field, Method: MethodFull}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	ft, err := Thermo(context.Background(), m, ThermoRequest{Temperatures: ftlmTemps, Field: field, Method: MethodFTLM, NoSpatialSymmetry: true,
		FTLM: FTLMOptions{Vectors: 20, Steps: 80, Seed: 3, ExactBelow: 100}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !ft.Report.Complex {
		t.Error("the DM ring in a transverse field was not complex")
	}
	checkThermoAgainstDense(t, "DM, transverse field", dense, ft)
	ex, err := Thermo(context.Background(), m, ThermoRequest{Temperatures: ftlmTemps, Field: field, Method: MethodFTLM, FTLM: FTLMOptions{ExactBelow: 1 << 20}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for i, T := range ftlmTemps {
		if d := math.Abs(ex.Magnetization[i] - dense.Magnetization[i]); d > 1e-9*math.Max(1, math.Abs(dense.Magnetization[i])) || ex.MagnetizationError[i] != 0 {
			t.Errorf("exact sectors, T = %g: M %.12g +- %g, dense %.12g", T, ex.Magnetization[i], ex.MagnetizationError[i], dense.Magnetization[i])
		}
		if d := math.Abs(ex.Susceptibility[i] - dense.Susceptibility[i]); d > 1e-6*math.Abs(dense.Susceptibility[i]) || ex.SusceptibilityError[i] != 0 {
			t.Errorf("exact sectors, T = %g: chi %.12g +- %g, dense %.12g", T, ex.Susceptibility[i], ex.SusceptibilityError[i], dense.Susceptibility[i])
		}
	}
}

// Magnetization curves of a 10-site defect ring by one FTLM run per field
// (three with chi), against the dense route's per-field diagonalization at
// every field and temperature: within 4 errors (common practice, no
// source), errors nonzero, M = 0 exactly at B = 0 (time reversal) with chi
// there from B = +-h alone. The route says the cost is per field, progress
// comes per field, and T = 0 is still refused with the field named.
func TestFTLMPerFieldMagnetization(t *testing.T) {
	m := defectRing(t, 10)
	req := MagnetizationRequest{Temperatures: []float64{0.05, 0.3, 1, 3, 10}, Fields: []float64{0, 0.5, 1.5, 3}, Susceptibility: true}
	dense := req
	dense.Method = MethodFull
	ex, err := Magnetization(context.Background(), m, dense, Options{})
	if err != nil {
		t.Fatal(err)
	}
	stoch := req
	stoch.Method, stoch.NoSpatialSymmetry, stoch.FTLM = MethodFTLM, true, FTLMOptions{Vectors: 16, Steps: 60, ExactBelow: 50, Seed: 5}
	var progress []int
	opt := Options{Progress: func(stage string, done, total int) {
		if stage == "FTLM fields" {
			if total != len(req.Fields) {
				t.Errorf("progress: total %d, want %d fields", total, len(req.Fields))
			}
			progress = append(progress, done)
		}
	}}
	ft, err := Magnetization(context.Background(), m, stoch, opt)
	if err != nil {
		t.Fatal(err)
	}
	if want := []int{0, 1, 2, 3, 4}; !slices.Equal(progress, want) {
		t.Errorf("progress per field %v, want %v", progress, want)
	}
	if r := ft.Report.Route; !strings.Contains(r, "the cost is per field") || !strings.Contains(r, "11 runs in all") {
		t.Errorf("route %q does not state the cost per field (3 + 3 + 3 + 2 runs)", r)
	}
	if ft.Report.Diagonalizations == 0 || ft.Report.Matvecs == 0 {
		t.Errorf("report: %d sector runs, %d matvecs", ft.Report.Diagonalizations, ft.Report.Matvecs)
	}
	nonzero := [2]bool{}
	for ti := range req.Temperatures {
		a, b := ex.Curves[ti], ft.Curves[ti]
		for bi, B := range req.Fields {
			if B == 0 && (b.Magnetization[bi] != 0 || b.MagnetizationError[bi] != 0) {
				t.Errorf("T = %g, B = 0: M = %v +- %v, want 0 exactly", a.Temperature, b.Magnetization[bi], b.MagnetizationError[bi])
			}
			if d := math.Abs(a.Magnetization[bi] - b.Magnetization[bi]); d > 4*b.MagnetizationError[bi]+1e-9 {
				t.Errorf("T = %g, B = %g: M FTLM %v +- %v, dense %v", a.Temperature, B, b.Magnetization[bi], b.MagnetizationError[bi], a.Magnetization[bi])
			}
			if d := math.Abs(a.Susceptibility[bi] - b.Susceptibility[bi]); d > 4*b.SusceptibilityError[bi]+1e-9 {
				t.Errorf("T = %g, B = %g: chi FTLM %v +- %v, dense %v", a.Temperature, B, b.Susceptibility[bi], b.SusceptibilityError[bi], a.Susceptibility[bi])
			}
			nonzero[0] = nonzero[0] || b.MagnetizationError[bi] > 0
			nonzero[1] = nonzero[1] || b.SusceptibilityError[bi] > 0
		}
	}
	if !nonzero[0] || !nonzero[1] {
		t.Errorf("errors of M, chi nonzero somewhere: %v", nonzero)
	}
	// Without chi: one run per field, none at B = 0.
	noChi := stoch
	noChi.Susceptibility = false
	rep, err := PlanMagnetization(m, noChi, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(rep.Route, "3 runs in all") {
		t.Errorf("route without chi %q", rep.Route)
	}
	zero := stoch
	zero.Temperatures = []float64{1, 0}
	var re *RequestError
	if _, err := Magnetization(context.Background(), m, zero, Options{}); !errors.As(err, &re) || re.Field != "temperatures[1]" {
		t.Errorf("T = 0: %v", err)
	}
}

// The per-field route fills M and chi (no NaN, no warning about them), its
// warnings still say that the values are statistical estimates with errors,
// and a fixed seed reproduces the result exactly while another seed gives
// other samples (API contract of FTLMOptions.Seed). Also at zero field,
// where M = 0 and chi comes from B = +-h.
func TestFTLMPerFieldReproducible(t *testing.T) {
	m := defectRing(t, 10)
	for _, field := range [][3]float64{{0, 0, 0.7}, {}} {
		req := ThermoRequest{Temperatures: []float64{0.2, 1, 4}, Field: field, Method: MethodFTLM, NoSpatialSymmetry: true,
			FTLM: FTLMOptions{Vectors: 6, Steps: 40, Seed: 11, ExactBelow: 50}}
		a, err := Thermo(context.Background(), m, req, Options{})
		if err != nil {
			t.Fatal(err)
		}
		b, err := Thermo(context.Background(), m, req, Options{})
		if err != nil {
			t.Fatal(err)
		}
		req.FTLM.Seed = 12
		c, err := Thermo(context.Background(), m, req, Options{})
		if err != nil {
			t.Fatal(err)
		}
		for _, v := range [][2][]float64{{a.Magnetization, b.Magnetization}, {a.Susceptibility, b.Susceptibility}, {a.Energy, b.Energy},
			{a.MagnetizationError, b.MagnetizationError}, {a.SusceptibilityError, b.SusceptibilityError}} {
			if !slices.Equal(v[0], v[1]) {
				t.Errorf("B = %v: the same seed gave %v and %v", field, v[0], v[1])
			}
		}
		if slices.Equal(a.Susceptibility, c.Susceptibility) || slices.Equal(a.Energy, c.Energy) {
			t.Errorf("B = %v: seeds 11 and 12 gave the same samples", field)
		}
		for i := range a.Magnetization {
			if math.IsNaN(a.Magnetization[i]) || math.IsNaN(a.Susceptibility[i]) || math.IsNaN(a.MagnetizationError[i]) || math.IsNaN(a.SusceptibilityError[i]) || a.SusceptibilityError[i] == 0 {
				t.Errorf("B = %v: M %v +- %v, chi %v +- %v", field, a.Magnetization[i], a.MagnetizationError[i], a.Susceptibility[i], a.SusceptibilityError[i])
			}
			if field == ([3]float64{}) && a.Magnetization[i] != 0 {
				t.Errorf("zero field: M = %v", a.Magnetization[i])
			}
		}
		statistical := false
		for _, w := range a.Report.Warnings {
			if strings.Contains(w, "NaN") {
				t.Errorf("warning about NaN: %q", w)
			}
			statistical = statistical || strings.Contains(w, "statistical estimates") && strings.Contains(w, "error")
		}
		if !statistical {
			t.Errorf("no warning that the values are statistical estimates: %q", a.Report.Warnings)
		}
	}
}

// The memory plan of FTLM counts what the route allocates per sector
// (basis, group tables, CSR matrix, lanczos.SampleVectors + 1 vectors, one
// more for M_n r on the per-field route), not a Lanczos basis of 40
// vectors: recomputed here from hilbert.EstimateMemory of the largest
// sector (derivation from the allocations in sampleOperator and
// perFieldSamples). A limit that this fits but 40 vectors do not is
// accepted.
func TestFTLMMemoryPlan(t *testing.T) {
	m, err := cluster.Ring(16, cluster.ChainParams{J1: 1})
	if err != nil {
		t.Fatal(err)
	}
	d := defectRing(t, 16)
	// The largest sectors: S^z = +-1 of the one-g ring, whose S^z = 0 is
	// split by the spin inversion, and S^z = 0 of the defect ring.
	for _, c := range []struct {
		name    string
		m       *cluster.Model
		twoSz   int
		vectors int64
	}{{"one g", m, 2, lanczos.SampleVectors + 1}, {"defect g", d, 0, lanczos.SampleVectors + 2}} {
		req := ThermoRequest{Temperatures: []float64{1}, Field: [3]float64{0, 0, 1}, Method: MethodFTLM, NoSpatialSymmetry: true}
		rep, err := PlanThermo(c.m, req, Options{})
		if err != nil {
			t.Fatal(err)
		}
		st := newSetup(c.m, [3]float64{0, 0, 1}, true)
		op := st.h0
		if !st.uniform {
			op = st.hamiltonian(1)
		}
		mem, err := hilbert.EstimateMemory(toHilbert(st.sys, op), c.twoSz, nil, hilbert.Irrep{})
		if err != nil {
			t.Fatal(err)
		}
		want := mem.Basis + mem.Tables + mem.Matrix + c.vectors*mem.Vector + baseOverhead
		if rep.MemoryBytes != want {
			t.Errorf("%s: plan %d bytes, want %d (basis %d, tables %d, matrix %d, %d vectors of %d)", c.name, rep.MemoryBytes, want, mem.Basis, mem.Tables, mem.Matrix, c.vectors, mem.Vector)
		}
		lanczos40 := mem.Basis + mem.Tables + mem.Matrix + 42*mem.Vector + baseOverhead
		if _, err := PlanThermo(c.m, req, Options{Limits: Limits{MaxMemory: (want + lanczos40) / 2}}); err != nil {
			t.Errorf("%s: a limit between the FTLM need and a 40-vector basis was refused: %v", c.name, err)
		}
		var le *LimitError
		if _, err := PlanThermo(c.m, req, Options{Limits: Limits{MaxMemory: mem.Basis}}); !errors.As(err, &le) {
			t.Errorf("%s: a limit below the basis: %v", c.name, err)
		}
	}
}
