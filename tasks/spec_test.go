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

func TestTaskName(t *testing.T) {
	for _, tc := range []struct {
		spec *frustumv1.JobSpec
		want string
	}{
		{nil, ""},
		{&frustumv1.JobSpec{Cluster: dimer()}, ""},
		{&frustumv1.JobSpec{Task: &frustumv1.JobSpec_Spectrum{}}, "spectrum"},
		{&frustumv1.JobSpec{Task: &frustumv1.JobSpec_Thermo{Thermo: &frustumv1.ThermoParameters{}}}, "thermo"},
		{&frustumv1.JobSpec{Task: &frustumv1.JobSpec_Magnetization{}}, "magnetization"},
	} {
		if got := TaskName(tc.spec); got != tc.want {
			t.Errorf("TaskName(%v) = %q, want %q", tc.spec, got, tc.want)
		}
	}
}

// TestRunEqualsTasks checks that Run gives the very message of the task
// functions, and Plan the report that the run carries.
func TestRunEqualsTasks(t *testing.T) {
	ctx := context.Background()
	c := dimer()
	sp := &frustumv1.SpectrumParameters{Field: []float64{0, 0, 1}}
	th := &frustumv1.ThermoParameters{Temperatures: []float64{1, 10}, Field: []float64{0, 1, 0}}
	mp := &frustumv1.MagnetizationParameters{Temperatures: []float64{0, 2}, Fields: []float64{0, 5, 10}, Direction: []float64{1, 0, 0}}
	wantSp, err := Spectrum(ctx, c, sp, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	wantTh, err := Thermo(ctx, c, th, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	wantM, err := Magnetization(ctx, c, mp, ed.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		spec *frustumv1.JobSpec
		want interface {
			proto.Message
			GetEngine() *frustumv1.EngineReport
		}
	}{
		{&frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Spectrum{Spectrum: sp}}, wantSp},
		{&frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Thermo{Thermo: th}}, wantTh},
		{&frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Magnetization{Magnetization: mp}}, wantM},
	} {
		got, err := Run(ctx, tc.spec, ed.Options{})
		if err != nil {
			t.Fatalf("%s: %v", TaskName(tc.spec), err)
		}
		if !proto.Equal(got, tc.want) {
			t.Errorf("%s: Run gives\n%v\nwant\n%v", TaskName(tc.spec), got, tc.want)
		}
		plan, err := Plan(tc.spec, ed.Options{})
		if err != nil {
			t.Fatalf("%s: Plan: %v", TaskName(tc.spec), err)
		}
		eng := tc.want.GetEngine()
		if plan.GetMethod() != eng.GetMethod() || plan.GetRoute() != eng.GetRoute() || plan.GetMemoryBytes() != eng.GetMemoryBytes() ||
			plan.GetDimension() != eng.GetDimension() || len(plan.GetSectors()) != len(eng.GetSectors()) {
			t.Errorf("%s: plan %v differs from the run's report %v", TaskName(tc.spec), plan, eng)
		}
	}
	// A nil parameters message is the task's defaults.
	got, err := Run(ctx, &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Spectrum{}}, ed.Options{})
	if err != nil || len(got.(*frustumv1.SpectrumResult).GetEnergies()) != 4 {
		t.Errorf("spectrum with nil parameters: %v, %v", got, err)
	}
}

