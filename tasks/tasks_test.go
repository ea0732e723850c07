package tasks

import (
	"context"
	"errors"
	"math"
	"testing"

	"google.golang.org/protobuf/proto"

	"frustum/cluster"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

// dimer is the Heisenberg dimer H = J S1.S2, J = 10 K, g = 2 on one site and
// 2.2 on the other (so the field breaks SU(2)), groups "a" and "b".
func dimer() *frustumv1.Cluster {
	return &frustumv1.Cluster{
		Name: "dimer",
		Sites: []*frustumv1.Site{
			{Label: "a", Group: "a"},
			{Label: "b", Group: "b", G: proto.Float64(2.2)},
		},
		Bonds: []*frustumv1.Bond{{A: "a", B: "b", Exchange: proto.Float64(10)}},
	}
}

func TestSpectrum(t *testing.T) {
	r, err := Spectrum(context.Background(), dimer(), nil, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	// Singlet -3J/4 and triplet J/4 (EXACT, textbook).
	want := []float64{-7.5, 2.5, 2.5, 2.5}
	if len(r.GetEnergies()) != len(want) {
		t.Fatalf("energies %v, want %v", r.GetEnergies(), want)
	}
	for i, e := range r.GetEnergies() {
		if math.Abs(e-want[i]) > 1e-9 {
			t.Errorf("energies[%d] = %v, want %v", i, e, want[i])
		}
	}
	if r.GetClusterName() != "dimer" || r.GetTotalStates() != 4 || len(r.GetField()) != 3 || len(r.GetLevels()) != 2 {
		t.Errorf("result incomplete: %v", r)
	}
	e := r.GetEngine()
	if e.GetMethod() == "" || e.GetSolver() == "" || e.GetDimension() != 4 || len(e.GetSectors()) == 0 || e.GetMemoryBytes() <= 0 {
		t.Errorf("engine report incomplete: %v", e)
	}
}

func TestThermoAndMagnetization(t *testing.T) {
	th, err := Thermo(context.Background(), dimer(), &frustumv1.ThermoParameters{Temperatures: []float64{1, 10}, Field: []float64{0, 0, 1}}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for name, v := range map[string][]float64{"temperature": th.GetTemperature(), "energy": th.GetEnergy(), "specificHeat": th.GetSpecificHeat(),
		"entropy": th.GetEntropy(), "magnetization": th.GetMagnetization(), "susceptibility": th.GetSusceptibility()} {
		if len(v) != 2 {
			t.Errorf("thermo %s: %v", name, v)
		}
	}
	if len(th.GetSusceptibilityDirection()) != 3 || th.GetEngine().GetMethod() == "" {
		t.Errorf("thermo result incomplete: %v", th)
	}

	m, err := Magnetization(context.Background(), dimer(), &frustumv1.MagnetizationParameters{
		Temperatures: []float64{0, 2}, Fields: []float64{0, 10, 20}, Direction: []float64{0, 0, 2},
	}, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if len(m.GetCurves()) != 2 || len(m.GetField()) != 3 || m.GetEngine().GetMethod() == "" {
		t.Fatalf("magnetization result incomplete: %v", m)
	}
	// Saturation g_a S + g_b S = 2.1 mu_B.
	if math.Abs(m.GetSaturation()-2.1) > 1e-12 {
		t.Errorf("saturation %v, want 2.1", m.GetSaturation())
	}
	for _, c := range m.GetCurves() {
		for i := range c.GetMagnetization() {
			sum := c.GetGroups()["a"].GetValues()[i] + c.GetGroups()["b"].GetValues()[i]
			if math.Abs(sum-c.GetMagnetization()[i]) > 1e-9 {
				t.Errorf("T = %v: groups add to %v, M = %v", c.GetTemperature(), sum, c.GetMagnetization()[i])
			}
		}
	}
}

func TestErrorsPassThrough(t *testing.T) {
	ctx := context.Background()
	var pe *ParameterError
	if _, err := Spectrum(ctx, nil, nil, ed.Options{}); !errors.As(err, &pe) || pe.Field != "cluster" {
		t.Errorf("nil cluster: %v", err)
	}
	if _, err := Spectrum(ctx, dimer(), &frustumv1.SpectrumParameters{Field: []float64{1}}, ed.Options{}); !errors.As(err, &pe) || pe.Field != "field" {
		t.Errorf("short field: %v", err)
	}
	if _, err := Magnetization(ctx, dimer(), &frustumv1.MagnetizationParameters{Temperatures: []float64{1}, Fields: []float64{1}, Direction: []float64{1, 0}}, ed.Options{}); !errors.As(err, &pe) || pe.Field != "direction" {
		t.Errorf("short direction: %v", err)
	}
	bad := dimer()
	bad.Bonds[0].B = "nowhere"
	var fe *cluster.FieldError
	if _, err := Thermo(ctx, bad, &frustumv1.ThermoParameters{Temperatures: []float64{1}}, ed.Options{}); !errors.As(err, &fe) {
		t.Errorf("bad cluster: %v, want a *cluster.FieldError", err)
	}
	var re *ed.RequestError
	if _, err := Thermo(ctx, dimer(), &frustumv1.ThermoParameters{Temperatures: []float64{-1}}, ed.Options{}); !errors.As(err, &re) {
		t.Errorf("negative temperature: %v, want an *ed.RequestError", err)
	}
	var le *ed.LimitError
	if _, err := Spectrum(ctx, dimer(), nil, ed.Options{Limits: ed.Limits{MaxMemory: 1}}); !errors.As(err, &le) {
		t.Errorf("1-byte limit: %v, want an *ed.LimitError", err)
	}
}
