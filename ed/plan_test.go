package ed

import (
	"context"
	"errors"
	"reflect"
	"testing"

	"frustum/cluster"
)

// Invariant, no source: the plan is what the task then does (route,
// sectors, memory), and a task over the memory limit is refused before it
// starts with both figures in the error.
func TestPlanMatchesRun(t *testing.T) {
	m := cluster.DefectMultimer(cluster.MultimerParams{JPlanar: 180, JDefect: 20, GHost: 2.1, GCentre: 2.3, DMPlanar: 5})
	ctx := context.Background()
	sreq := SpectrumRequest{Field: [3]float64{1, 0, 2}}
	plan, err := PlanSpectrum(m, sreq, Options{})
	if err != nil {
		t.Fatal(err)
	}
	run, err := Spectrum(ctx, m, sreq, Options{})
	if err != nil {
		t.Fatal(err)
	}
	run.Report.Diagonalizations, run.Report.Warnings = 0, nil
	if !reflect.DeepEqual(plan, run.Report) {
		t.Errorf("spectrum plan %+v, run %+v", plan, run.Report)
	}
	treq := ThermoRequest{Temperatures: []float64{1, 10}, Field: [3]float64{0, 0, 3}}
	tplan, err := PlanThermo(m, treq, Options{})
	if err != nil {
		t.Fatal(err)
	}
	trun, err := Thermo(ctx, m, treq, Options{})
	if err != nil {
		t.Fatal(err)
	}
	trun.Report.Diagonalizations = 0
	if !reflect.DeepEqual(tplan, trun.Report) {
		t.Errorf("thermo plan %+v, run %+v", tplan, trun.Report)
	}
	mreq := MagnetizationRequest{Temperatures: []float64{2}, Fields: []float64{0, 5}, Direction: [3]float64{1, 1, 0}}
	mplan, err := PlanMagnetization(m, mreq, Options{})
	if err != nil {
		t.Fatal(err)
	}
	mrun, err := Magnetization(ctx, m, mreq, Options{})
	if err != nil {
		t.Fatal(err)
	}
	// Counts of the run (the plan cannot know how many eigenvectors the
	// eigenvalues will call for).
	mrun.Report.Diagonalizations, mrun.Report.Eigenvectors, mrun.Report.EigenvectorsSkipped, mrun.Report.NeglectedWeight = 0, 0, 0, 0
	if !reflect.DeepEqual(mplan, mrun.Report) {
		t.Errorf("magnetization plan %+v, run %+v", mplan, mrun.Report)
	}
}

func TestLimitRefusedBeforeWork(t *testing.T) {
	m := cluster.Chain(10, 0.5, 1, true)
	opt := Options{Limits: Limits{MaxMemory: 1 << 10}}
	_, err := Spectrum(context.Background(), m, SpectrumRequest{}, opt)
	var le *LimitError
	if !errors.As(err, &le) {
		t.Fatalf("got %v, want a *LimitError", err)
	}
	if le.Limit != 1<<10 || le.Need <= le.Limit || le.Dimension != 1024 || le.LargestSector != 252 {
		t.Errorf("limit error %+v: want limit 1024 B, need above it, dimension 1024, largest block 252", le)
	}
	if _, err := PlanThermo(m, ThermoRequest{Temperatures: []float64{1}}, opt); !errors.As(err, &le) {
		t.Errorf("PlanThermo: got %v, want a *LimitError", err)
	}
}

// A panic in a worker comes back as a *PanicError (common practice, no source).
func TestParallelRecoversPanic(t *testing.T) {
	err := parallel(context.Background(), 4, nil, Options{Workers: 2}, "test", func(i int) error {
		if i == 2 {
			panic("boom")
		}
		return nil
	})
	var pe *PanicError
	if !errors.As(err, &pe) || pe.Value != "boom" {
		t.Fatalf("got %v, want a *PanicError carrying \"boom\"", err)
	}
}

// Thermodynamic identity chi = dM/dB (no source needed): on blocks wider
// than one product panel (462 states), the paneled Van Vleck sum agrees with
// a central difference of the magnetization task.
func TestKuboPanelsMatchFiniteDifference(t *testing.T) {
	m := cluster.Chain(11, 0.5, 5, false)
	m.Sites[3].G = cluster.IsotropicG(2.4)
	const B, h, T = 2.0, 1e-3, 3.0
	th, err := Thermo(context.Background(), m, ThermoRequest{Temperatures: []float64{T}, Field: [3]float64{0, 0, B}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	mg, err := Magnetization(context.Background(), m, MagnetizationRequest{Temperatures: []float64{T}, Fields: []float64{B - 2*h, B - h, B + h, B + 2*h}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	c := mg.Curves[0].Magnetization
	fd := (c[0] - 8*c[1] + 8*c[2] - c[3]) / (12 * h)
	if d := th.Susceptibility[0] - fd; d > 1e-7*fd || d < -1e-7*fd {
		t.Errorf("chi = %.10g, five-point dM/dB = %.10g", th.Susceptibility[0], fd)
	}
}