// TestSpecErrorPaths checks that every error path is relative to a request
// holding the spec in "spec".
func TestSpecErrorPaths(t *testing.T) {
	withBond := func(mod func(b *frustumv1.Bond)) *frustumv1.Cluster {
		c := dimer()
		mod(c.Bonds[0])
		return c
	}
	thermo := func(c *frustumv1.Cluster, p *frustumv1.ThermoParameters) *frustumv1.JobSpec {
		return &frustumv1.JobSpec{Cluster: c, Task: &frustumv1.JobSpec_Thermo{Thermo: p}}
	}
	ok := &frustumv1.ThermoParameters{Temperatures: []float64{1}}
	for _, tc := range []struct {
		name string
		spec *frustumv1.JobSpec
		path string
	}{
		{"nil spec", nil, "spec"},
		{"no task", &frustumv1.JobSpec{Cluster: dimer()}, "spec.task"},
		{"no cluster", thermo(nil, ok), "spec.cluster"},
		{"unknown site", thermo(withBond(func(b *frustumv1.Bond) { b.B = "nowhere" }), ok), "spec.cluster.bonds[0].b"},
		{"self bond", thermo(withBond(func(b *frustumv1.Bond) { b.B = "a" }), ok), "spec.cluster.bonds[0]"},
		{"NaN exchange", thermo(withBond(func(b *frustumv1.Bond) { b.Exchange = proto.Float64(math.NaN()) }), ok), "spec.cluster.bonds[0].exchange"},
		{"negative temperature", thermo(dimer(), &frustumv1.ThermoParameters{Temperatures: []float64{1, -1}}), "spec.thermo.temperatures[1]"},
		{"no temperatures", thermo(dimer(), nil), "spec.thermo.temperatures"},
		{"short field", thermo(dimer(), &frustumv1.ThermoParameters{Temperatures: []float64{1}, Field: []float64{1}}), "spec.thermo.field"},
		{"infinite field", &frustumv1.JobSpec{Cluster: dimer(), Task: &frustumv1.JobSpec_Spectrum{Spectrum: &frustumv1.SpectrumParameters{Field: []float64{0, math.Inf(1), 0}}}}, "spec.spectrum.field[1]"},
		{"no fields", &frustumv1.JobSpec{Cluster: dimer(), Task: &frustumv1.JobSpec_Magnetization{Magnetization: &frustumv1.MagnetizationParameters{Temperatures: []float64{1}}}}, "spec.magnetization.fields"},
		{"short direction", &frustumv1.JobSpec{Cluster: dimer(), Task: &frustumv1.JobSpec_Magnetization{Magnetization: &frustumv1.MagnetizationParameters{
			Temperatures: []float64{1}, Fields: []float64{1}, Direction: []float64{1, 0}}}}, "spec.magnetization.direction"},
	} {
		for _, fn := range []struct {
			name string
			call func() error
		}{
			{"Plan", func() error { _, err := Plan(tc.spec, ed.Options{}); return err }},
			{"Run", func() error { _, err := Run(context.Background(), tc.spec, ed.Options{}); return err }},
		} {
			err := fn.call()
			if got := errorPath(err); got != tc.path {
				t.Errorf("%s: %s error %v has the path %q, want %q", tc.name, fn.name, err, got, tc.path)
			}
		}
	}
}

// errorPath returns the (first) path that err names.
func errorPath(err error) string {
	var fes cluster.FieldErrors
	var re *ed.RequestError
	var pe *ParameterError
	switch {
	case errors.As(err, &fes):
		return fes[0].Path
	case errors.As(err, &re):
		return re.Field
	case errors.As(err, &pe):
		return pe.Field
	}
	return "(no path)"
}

func TestPlanLimit(t *testing.T) {
	spec := &frustumv1.JobSpec{Cluster: dimer(), Task: &frustumv1.JobSpec_Spectrum{}}
	_, err := Plan(spec, ed.Options{Limits: ed.Limits{MaxMemory: 10}})
	var le *ed.LimitError
	if !errors.As(err, &le) || le.Limit != 10 || le.Need <= 10 {
		t.Errorf("Plan over the limit: %v, want an *ed.LimitError naming need and limit", err)
	}
	rep, err := Plan(spec, ed.Options{})
	if err != nil || rep.GetMemoryBytes() <= 0 || rep.GetDimension() != 4 {
		t.Errorf("Plan: %v, %v", rep, err)
	}
}

func TestRunCancelled(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	spec := &frustumv1.JobSpec{Cluster: dimer(), Task: &frustumv1.JobSpec_Magnetization{Magnetization: &frustumv1.MagnetizationParameters{
		Temperatures: []float64{1}, Fields: []float64{1, 2, 3}, Direction: []float64{1, 0, 0}}}}
	if _, err := Run(ctx, spec, ed.Options{}); !errors.Is(err, context.Canceled) {
		t.Errorf("Run with a cancelled context: %v, want context.Canceled", err)
	}
}
