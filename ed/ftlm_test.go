package ed

import (
	"context"
	"errors"
	"math"
	"testing"

	"frustum/cluster"
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
