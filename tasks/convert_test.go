package tasks

import (
	"errors"
	"reflect"
	"testing"

	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
)

func sampleReport() ed.Report {
	return ed.Report{
		Method:    "full diagonalization",
		Route:     "zero-field spectrum, Zeeman term added analytically",
		Dimension: 8,
		Sectors: []ed.Sector{
			{Label: "Sz=-1/2", HasSz: true, Sz: -0.5, Dimension: 3},
			{Label: "Sz=1/2", HasSz: true, Sz: 0.5, Dimension: 3},
			{Label: "all states", Dimension: 2},
		},
		Complex:             true,
		MemoryBytes:         12345,
		Diagonalizations:    3,
		Solver:              "test solver",
		Warnings:            []string{"first", "second"},
		Eigenvectors:        40,
		EigenvectorsSkipped: 7,
		NeglectedWeight:     3e-16,
	}
}

func TestReportRoundTrip(t *testing.T) {
	r := sampleReport()
	p := ReportToProto(r)
	if p.GetSectors()[2].Sz != nil || p.GetSectors()[0].GetSz() != -0.5 {
		t.Errorf("sector sz presence wrong: %v", p.GetSectors())
	}
	if got := ReportFromProto(p); !reflect.DeepEqual(got, r) {
		t.Errorf("report round trip:\n got %+v\nwant %+v", got, r)
	}
	if got := ReportFromProto(nil); !reflect.DeepEqual(got, ed.Report{}) {
		t.Errorf("ReportFromProto(nil) = %+v", got)
	}
}

func TestSpectrumResultRoundTrip(t *testing.T) {
	r := &ed.SpectrumResult{
		Field:    [3]float64{0, -1, 2.5},
		Energies: []float64{-3, -3, 1, 1, 1, 4},
		Levels: []ed.Level{
			{Energy: -3, Degeneracy: 2, HasSz: true, Sz: 0.5, HasTotalSpin: true, TotalSpin: 0.5},
			{Energy: 1, Degeneracy: 3, HasTotalSpin: true, TotalSpin: 1},
			{Energy: 4, Degeneracy: 1},
		},
		Truncated:   true,
		TotalStates: 16,
		Report:      sampleReport(),
	}
	p := SpectrumResultToProto("test cluster", r)
	if p.GetLevels()[1].Sz != nil || p.GetLevels()[2].TotalSpin != nil || p.GetLevels()[0].GetTotalSpin() != 0.5 {
		t.Errorf("level quantum-number presence wrong: %v", p.GetLevels())
	}
	name, got, err := SpectrumResultFromProto(p)
	if err != nil || name != "test cluster" || !reflect.DeepEqual(got, r) {
		t.Errorf("spectrum round trip: %q, %v\n got %+v\nwant %+v", name, err, got, r)
	}
	r.Energies[0] = 99
	if p.GetEnergies()[0] == 99 {
		t.Error("SpectrumResultToProto shares memory with the engine result")
	}
}

func TestThermoResultRoundTrip(t *testing.T) {
	r := &ed.ThermoResult{
		Field:          [3]float64{1, 2, 3},
		Direction:      [3]float64{0.2672612419124244, 0.5345224838248488, 0.8017837257372732},
		Temperature:    []float64{1, 2},
		Energy:         []float64{-1, -0.5},
		SpecificHeat:   []float64{0.1, 0.2},
		Entropy:        []float64{0.3, 0.4},
		Magnetization:  []float64{0.5, 0.6},
		Susceptibility: []float64{0.7, 0.8},
		Report:         sampleReport(),
	}
	p := ThermoResultToProto("t", r)
	if len(p.GetSusceptibilityDirection()) != 3 || p.GetEngine().GetSolver() != "test solver" {
		t.Errorf("thermo message incomplete: %v", p)
	}
	name, got, err := ThermoResultFromProto(p)
	if err != nil || name != "t" || !reflect.DeepEqual(got, r) {
		t.Errorf("thermo round trip: %v\n got %+v\nwant %+v", err, got, r)
	}
}

func TestMagnetizationResultRoundTrip(t *testing.T) {
	r := &ed.MagnetizationResult{
		Field:     []float64{0, 5, 10},
		Direction: [3]float64{0, 0, 1},
		Curves: []ed.Curve{
			{Temperature: 0, Magnetization: []float64{0, 1, 2}, Groups: map[string][]float64{"impurity": {0, -0.1, 1.1}, "top": {0, 1.1, 0.9}}},
			{Temperature: 2, Magnetization: []float64{0, 0.5, 1.5}, Groups: map[string][]float64{}},
		},
		Saturation: 7.5,
		Report:     sampleReport(),
	}
	p := MagnetizationResultToProto("m", r)
	if p.GetCurves()[0].GetGroups()["impurity"].GetValues()[1] != -0.1 || p.GetSaturation() != 7.5 {
		t.Errorf("magnetization message wrong: %v", p)
	}
	name, got, err := MagnetizationResultFromProto(p)
	if err != nil || name != "m" || !reflect.DeepEqual(got, r) {
		t.Errorf("magnetization round trip: %v\n got %+v\nwant %+v", err, got, r)
	}
}

func TestParametersRoundTrip(t *testing.T) {
	s := ed.SpectrumRequest{Field: [3]float64{-1, 0, 0}, Levels: 12, Method: ed.MethodLanczos, Correlations: true,
		Lanczos: ed.LanczosOptions{Tol: 1e-9, Seed: 4}, Sectors: []string{"Sz=0"}}
	if got, err := SpectrumRequestFromProto(SpectrumParametersToProto(s)); err != nil || !reflect.DeepEqual(got, s) {
		t.Errorf("spectrum parameters: %+v, %v; want %+v", got, err, s)
	}
	th := ed.ThermoRequest{Temperatures: []float64{0.5, 1, 300}, Field: [3]float64{0, 0, 5}, Method: ed.MethodFTLM, FTLM: ed.FTLMOptions{Vectors: 8, Seed: 2}}
	if got, err := ThermoRequestFromProto(ThermoParametersToProto(th)); err != nil || !reflect.DeepEqual(got, th) {
		t.Errorf("thermo parameters: %+v, %v; want %+v", got, err, th)
	}
	m := ed.MagnetizationRequest{Temperatures: []float64{0, 2}, Fields: []float64{-1, 0, 1}, Direction: [3]float64{1, 1, 0}}
	if got, err := MagnetizationRequestFromProto(MagnetizationParametersToProto(m)); err != nil || !reflect.DeepEqual(got, m) {
		t.Errorf("magnetization parameters: %+v, %v; want %+v", got, err, m)
	}
	// Absent vectors and nil messages are the defaults.
	if got, err := SpectrumRequestFromProto(nil); err != nil || !reflect.DeepEqual(got, ed.SpectrumRequest{}) {
		t.Errorf("SpectrumRequestFromProto(nil) = %+v, %v", got, err)
	}
	if got, err := MagnetizationRequestFromProto(&frustumv1.MagnetizationParameters{Fields: []float64{1}}); err != nil || got.Direction != [3]float64{} {
		t.Errorf("absent direction: %+v, %v", got, err)
	}
}

func TestVectorLengths(t *testing.T) {
	for _, tc := range []struct {
		name  string
		err   error
		field string
	}{
		{"spectrum field", second(SpectrumRequestFromProto(&frustumv1.SpectrumParameters{Field: []float64{1, 2}})), "field"},
		{"thermo field", second(ThermoRequestFromProto(&frustumv1.ThermoParameters{Temperatures: []float64{1}, Field: []float64{1, 2, 3, 4}})), "field"},
		{"direction", second(MagnetizationRequestFromProto(&frustumv1.MagnetizationParameters{Direction: []float64{1}})), "direction"},
	} {
		var pe *ParameterError
		if !errors.As(tc.err, &pe) || pe.Field != tc.field {
			t.Errorf("%s: error %v, want a *ParameterError naming %q", tc.name, tc.err, tc.field)
		}
	}
}

func second[T any](_ T, err error) error { return err }
